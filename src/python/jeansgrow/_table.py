"""The program's tables as numpy structured arrays, header included."""
import re

import numpy

_PARAMETER = re.compile(r"^# ([a-z_]+(?:\.[A-Za-z0-9_]+)+) = (.*);$")
_ABSENT = re.compile(r"^# (\w+): none \((.*)\)$")


def _value(text):
    """A value as the header writes it (libconfig syntax) as a Python value."""
    text = text.strip()
    if text.startswith('"') and text.endswith('"'):
        return text[1:-1].replace('\\"', '"').replace("\\\\", "\\")
    if text.startswith("["):
        inner = text[1:-1].strip()
        return [float(v) for v in inner.split(",")] if inner else []
    if text in ("true", "false"):
        return text == "true"
    try:
        return int(text)
    except ValueError:
        return float(text)


class Table(numpy.ndarray):
    """A table of the program: a numpy structured array with one field per
    column, named as the column is written ("z", "k_F[1/Mpc]", ...), and
    its header:

    * ``params``: the effective parameters, key -> value (numbers, words
      and file names as str, lists as lists of float);
    * ``title``: the first header line;
    * ``conventions``: the other header lines, in order;
    * ``columns``: the column names, in order (also ``dtype.names``).
    """

    def __array_finalize__(self, obj):
        self.title = getattr(obj, "title", "")
        self.params = getattr(obj, "params", {})
        self.conventions = getattr(obj, "conventions", [])

    @property
    def columns(self):
        return list(self.dtype.names or ())


class Epochs(dict):
    """The epochs table: name -> value (in the unit of ``units[name]``).

    An epoch the universe does not have is not in the dict; ``absent``
    maps its name to the reason, and asking for it raises KeyError with the
    reason. ``params``, ``title`` and ``conventions`` as for Table.
    """

    def __init__(self):
        super().__init__()
        self.units = {}
        self.absent = {}
        self.params = {}
        self.title = ""
        self.conventions = []

    def __missing__(self, name):
        if name in self.absent:
            raise KeyError("%s: none (%s)" % (name, self.absent[name]))
        raise KeyError(name)


def parse_table(text, source="<table>"):
    """A table as the program writes it, from its text: a Table, or Epochs
    for the epochs table."""
    comments, rows, after_columns = [], [], []
    for number, line in enumerate(text.splitlines(), 1):
        if line.startswith("#"):
            (after_columns if rows else comments).append(line)
        elif line.strip():
            rows.append((number, line))
    # The epochs table comments out an absent epoch in its place, which may
    # come before the first row.
    while comments and _ABSENT.match(comments[-1]):
        after_columns.insert(0, comments.pop())
    if not comments:
        raise ValueError("%s: not a jeansgrow table (no header)" % source)
    title = comments[0][2:]
    params, conventions = {}, []
    for line in comments[1:-1]:
        m = _PARAMETER.match(line)
        if m:
            params[m.group(1)] = _value(m.group(2))
        elif line != "# effective parameters:":
            conventions.append(line[2:])
    columns = comments[-1][2:].split("\t")
    if columns == ["name", "value", "unit"]:
        return _epochs(rows, after_columns, title, params, conventions, source)
    values = []
    for number, line in rows:
        fields = line.split("\t")
        if len(fields) != len(columns):
            raise ValueError("%s:%d: %d values, %d columns" % (source, number, len(fields),
                                                               len(columns)))
        values.extend(fields)
    data = numpy.array(values, dtype=float).reshape(len(rows), len(columns))
    table = numpy.empty(len(rows), dtype=[(c, float) for c in columns]).view(Table)
    for i, c in enumerate(columns):
        table[c] = data[:, i]
    table.title, table.params, table.conventions = title, params, conventions
    return table


def _epochs(rows, after_columns, title, params, conventions, source):
    e = Epochs()
    e.title, e.params, e.conventions = title, params, conventions
    for number, line in rows:
        name, value, unit = line.split("\t")
        e[name] = float(value)
        e.units[name] = unit
    for line in after_columns:
        m = _ABSENT.match(line)
        if not m:
            raise ValueError("%s: unexpected comment among the epochs: %s" % (source, line))
        e.absent[m.group(1)] = m.group(2)
    return e


def read_table(path):
    """Any table the program writes (history, epochs, scales, growth, a scan
    or a merged scan), read from `path`: a Table (numpy structured array,
    fields named as the columns) or, for epochs, an Epochs dict."""
    with open(path, encoding="utf-8") as f:
        return parse_table(f.read(), str(path))
