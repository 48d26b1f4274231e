"""Level tables and profiles from files: the input of solution verification.

:func:`load_levels` reads the values of one or more quantities on a few grid
levels from a small table of our own format; :func:`load_profile` reads one
grid's profile or field. Both are importable from :mod:`mmsverify.analysis.estimate`
as well, which assesses what they read.

Level tables (``load_levels``)
------------------------------
CSV (any suffix but ``.toml``)::

    # comment lines and trailing comments start with '#'
    dim = 2                  # settings, before the header: dim, volume, formal_order
    cells, lift, drag        # header: 'cells' (cell counts) or 'h' (grid sizes), then quantities
    4500,  5.863, 0.1031     # one row per grid level
    8000,  5.972, 0.1012
    18000, 6.063, 0.1004

Rows may run coarse to fine or fine to coarse, but not mixed. ``dim`` is
needed with ``cells``; ``volume`` (domain size, default 1) only scales ``h``.

TOML (``.toml``)::

    dim = 2
    formal_order = 2
    [levels]
    cells = [4500, 8000, 18000]
    lift = [5.863, 5.972, 6.063]
"""

import math
import os
from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.celik import representative_h
from mmsverify.analysis.text import fmt_num, fmt_table
from mmsverify.errors import AnalysisError

__all__ = ["load_levels", "LevelTable", "load_profile"]

_SETTINGS = {"dim": int, "volume": float, "formal_order": float}


@dataclass(frozen=True)
class LevelTable:
    """Grid levels and the quantities computed on them, read by :func:`load_levels`.

    Attributes
    ----------
    path : str
    size_column : str
        ``"cells"`` or ``"h"``.
    sizes : tuple of float
        The size column as written, reordered coarse to fine.
    h : tuple of float
        Representative grid sizes, coarse to fine.
    dim, volume, formal_order : int, float, float or None
        Settings from the file (or the caller).
    names : tuple of str
        Quantity names, in file order.
    columns : tuple of tuple of float
        Values of each quantity, coarse to fine.
    lines : tuple of int or None
        File line of each level (CSV), coarse to fine.
    reversed : bool
        True if the file listed the levels fine to coarse.
    """

    path: str
    size_column: str
    sizes: tuple
    h: tuple
    dim: object
    volume: object
    formal_order: object
    names: tuple
    columns: tuple
    lines: object
    reversed: bool

    def values(self, name):
        """Values of one quantity, coarse to fine."""
        if name not in self.names:
            raise AnalysisError(f"{self.path}: no quantity {name!r}; the file has {', '.join(self.names)}")
        return self.columns[self.names.index(name)]

    def __str__(self):
        rows = [(fmt_num(s, ".8g"), f"{h:.6g}", *(fmt_num(c[i], ".8g") for c in self.columns))
                for i, (s, h) in enumerate(zip(self.sizes, self.h))]
        head = (self.size_column, "h") if self.size_column == "cells" else ("h", "h (same)")
        note = " (listed fine to coarse in the file; reordered)" if self.reversed else ""
        return f"{self.path}: {len(self.h)} levels, coarse to fine{note}\n" + fmt_table(head + self.names, rows)


def _read_text(path, what):
    """The text of a file; an unreadable one raises an AnalysisError naming it as ``what``."""
    try:
        with open(path, encoding="utf-8") as fh:
            return fh.read()
    except OSError as exc:
        raise AnalysisError(f"cannot read {what} {path}: {exc.strerror or exc}") from None


def _csv_lines(text):
    """``(line number, line, fields)`` of each line left once ``#`` comments and blanks are cut off."""
    for lineno, raw in enumerate(text.splitlines(), 1):
        line = raw.split("#", 1)[0].strip()
        if line:
            yield lineno, line, [f.strip() for f in line.split(",")]


def _check_width(path, lineno, fields, header, header_line):
    """A data row must have as many fields as the header has columns."""
    if len(fields) != len(header):
        raise AnalysisError(f"{path}, line {lineno}: {len(fields)} fields, but the header on line {header_line} "
                            f"has {len(header)} columns")


def _setting(path, where, key, text):
    if key not in _SETTINGS:
        raise AnalysisError(f"{path}, {where}: unknown setting {key!r}; known settings are "
                            f"{', '.join(_SETTINGS)}")
    try:
        value = _SETTINGS[key](text)
    except (TypeError, ValueError):
        raise AnalysisError(f"{path}, {where}: setting {key!r} must be a number, got {text!r}") from None
    if key == "dim" and value not in (1, 2, 3):
        raise AnalysisError(f"{path}, {where}: dim must be 1, 2 or 3, got {value}")
    if value <= 0:
        raise AnalysisError(f"{path}, {where}: setting {key!r} must be positive, got {value}")
    return value


