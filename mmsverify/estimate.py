"""Solution verification of a real simulation, which has no exact solution.

The user brings the values of one or more quantities on a few grids;
:func:`assess` returns the extrapolated value, observed order, GCI and
convergence type of one quantity with warnings wherever the data leave the
method's assumptions; :func:`load_levels` reads a small table file of our
own format and :func:`assess_table` assesses every quantity in it;
:func:`plan` predicts the grid and run time needed to reach a target error.

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

from ._celik import _as_levels, _sizes, representative_h
from ._fmt import _fmt, _kv, _pct, _table
from .errors import AnalysisError
from .gci import gci
from .convergence import _far_from_formal, asymptotic_check, classify_convergence
from .lsq import eca_hoekstra
from .planning import Plan, plan

__all__ = [
    "ACCEPTANCE_LEVEL",
    "within_acceptance",
    "assess",
    "Assessment",
    "load_levels",
    "LevelTable",
    "assess_table",
    "AssessmentTable",
    "load_profile",
    "plan",
    "Plan",
]

#: Relative discretization error usually accepted for engineering quantities.
ACCEPTANCE_LEVEL = 0.05  # common practice: about 5 % relative discretization error is a usual acceptance level
_RATIO_TOL = 0.01  # ratios r21 and r32 differing by more than 1 % count as non-constant
_SETTINGS = {"dim": int, "volume": float, "formal_order": float}


def within_acceptance(relative_error, level=ACCEPTANCE_LEVEL):
    """Whether a relative discretization error is within the usual acceptance level.

    Parameters
    ----------
    relative_error : float
        E.g. ``GCI_fine21`` as a fraction (0.022 for 2.2 %).
    level : float, optional
        Acceptance level, 5 % by default (common practice).

    Examples
    --------
    >>> within_acceptance(0.022), within_acceptance(0.08)
    (True, False)
    """
    if relative_error is None or not math.isfinite(relative_error) or relative_error < 0:
        raise AnalysisError(f"relative_error must be a non-negative number, got {relative_error!r}")
    return relative_error <= level


# --------------------------------------------------------------------------
# one quantity
# --------------------------------------------------------------------------

@dataclass(frozen=True)
class Assessment:
    """Discretization-error assessment of one quantity.

    Attributes
    ----------
    name : str
    h, values : tuple of float
        Levels, coarse to fine.
    formal_order : float or None
    gci : GCIResult
        Richardson extrapolation and GCI of the finest two or three grids.
    convergence : ConvergenceClass or None
        Over all levels (None for two levels).
    least_squares : LeastSquaresUncertainty or None
        Eca & Hoekstra (2014) fit over all levels (four or more).
    asymptotic : AsymptoticCheck or None
        Settling of the orders and floors (four or more levels).
    method : str or None
        Where the reported numbers come from; None when no estimate can be given.
    extrapolated, order, uncertainty, relative_uncertainty : float or None
        Estimated exact value, observed order, absolute uncertainty of the
        finest value and that uncertainty relative to the finest value.
    acceptable : bool or None
        Relative uncertainty within :data:`ACCEPTANCE_LEVEL`.
    verdict : str
    warnings : tuple of str
    """

    name: str
    h: tuple
    values: tuple
    formal_order: object
    gci: object
    convergence: object
    least_squares: object
    asymptotic: object
    method: object
    extrapolated: object
    order: object
    uncertainty: object
    relative_uncertainty: object
    acceptable: object
    verdict: str
    warnings: tuple

    def __str__(self):
        rows = [(f"{h:.6g}", f"{v:.8g}") for h, v in zip(self.h, self.values)]
        order = _fmt(self.order, ".3g") + ("" if self.formal_order is None else f" (formal {self.formal_order:g})")
        unc = "n/a" if self.uncertainty is None else \
            f"+/- {self.uncertainty:.3g} ({_pct(self.relative_uncertainty)} of the finest value)"
        info = [("convergence", "n/a (two levels)" if self.convergence is None else self.convergence.kind),
                ("observed order", order),
                ("finest value", f"{self.values[-1]:.8g}"),
                ("extrapolated value", _fmt(self.extrapolated, ".8g")),
                ("uncertainty of finest value", unc),
                ("method", self.method or "none valid")]
        text = (f"quantity {self.name!r}: {len(self.h)} levels, coarse to fine\n" + _table(("h", "value"), rows)
                + "\n" + _kv(info) + f"\nverdict: {self.verdict}")
        if self.warnings:
            text += "\n" + "\n".join("warning: " + w for w in self.warnings)
        return text


def _verdict(rel, method, name):
    if rel is None:
        return f"no valid discretization-error estimate for {name!r}; see the warnings"
    level = ACCEPTANCE_LEVEL
    if within_acceptance(rel):
        return (f"{name!r}: the discretization uncertainty is {_pct(rel)} of the finest value ({method}), within "
                f"the usual {_pct(level, '.2g')} acceptance level")
    return (f"{name!r}: the discretization uncertainty is {_pct(rel)} of the finest value ({method}), above the "
            f"usual {_pct(level, '.2g')} acceptance level: refine further (plan() predicts the grid needed)")


def assess(values, h=None, cells=None, dim=None, volume=None, name="quantity", formal_order=None):
    """Assess the discretization error of one quantity computed on several grids.

    Parameters
    ----------
    values : array_like
        The quantity on each grid, coarse to fine (two or more; three or
        more recommended, four or more add a least-squares fit).
    h : array_like, optional
        Grid sizes, coarse to fine.
    cells : array_like, optional
        Cell counts instead of ``h``; needs ``dim``.
    dim : int, optional
        Space dimensions for ``cells``.
    volume : float, optional
        Domain size for ``cells`` (default 1).
    name : str, optional
        Name used in messages.
    formal_order : float, optional
        Design order of the scheme: compared with the observed order, and
        assumed for two grids.

    Returns
    -------
    Assessment

    Raises
    ------
    AnalysisError
        Fewer than two levels, sizes not refined, equal values, or two
        levels without ``formal_order``.

    Examples
    --------
    >>> a = assess([5.863, 5.972, 6.063], cells=[4500, 8000, 18000], dim=2, name="phi")
    >>> round(a.extrapolated, 4), round(a.order, 2), a.acceptable
    (6.1685, 1.53, True)
    """
    try:
        phi = np.asarray(values, dtype=float)
        if phi.ndim != 1 or len(phi) < 2:
            raise AnalysisError(f"needs values on at least two grids (three or more recommended), got {phi.size}")
        hs, phi = _as_levels(_sizes(h, cells, dim, volume, len(phi)), phi, "values", need=2)
        if np.all(phi == phi[0]):
            raise AnalysisError(
                f"all {len(phi)} values are equal ({phi[0]:g}): the quantity does not change with the grid at "
                "the digits given; write more significant digits, or report it as grid-insensitive")
        g = gci(phi[-3:], h=hs[-3:], formal_order=formal_order)
        n = len(phi)
        conv = classify_convergence(phi, h=hs) if n >= 3 else None
        ls = eca_hoekstra(hs, phi) if n >= 4 else None
        asym = asymptotic_check(hs, phi, formal_order, kind="solution") if n >= 4 else None
    except AnalysisError as exc:
        raise AnalysisError(f"quantity {name!r}: {exc}") from None
    warnings = list(g.warnings)
    if n >= 3 and abs(g.r21 / g.r32 - 1) > _RATIO_TOL:
        warnings.append(f"non-constant refinement ratio (r21 = {g.r21:.3g}, r32 = {g.r32:.3g}): the order comes from "
                        "the fixed-point iteration of Celik et al. (2008) and is more sensitive to noise")
    if conv is not None and n > 3 and conv.kind != g.status and conv.kind in ("scattered", "divergent", "oscillatory"):
        warnings.append(f"over all {n} levels the convergence is {conv.kind} ({conv.detail}). {conv.advice}")
    if asym is not None and asym.floor is not None:
        warnings.append(asym.message)
    if g.valid:
        method = "two-grid GCI, assumed order" if g.status == "two-grid" else "GCI_fine21, Celik et al. 2008"
        ext, p, u, rel = g.phi_ext21, g.p, g.u_fine21, g.gci_fine21
        if g.status != "two-grid" and _far_from_formal(p, formal_order):
            warnings.append(f"observed order {p:.3g} is far from the formal order {formal_order:g}: the grids may be "
                            "outside the asymptotic range, or the scheme is not performing to its design")
    elif ls is not None:
        method = f"least squares over {n} levels, Eca & Hoekstra 2014 ({ls.fit_used}, Fs = {ls.safety_factor:g})"
        ext, p, u, rel = ls.phi0, ls.p, ls.uncertainty_fine, ls.relative_uncertainty_fine
        warnings.append(f"the GCI is not valid here ({g.status}); the least-squares estimate over all {n} levels is "
                        "reported instead")
    else:
        method = ext = p = u = rel = None
    acceptable = None if rel is None else within_acceptance(rel)
    return Assessment(name, tuple(hs.tolist()), tuple(phi.tolist()), formal_order, g, conv, ls, asym, method, ext, p,
                      u, rel, acceptable, _verdict(rel, method, name), tuple(warnings))


# --------------------------------------------------------------------------
# level tables from files
# --------------------------------------------------------------------------

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
        rows = [(_fmt(s, ".8g"), f"{h:.6g}", *(_fmt(c[i], ".8g") for c in self.columns))
                for i, (s, h) in enumerate(zip(self.sizes, self.h))]
        head = (self.size_column, "h") if self.size_column == "cells" else ("h", "h (same)")
        note = " (listed fine to coarse in the file; reordered)" if self.reversed else ""
        return f"{self.path}: {len(self.h)} levels, coarse to fine{note}\n" + _table(head + self.names, rows)


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
    for lineno, raw in enumerate(text.splitlines(), 1):
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        if header is None and "=" in line and "," not in line:
            key, val = (s.strip() for s in line.split("=", 1))
            if key in settings:
                raise AnalysisError(f"{path}, line {lineno}: setting {key!r} given twice")
            settings[key] = _setting(path, f"line {lineno}", key, val)
            continue
        fields = [f.strip() for f in line.split(",")]
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
        if len(fields) != len(header):
            raise AnalysisError(f"{path}, line {lineno}: {len(fields)} fields, but the header on line {header_line} "
                                f"has {len(header)} columns")
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
    try:
        with open(path, encoding="utf-8") as fh:
            text = fh.read()
    except OSError as exc:
        raise AnalysisError(f"cannot read level table {path}: {exc.strerror or exc}") from None
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


@dataclass(frozen=True)
class AssessmentTable:
    """One :class:`Assessment` per quantity of a level table.

    Iterate over it, take ``len()``, or index by position or quantity name.
    """

    source: str
    records: tuple

    def __iter__(self):
        return iter(self.records)

    def __len__(self):
        return len(self.records)

    def __getitem__(self, key):
        if isinstance(key, str):
            for r in self.records:
                if r.name == key:
                    return r
            raise KeyError(f"no quantity {key!r}; have {', '.join(r.name for r in self.records)}")
        return self.records[key]

    def __str__(self):
        rows = [(r.name, f"{r.values[-1]:.8g}", _fmt(r.extrapolated, ".8g"), _fmt(r.order, ".3g"),
                 _fmt(r.uncertainty, ".3g"), _pct(r.relative_uncertainty),
                 "n/a" if r.convergence is None else r.convergence.kind,
                 {True: "yes", False: "NO", None: "n/a"}[r.acceptable], str(len(r.warnings)))
                for r in self.records]
        text = (f"discretization error of {len(self.records)} quantities from {self.source}\n"
                + _table(("quantity", "finest", "extrapolated", "p", "+/-", "relative", "convergence",
                          f"within {_pct(ACCEPTANCE_LEVEL, '.2g')}", "warnings"), rows))
        for r in self.records:
            for w in r.warnings:
                text += f"\n{r.name}: warning: {w}"
        return text


def assess_table(table, names=None, formal_order=None):
    """Assess several quantities at once.

    Parameters
    ----------
    table : LevelTable or str or path-like
        A table from :func:`load_levels`, or the path of one.
    names : sequence of str, optional
        Quantities to assess (default: all, in file order).
    formal_order : float, optional
        Overrides the file's ``formal_order`` setting.

    Returns
    -------
    AssessmentTable

    Examples
    --------
    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "t.csv").write_text("h, a, b\\n0.4, 1.16, 2.32\\n0.2, 1.04, 2.08\\n0.1, 1.01, 2.02\\n")
    >>> res = assess_table(d / "t.csv")
    >>> [round(r.extrapolated, 9) for r in res], [round(r.order, 9) for r in res]
    ([1.0, 2.0], [2.0, 2.0])
    """
    if not isinstance(table, LevelTable):
        table = load_levels(table)
    chosen = table.names if names is None else tuple(names)
    for nm in chosen:
        table.values(nm)  # raises with the list of names
    fo = table.formal_order if formal_order is None else formal_order
    recs = []
    for nm in chosen:
        try:
            recs.append(assess(table.values(nm), h=table.h, name=nm, formal_order=fo))
        except AnalysisError as exc:
            raise AnalysisError(f"{table.path}: {exc}") from None
    return AssessmentTable(table.path, tuple(recs))


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
    try:
        with open(path, encoding="utf-8") as fh:
            text = fh.read()
    except OSError as exc:
        raise AnalysisError(f"cannot read profile {path}: {exc.strerror or exc}") from None
    header, rows = None, []
    for lineno, raw in enumerate(text.splitlines(), 1):
        line = raw.split("#", 1)[0].strip()
        if not line:
            continue
        fields = [f.strip() for f in line.split(",")]
        if header is None:
            header, header_line = fields, lineno
            continue
        if len(fields) != len(header):
            raise AnalysisError(f"{path}, line {lineno}: {len(fields)} fields, but the header on line {header_line} "
                                f"has {len(header)} columns")
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
