"""jeansgrow from Python: the program's tables as numpy arrays, in-process.

The library (libjeansgrow.so) is called through ctypes; nothing runs the
program. Three lines give a table::

    import jeansgrow
    scales = jeansgrow.compute("scales", "params/reference.cfg",
                               set={"cosmology.baryon_density_h2": 0.03})
    scales["z"], scales["k_F[1/Mpc]"]

Every table is a numpy structured array whose fields are the column names
as the program writes them, with the table's header (effective parameters,
conventions) beside it; the epochs are a dict. To ask one cosmology many
questions, build it once::

    u = jeansgrow.Universe("params/reference.cfg")
    u.scales(z=[200, 50, 20])          # the history is not rebuilt
    u.growth(z=20, k=[10, 100, 1000])

Errors are exceptions carrying the program's message: InputError (a
ValueError) for bad input, RunError for a failure during the computation.

The library is found in the repository's build/ folder, where
`cmake --install` put it, or where the environment variable
JEANSGROW_LIBRARY says.
"""
import ctypes
import os
import weakref

import numpy

from ._errors import InputError, JeansgrowError, OutOfMemory, RunError, error_for
from ._library import Error as _Error
from ._library import lib as _lib
from ._table import Epochs, Table, parse_table, read_table

__all__ = ["compute", "read_table", "parse_table", "scan", "Parameters", "Universe", "Table",
           "Epochs", "JeansgrowError", "InputError", "RunError", "OutOfMemory", "version",
           "TABLES"]

#: The tables compute() and Universe.table() make, as the program's commands.
TABLES = ("history", "epochs", "scales", "growth")


def version():
    """The version of the loaded library ("0.1.0")."""
    return _lib.jg_version().decode()


__version__ = version()


def _usable_cores():
    # The cores this process may run on (its CPU affinity), not all the
    # machine's: a batch job given 4 cores of a large node gets 4 threads.
    try:
        return max(len(os.sched_getaffinity(0)), 1)
    except (AttributeError, OSError):
        return os.cpu_count() or 1


def _call(function, *args):
    err = _Error()
    status = function(*args, ctypes.byref(err))
    if status != 0:
        raise error_for(status, err.message.decode("utf-8", "replace"))


def _number(v):
    return repr(float(v))


def _literal(value):
    """A Python value written as in a parameter file."""
    if isinstance(value, (bool, numpy.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, numpy.integer)):
        return str(int(value))
    if isinstance(value, (float, numpy.floating)):
        return _number(value)
    if isinstance(value, os.PathLike):
        value = os.fspath(value)
    if isinstance(value, str):
        return '"%s"' % value.replace("\\", "\\\\").replace('"', '\\"')
    try:
        return "[%s]" % ", ".join(_number(v) for v in value)
    except TypeError:
        raise TypeError("jeansgrow: cannot write %r as a parameter value (numbers, text, "
                        "booleans and lists of numbers)" % (value,)) from None


def _overrides(set):
    """`set` as the program's --set texts: a dict key -> Python value, or
    texts "key=value" with the value written as in a parameter file."""
    if set is None:
        return []
    if isinstance(set, dict):
        return ["%s=%s" % (k, _literal(v)) for k, v in set.items()]
    if isinstance(set, str):
        return [set]
    return [str(s) for s in set]


class Parameters:
    """A parameter set (the library's opaque jg_config).

    Parameters(path, set) reads a parameter file with overrides exactly as
    the program does with --set; Parameters() starts from the documented
    defaults. `set` is a dict key -> value (numbers, text, booleans, lists
    of numbers) or a list of "key=value" texts.
    """

    def __init__(self, path=None, set=None):
        handle = ctypes.c_void_p()
        texts = _overrides(set)
        if path is None:
            _call(_lib.jg_config_new, ctypes.byref(handle))
        else:
            encoded = [t.encode() for t in texts]
            array = (ctypes.c_char_p * max(len(encoded), 1))(*encoded)
            _call(_lib.jg_config_load, os.fsencode(path), array, len(encoded),
                  ctypes.byref(handle))
            texts = []
        self._handle = handle
        self._finalizer = weakref.finalize(self, _lib.jg_config_free, handle)
        self.path = None if path is None else os.fspath(path)
        self.set(texts)

    def set(self, values, value=None):
        """Set keys: set({"key": value, ...}), set(["key=value", ...]) or
        set("key", value). Types are checked now, ranges and the rules
        between keys when a Universe is built (or by validate())."""
        if value is not None or (isinstance(values, str) and "=" not in values):
            values = {values: value}
        for text in _overrides(values):
            key, _, literal = text.partition("=")
            _call(_lib.jg_config_set_value, self._handle, key.strip().encode(), literal.encode())
        return self

    def validate(self):
        """Check every range and every rule between keys."""
        _call(_lib.jg_config_validate, self._handle)
        return self

    def copy(self):
        other = Parameters.__new__(Parameters)
        handle = ctypes.c_void_p()
        _call(_lib.jg_config_copy, self._handle, ctypes.byref(handle))
        other._handle = handle
        other._finalizer = weakref.finalize(other, _lib.jg_config_free, handle)
        other.path = self.path
        return other