def _read_csv(path, text):
    settings, header, rows = {}, None, []
    for lineno, line, fields in _csv_lines(text):
        if header is None and "=" in line and "," not in line:
            key, val = (s.strip() for s in line.split("=", 1))
            if key in settings:
                raise AnalysisError(f"{path}, line {lineno}: setting {key!r} given twice")
            settings[key] = _setting(path, f"line {lineno}", key, val)
            continue
        if header is None:
            header, header_line = fields, lineno
            if fields[0].lower() not in ("cells", "h"):
                raise AnalysisError(f"{path}, line {lineno}: the first column must be 'cells' (cell counts) or 'h' "
                                    f"(grid sizes), got {fields[0]!r}")
            names = fields[1:]
            if not names or any(not nm for nm in names):
                raise AnalysisError(f"{path}, line {lineno}: the header needs a name for every quantity column")
            dup = {nm for nm in names if names.count(nm) > 1}
            if dup:
                raise AnalysisError(f"{path}, line {lineno}: quantity names repeat: {', '.join(sorted(dup))}")
            continue
        _check_width(path, lineno, fields, header, header_line)
        nums = []
        for col, f in zip(header, fields):
            try:
                x = float(f)
            except ValueError:
                x = float("nan")
            if not math.isfinite(x):
                raise AnalysisError(f"{path}, line {lineno}, column {col!r}: {f!r} is not a finite number")
            nums.append(x)
        rows.append((lineno, nums))
    if header is None:
        raise AnalysisError(f"{path}: no header line; write e.g. 'cells, lift' (or 'h, lift') before the data rows")
    return settings, header[0].lower(), header[1:], [r[0] for r in rows], [r[1] for r in rows]


def _read_toml(path, text):
    try:
        import tomllib
    except ImportError:  # Python < 3.11
        try:
            import tomli as tomllib
        except ImportError:
            raise AnalysisError(f"{path}: reading TOML needs Python 3.11 or the 'tomli' package; "
                                "or write the table as CSV") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise AnalysisError(f"{path}: not valid TOML: {exc}") from None
    levels = data.pop("levels", None)
    settings = {}
    for key, val in data.items():
        if isinstance(val, dict):
            raise AnalysisError(f"{path}: unknown table [{key}]; the file needs one [levels] table")
        settings[key] = _setting(path, f"key {key!r}", key, val)
    if not isinstance(levels, dict) or not levels:
        raise AnalysisError(f"{path}: no [levels] table; add one with 'cells = [...]' (or 'h = [...]') and one "
                            "array per quantity")
    size_keys = [k for k in levels if k.lower() in ("cells", "h")]
    if len(size_keys) != 1:
        raise AnalysisError(f"{path}: [levels] needs exactly one of 'cells' or 'h', found {size_keys or 'neither'}")
    columns = {}
    for key, arr in levels.items():
        if not isinstance(arr, list) or not all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in arr):
            raise AnalysisError(f"{path}: [levels] {key!r} must be an array of numbers")
        if not all(math.isfinite(x) for x in arr):
            raise AnalysisError(f"{path}: [levels] {key!r} holds a non-finite number")
        columns[key] = [float(x) for x in arr]
    n = len(columns[size_keys[0]])
    for key, arr in columns.items():
        if len(arr) != n:
            raise AnalysisError(f"{path}: [levels] {key!r} has {len(arr)} values but {size_keys[0]!r} has {n}")
    names = [k for k in columns if k != size_keys[0]]
    if not names:
        raise AnalysisError(f"{path}: [levels] has grid sizes but no quantity arrays")
    rows = [[columns[size_keys[0]][i]] + [columns[k][i] for k in names] for i in range(n)]
    return settings, size_keys[0].lower(), names, None, rows


