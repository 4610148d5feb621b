"""Loading libjeansgrow.so with ctypes and declaring the functions used."""
import ctypes
import os

_HERE = os.path.dirname(os.path.abspath(__file__))

#: Environment variable naming the shared library to load (a full path).
LIBRARY_VARIABLE = "JEANSGROW_LIBRARY"


def _candidates():
    named = os.environ.get(LIBRARY_VARIABLE)
    if named:
        return [named]
    found = []
    try:  # written by `cmake --install` beside the installed package
        from . import _location
        found.append(_location.library)
    except ImportError:
        pass
    # src/python/jeansgrow -> the repository's build tree
    found.append(os.path.join(_HERE, "..", "..", "..", "build", "libjeansgrow.so"))
    found.append("libjeansgrow.so.0")  # the system's search path
    return found


class Error(ctypes.Structure):
    """struct jg_error (include/jeansgrow/error.h)."""
    _fields_ = [("status", ctypes.c_int),
                ("message", ctypes.c_char * 1024),
                ("source_file", ctypes.c_char_p),
                ("source_line", ctypes.c_int)]


def _load():
    tried = []
    for path in _candidates():
        if os.sep in path and not os.path.exists(path):
            tried.append(path + " (missing)")
            continue
        try:
            return ctypes.CDLL(path)
        except OSError as e:
            tried.append("%s (%s)" % (path, e))
    raise ImportError("jeansgrow: cannot load the jeansgrow library; build it (tests/setup.sh) "
                      "or name it in %s. Tried: %s" % (LIBRARY_VARIABLE, "; ".join(tried)))


lib = _load()

_c = ctypes
_P = _c.c_void_p
_ERR = _c.POINTER(Error)
_DOUBLES = _c.POINTER(_c.c_double)
_SIGNATURES = {
    "jg_version": (_c.c_char_p, []),
    "jg_gsl_handler_off": (None, []),
    "jg_config_new": (_c.c_int, [_c.POINTER(_P), _ERR]),
    "jg_config_load": (_c.c_int, [_c.c_char_p, _c.POINTER(_c.c_char_p), _c.c_int,
                                  _c.POINTER(_P), _ERR]),
    "jg_config_copy": (_c.c_int, [_P, _c.POINTER(_P), _ERR]),
    "jg_config_free": (None, [_P]),
    "jg_config_set_value": (_c.c_int, [_P, _c.c_char_p, _c.c_char_p, _ERR]),
    "jg_config_validate": (_c.c_int, [_P, _ERR]),
    "jg_universe_new": (_c.c_int, [_P, _c.POINTER(_P), _ERR]),
    "jg_universe_free": (None, [_P]),
    "jg_universe_table": (_c.c_int, [_P, _c.c_int, _DOUBLES, _c.c_int, _DOUBLES, _c.c_int,
                                     _c.POINTER(_c.c_void_p), _c.POINTER(_c.c_size_t), _ERR]),
    "jg_free": (None, [_c.c_void_p]),
    "jg_config_scan": (_c.c_int, [_P, _c.POINTER(_c.c_char_p), _c.c_int, _c.c_int,
                                  _c.POINTER(_c.c_void_p), _c.POINTER(_c.c_size_t),
                                  _c.POINTER(_c.c_longlong), _ERR]),
}
for _name, (_result, _args) in _SIGNATURES.items():
    _f = getattr(lib, _name)
    _f.restype = _result
    _f.argtypes = _args

# GSL must never abort the Python process (see include/jeansgrow/error.h).
lib.jg_gsl_handler_off()
