"""Solution verification of a real simulation, which has no exact solution.

The user brings the values of one or more quantities on a few grids;
:func:`assess` returns the extrapolated value, observed order, GCI and
convergence type of one quantity with warnings wherever the data leave the
method's assumptions, and :func:`assess_table` assesses every quantity of a
level table.

Reading the tables and profiles (:func:`~mmsverify.analysis.gridvalues.load_levels`, whose
documentation describes the file format, and
:func:`~mmsverify.analysis.gridvalues.load_profile`) and planning the next grid
(:func:`~mmsverify.analysis.planning.plan`) have modules of their own; their names are
importable from here as well.
"""

import math
from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.celik import as_levels, grid_sizes
from mmsverify.analysis.text import fmt_num, fmt_kv, fmt_pct, fmt_table
from mmsverify.analysis.convergence import ROUNDOFF_LEVEL, far_from_formal, asymptotic_check, classify_convergence
from mmsverify.errors import AnalysisError
from mmsverify.analysis.gci import gci
from mmsverify.analysis.gridvalues import LevelTable, load_levels, load_profile
from mmsverify.analysis.lsq import eca_hoekstra
from mmsverify.analysis.planning import Plan, plan

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


@dataclass(frozen=True)
class Assessment:
    """Discretization-error assessment of one quantity.

    Attributes
    ----------
    name : str
    h, values : tuple of float
        Levels, coarse to fine.
    formal_order : float or None
    gci : GCIResult or None
        Richardson extrapolation and GCI of the finest two or three grids;
        None when the values converged to round-off and the finest two are
        exactly equal (no GCI can be formed).
    convergence : ConvergenceClass or None
        Over all levels (None for two levels).
    least_squares : LeastSquaresUncertainty or None
        Eca & Hoekstra (2014) fit over all levels (four or more).
    asymptotic : AsymptoticCheck or None
        Settling of the orders and floors (four or more levels).
    method : str or None
        Where the reported numbers come from; None when no estimate can be given.
        For values converged to round-off it starts with ``"converged to round-off"``.
    extrapolated, order, uncertainty, relative_uncertainty : float or None
        Estimated exact value, observed order, absolute uncertainty of the
        finest value and that uncertainty relative to the finest value.
        Values converged to round-off have no extrapolated value or order.
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

    def _repr_html_(self):
        """Notebook display: verdict, values, estimate and a figure (see :mod:`mmsverify.analysis.display`)."""
        from mmsverify.analysis.display import assessment_html
        return assessment_html(self)

    def _repr_markdown_(self):
        from mmsverify.analysis.display import assessment_markdown
        return assessment_markdown(self)

    def __str__(self):
        rows = [(f"{h:.6g}", f"{v:.8g}") for h, v in zip(self.h, self.values)]
        order = fmt_num(self.order, ".3g") + ("" if self.formal_order is None else f" (formal {self.formal_order:g})")
        unc = "n/a" if self.uncertainty is None else \
            f"+/- {self.uncertainty:.3g} ({fmt_pct(self.relative_uncertainty)} of the finest value)"
        info = [("convergence", "n/a (two levels)" if self.convergence is None else self.convergence.kind),
                ("observed order", order),
                ("finest value", f"{self.values[-1]:.8g}"),
                ("extrapolated value", fmt_num(self.extrapolated, ".8g")),
                ("uncertainty of finest value", unc),
                ("method", self.method or "none valid")]
        text = (f"quantity {self.name!r}: {len(self.h)} levels, coarse to fine\n" + fmt_table(("h", "value"), rows)
                + "\n" + fmt_kv(info) + f"\nverdict: {self.verdict}")
        if self.warnings:
            text += "\n" + "\n".join("warning: " + w for w in self.warnings)
        return text


def _verdict(rel, method, name):
    if rel is None:
        return f"no valid discretization-error estimate for {name!r}; see the warnings"
    level = ACCEPTANCE_LEVEL
    if within_acceptance(rel):
        return (f"{name!r}: the discretization uncertainty is {fmt_pct(rel)} of the finest value ({method}), below "
                f"{fmt_pct(level, '.2g')} (a common default; the limit that matters is your application's)")
    return (f"{name!r}: the discretization uncertainty is {fmt_pct(rel)} of the finest value ({method}), above "
            f"{fmt_pct(level, '.2g')} (a common default; the limit that matters is your application's): refine "
            "further (the planner, plan() in Python, predicts the grid needed)")


def _roundoff_assessment(name, hs, phi, formal_order, level, conv):
    """The finest two values agree to round-off: report the finest value and the spread as its band."""
    n = len(phi)
    k = min(n, 3)
    finest = phi[-k:]
    spread = float(np.ptp(finest))
    band = level * float(np.max(np.abs(finest)))
    u = max(spread, band)  # identical values do not claim a zero uncertainty
    rel = None if phi[-1] == 0 else u / abs(float(phi[-1]))
    method = f"converged to round-off: spread of the finest {k} values"
    warnings = [f"the finest two values differ by {abs(phi[-1] - phi[-2]):.3g}, within {band:.3g} ({level:.3g} of "
                "the value), i.e. at round-off or solver-tolerance level: no order or GCI can be measured from "
                f"noise; the finest value is reported with the spread of the finest {k} values as its uncertainty"]
    if phi[-1] == phi[-2]:
        warnings.append("the two finest values are exactly equal: if they were written with few digits, write "
                        "more (the spread then rests on the digits, not on the grid)")
    try:
        g = gci(phi[-3:], h=hs[-3:], formal_order=formal_order)
    except AnalysisError:
        g = None
    if rel is None:
        verdict = f"{name!r}: converged to round-off; the finest value is zero, so only the absolute band {u:.3g} is given"
        acceptable = None
    else:
        verdict = (f"{name!r}: converged to round-off; the finest value {phi[-1]:.10g} carries at most "
                   f"+/- {u:.3g} ({fmt_pct(rel)}) of discretization and round-off error")
        acceptable = within_acceptance(rel)
    return Assessment(name, tuple(hs.tolist()), tuple(phi.tolist()), formal_order, g, conv, None, None, method,
                      None, None, u, rel, acceptable, verdict, tuple(warnings))


def assess(values, h=None, cells=None, dim=None, volume=None, name="quantity", formal_order=None, noise=None):
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
    noise : float, optional
        Relative noise level of the values beyond round-off, e.g. the
        relative tolerance of an iterative solver. Changes up to
        ``max(ROUNDOFF_LEVEL, noise) * max|value|`` count as noise
        (:data:`~mmsverify.analysis.convergence.ROUNDOFF_LEVEL` is 1e-10).

    Returns
    -------
    Assessment

    Notes
    -----
    When the finest two values agree to that noise level the quantity has
    converged to round-off: no order or GCI is measured from the noise, and
    the finest value is reported with the spread (max - min) of the finest
    three values as its uncertainty, the convergence kind ``"round-off"``.

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
        hs, phi = as_levels(grid_sizes(h, cells, dim, volume, len(phi)), phi, "values", need=2)
        if np.all(phi == phi[0]):
            raise AnalysisError(
                f"all {len(phi)} values are equal ({phi[0]:g}): the quantity does not change with the grid at "
                "the digits given; write more significant digits, or report it as grid-insensitive")
        if noise is not None and not (math.isfinite(noise) and noise >= 0):
            raise AnalysisError(f"noise must be a non-negative relative level (e.g. 1e-8), got {noise!r}")
        level = max(ROUNDOFF_LEVEL, 0.0 if noise is None else float(noise))
        n = len(phi)
        if abs(phi[-1] - phi[-2]) <= level * float(np.max(np.abs(phi[-3:]))):
            conv = classify_convergence(phi, h=hs, noise=level) if n >= 3 else None
            return _roundoff_assessment(name, hs, phi, formal_order, level, conv)
        g = gci(phi[-3:], h=hs[-3:], formal_order=formal_order)
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
    if g.valid and not (g.status == "oscillatory" and ls is not None):   # four levels and more: least squares
        method = {"two-grid": "two-grid GCI, assumed order",
                  "oscillatory": "GCI_fine21, Celik et al. 2008, oscillatory: with caution"}.get(
                      g.status, "GCI_fine21, Celik et al. 2008")
        ext, p, u, rel = g.phi_ext21, g.p, g.u_fine21, g.gci_fine21
        if g.status != "two-grid" and far_from_formal(p, formal_order):
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

    def _repr_html_(self):
        from mmsverify.analysis.display import assessments_html
        return assessments_html(self)

    def _repr_markdown_(self):
        from mmsverify.analysis.display import assessments_markdown
        return assessments_markdown(self)

    def __getitem__(self, key):
        if isinstance(key, str):
            for r in self.records:
                if r.name == key:
                    return r
            raise KeyError(f"no quantity {key!r}; have {', '.join(r.name for r in self.records)}")
        return self.records[key]

    def __str__(self):
        rows = [(r.name, f"{r.values[-1]:.8g}", fmt_num(r.extrapolated, ".8g"), fmt_num(r.order, ".3g"),
                 fmt_num(r.uncertainty, ".3g"), fmt_pct(r.relative_uncertainty),
                 "n/a" if r.convergence is None else r.convergence.kind,
                 {True: "yes", False: "NO", None: "n/a"}[r.acceptable], str(len(r.warnings)))
                for r in self.records]
        text = (f"discretization error of {len(self.records)} quantities from {self.source}\n"
                + fmt_table(("quantity", "finest", "extrapolated", "p", "+/-", "relative", "convergence",
                          f"within {fmt_pct(ACCEPTANCE_LEVEL, '.2g')}", "warnings"), rows))
        for r in self.records:
            for w in r.warnings:
                text += f"\n{r.name}: warning: {w}"
        return text


def assess_table(table, names=None, formal_order=None, noise=None):
    """Assess several quantities at once.

    Parameters
    ----------
    table : LevelTable or str or path-like
        A table from :func:`load_levels`, or the path of one.
    names : sequence of str, optional
        Quantities to assess (default: all, in file order).
    formal_order : float, optional
        Overrides the file's ``formal_order`` setting.
    noise : float, optional
        Relative noise level of the values (solver tolerance), as in :func:`assess`.

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
            recs.append(assess(table.values(nm), h=table.h, name=nm, formal_order=fo, noise=noise))
        except AnalysisError as exc:
            raise AnalysisError(f"{table.path}: {exc}") from None
    return AssessmentTable(table.path, tuple(recs))