def load_levels(path, dim=None):
    """Read grid levels and quantity values from a small CSV or TOML table.

    The format is described in the module documentation: settings
    (``dim``, ``volume``, ``formal_order``), then a ``cells`` or ``h``
    column and one column per quantity, one row per level.

    Parameters
    ----------
    path : str or path-like
        ``.toml`` files are read as TOML, anything else as CSV.
    dim : int, optional
        Space dimensions, if the file does not say (needed with ``cells``).

    Returns
    -------
    LevelTable
        Levels ordered coarse to fine.

    Raises
    ------
    AnalysisError
        Unreadable file, malformed line (named by number), missing ``dim``,
        fewer than two levels, or sizes that are not strictly refined.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "lift.csv").write_text("dim = 2\\ncells, lift\\n4500, 5.863\\n8000, 5.972\\n18000, 6.063\\n")
    >>> t = load_levels(d / "lift.csv")
    >>> t.names, t.values("lift")
    (('lift',), (5.863, 5.972, 6.063))
    """
    path = os.fspath(path)
    text = _read_text(path, "level table")
    reader = _read_toml if path.lower().endswith(".toml") else _read_csv
    settings, size_col, names, lines, rows = reader(path, text)
    if dim is not None:
        if "dim" in settings and settings["dim"] != dim:
            raise AnalysisError(f"{path}: the file says dim = {settings['dim']} but dim = {dim} was passed")
        settings["dim"] = _setting(path, "argument", "dim", dim)
    if len(rows) < 2:
        raise AnalysisError(f"{path}: {len(rows)} data row(s); give at least two levels (three or more recommended)")
    sizes = np.array([r[0] for r in rows])
    where = (lambda i: f"line {lines[i]}") if lines else (lambda i: f"level {i + 1}")
    bad = np.nonzero(sizes <= 0)[0]
    if bad.size:
        raise AnalysisError(f"{path}, {where(int(bad[0]))}: {size_col} must be positive, got {sizes[bad[0]]:g}")
    finer = np.diff(sizes) > 0 if size_col == "cells" else np.diff(sizes) < 0
    coarser = np.diff(sizes) < 0 if size_col == "cells" else np.diff(sizes) > 0
    rev = bool(np.all(coarser))
    if not (np.all(finer) or rev):
        i = int(np.nonzero(~(finer if finer[0] else coarser))[0][0]) + 1
        raise AnalysisError(f"{path}, {where(i)}: {size_col} = {sizes[i]:g} breaks the order of the levels (after "
                            f"{sizes[i - 1]:g}); list the levels coarse to fine (or fine to coarse) and drop repeated grids")
    order = np.arange(len(rows))[::-1] if rev else np.arange(len(rows))
    sizes = sizes[order]
    if size_col == "cells":
        if "dim" not in settings:
            raise AnalysisError(f"{path}: cell counts need the number of dimensions; add a line 'dim = 2' (or 1, 3) "
                                "before the header")
        hs = representative_h(sizes, settings["dim"], settings.get("volume"))
    else:
        hs = sizes
    cols = tuple(tuple(float(rows[i][j + 1]) for i in order) for j in range(len(names)))
    return LevelTable(path, size_col, tuple(sizes.tolist()), tuple(float(x) for x in hs), settings.get("dim"),
                      settings.get("volume"), settings.get("formal_order"), tuple(names), cols,
                      None if lines is None else tuple(lines[i] for i in order), rev)


def load_profile(path, column=None):
    """Read one grid's profile or field: coordinate columns, then value columns.

    CSV with ``#`` comments and a header whose leading columns are named
    ``x``, ``y``, ``z`` (one to three of them, in that order) and whose
    other columns are quantities.

    Parameters
    ----------
    path : str or path-like
    column : str, optional
        Quantity to return; needed when the file has more than one.

    Returns
    -------
    points : ndarray, shape (n,) or (n, d)
    values : ndarray, shape (n,)

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "u.csv").write_text("x, u\\n0.0, 1.0\\n0.5, 1.5\\n1.0, 2.0\\n")
    >>> load_profile(d / "u.csv")
    (array([0. , 0.5, 1. ]), array([1. , 1.5, 2. ]))
    """
    path = os.fspath(path)
    text = _read_text(path, "profile")
    header, rows = None, []
    for lineno, line, fields in _csv_lines(text):
        if header is None:
            header, header_line = fields, lineno
            continue
        _check_width(path, lineno, fields, header, header_line)
        try:
            nums = [float(f) for f in fields]
        except ValueError:
            raise AnalysisError(f"{path}, line {lineno}: every field must be a number, got {line!r}") from None
        if not all(math.isfinite(x) for x in nums):
            raise AnalysisError(f"{path}, line {lineno}: non-finite number in {line!r}")
        rows.append(nums)
    if header is None or len(rows) < 2:
        raise AnalysisError(f"{path}: needs a header (e.g. 'x, u') and at least two rows of points")
    ncoord = 0
    while ncoord < min(3, len(header)) and header[ncoord].lower() == "xyz"[ncoord]:
        ncoord += 1
    quantities = header[ncoord:]
    if ncoord == 0 or not quantities:
        raise AnalysisError(f"{path}, line {header_line}: the header must start with coordinate columns x[, y[, z]] "
                            f"followed by at least one quantity, got {', '.join(header)}")
    if column is None:
        if len(quantities) > 1:
            raise AnalysisError(f"{path}: several quantities ({', '.join(quantities)}); choose one with column=")
        column = quantities[0]
    if column not in quantities:
        raise AnalysisError(f"{path}: no column {column!r}; quantities are {', '.join(quantities)}")
    data = np.array(rows)
    pts = data[:, 0] if ncoord == 1 else data[:, :ncoord]
    return pts, data[:, header.index(column)]