def _doubles(values):
    if values is None:
        return None, 0
    array = numpy.atleast_1d(numpy.asarray(values, dtype=float))
    if array.ndim != 1:
        raise ValueError("jeansgrow: redshifts and wavenumbers are one list of numbers")
    return (ctypes.c_double * len(array))(*array), len(array)


class Universe:
    """One cosmology, built once: the background and the thermal history
    now, the perturbation model at the first scales or growth table. Ask
    for tables at any redshifts and wavenumbers without rebuilding them.
    Several threads may use one Universe at once.

    `params` is a parameter file's path or a Parameters; `set` overrides
    keys as in Parameters.
    """

    def __init__(self, params, set=None):
        if isinstance(params, Parameters):
            params = params.copy().set(_overrides(set))
        else:
            params = Parameters(params, set)
        self.parameters = params
        handle = ctypes.c_void_p()
        try:
            _call(_lib.jg_universe_new, params._handle, ctypes.byref(handle))
        except InputError as e:
            # A cosmology refused as a whole: named by its file, as the
            # program does; a history refusal (a thermal key or one of its
            # tables) names its key and file itself.
            if params.path is not None and not e.message.startswith("thermal."):
                raise error_for(1, "%s: %s" % (params.path, e.message)) from None
            raise
        self._handle = handle
        self._finalizer = weakref.finalize(self, _lib.jg_universe_free, handle)

    def table(self, what, z=None, k=None):
        """The table `what` (one of TABLES): a Table, or Epochs for "epochs".
        z replaces output.redshifts and k perturbations.k_values (1/Mpc)
        for this table only; both are checked as those keys are."""
        if what not in TABLES:
            raise InputError("unknown table '%s' (one of %s)" % (what, ", ".join(TABLES)),
                             "JG_EINVAL")
        z_array, n_z = _doubles(z)
        k_array, n_k = _doubles(k)
        return parse_table(_text_from(_lib.jg_universe_table, self._handle, TABLES.index(what),
                                      z_array, n_z, k_array, n_k), what)

    def history(self, z=None):
        """Ionisation and gas-temperature history (the `history` table)."""
        return self.table("history", z=z)

    def epochs(self):
        """Derived epochs as an Epochs dict (the `epochs` table)."""
        return self.table("epochs")

    def scales(self, z=None):
        """Jeans, filtering and half-suppression scales at each redshift."""
        return self.table("scales", z=z)

    def growth(self, z=None, k=None):
        """Linear growth per (redshift, wavenumber)."""
        return self.table("growth", z=z, k=k)


def _text_from(function, *args, after=()):
    """The text a library function hands out: function(*args, &text, &size,
    *after, &err)."""
    text = ctypes.c_void_p()
    size = ctypes.c_size_t()
    _call(function, *args, ctypes.byref(text), ctypes.byref(size), *after)
    try:
        return ctypes.string_at(text, size.value).decode("utf-8")
    finally:
        _lib.jg_free(text)


def scan(params, vary, set=None, threads=None):
    """The table `jeansgrow scan` writes: `params` (a path or Parameters)
    with the overrides `set`, over the grid of `vary` (a text or a list of
    texts as --vary takes them: "KEY=FROM:TO:N[:log]" or "KEY=[V1, V2]";
    the first varies slowest), on `threads` threads (default: one per core
    this process may use, as the program's scan).
    One row per (grid point, output redshift). A point whose solver fails
    gets no rows and is listed in the header (``table.failed`` counts them).
    """
    if not isinstance(params, Parameters):
        params = Parameters(params, set)
    elif set is not None:
        params = params.copy().set(_overrides(set))
    texts = [vary] if isinstance(vary, str) else list(vary)
    encoded = [t.encode() for t in texts]
    array = (ctypes.c_char_p * max(len(encoded), 1))(*encoded)
    n_threads = threads if threads is not None else _usable_cores()
    failed = ctypes.c_longlong()
    table = parse_table(_text_from(_lib.jg_config_scan, params._handle, array, len(encoded),
                                   int(n_threads), after=(ctypes.byref(failed),)), "scan")
    table.failed = failed.value
    return table


def compute(what, params, set=None):
    """The table the program's command `what` (history, epochs, scales or
    growth) writes for parameter file `params` (or a Parameters) with the
    overrides `set` (a dict key -> value, or "key=value" texts as --set
    takes them): a Table, or an Epochs dict for "epochs"."""
    return Universe(params, set).table(what)
