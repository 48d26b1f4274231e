"""Convergence type of a sequence of levels, and whether it is in the asymptotic range.

:func:`classify_convergence` tells monotone from oscillatory convergence and
from divergence, triplet by triplet; :func:`asymptotic_check` tells whether
the observed orders have settled and whether the errors (or level-to-level
changes) have hit a round-off or iteration floor, and which levels to drop.

Levels are listed coarse to fine (``h`` strictly decreasing). Results are
frozen dataclasses whose ``str()`` is a readable table; a number that cannot
be given is ``None`` and ``str()`` prints ``n/a``.
"""

import math
from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.celik import apparent_order, as_levels
from mmsverify.analysis.text import fmt_num, fmt_table
from mmsverify.errors import AnalysisError

__all__ = [
    "ROUNDOFF_LEVEL",
    "classify_convergence",
    "ConvergenceClass",
    "asymptotic_check",
    "AsymptoticCheck",
    "far_from_formal",
]

_EPS = np.finfo(float).eps

#: Relative size below which level-to-level changes of a quantity count as
#: round-off: 1e-10, about 4.5e5 float64 machine epsilons (eps = 2.2e-16).
#: A quantity taken from a discrete PDE solve carries round-off of about
#: cond(A) eps, and the condition number of a second-order operator grows
#: like h^-2, about 1e4 to 1e6 for 100 to 1000 points per direction; 1e-10
#: covers that with a small margin while staying far below any engineering
#: discretization uncertainty.  # common practice (condition-number bound of round-off)
#: An iterative solver stopped at a relative tolerance above this raises
#: the level (``noise`` arguments).
ROUNDOFF_LEVEL = 1e-10


# --------------------------------------------------------------------------
# convergence type
# --------------------------------------------------------------------------

_ADVICE = {
    "monotone": (
        "Richardson extrapolation and the GCI apply. Check that the observed order is near the formal "
        "order, and with four or more levels that the orders have settled (asymptotic_check)."),
    "oscillatory": (
        "The GCI of oscillatory convergence is to be used with caution (Celik et al. 2008). Refine further until "
        "the sign pattern settles, report the spread of the values as a band, or estimate from four or more "
        "levels by least squares (Eca and Hoekstra 2014)."),
    "divergent": (
        "The differences grow as the grid is refined: the grids are outside the asymptotic range or "
        "something is wrong (iterations not converged, inconsistent boundary data, a coding mistake). "
        "Tighten the iterative convergence and check the model, then refine further; no error estimate "
        "can be given."),
    "scattered": (
        "The levels follow no single pattern. Look for levels outside the asymptotic range or for noise "
        "(iteration error, round-off) in the observed orders of successive pairs, or estimate from all levels by "
        "least squares (Eca and Hoekstra 2014)."),
    "round-off": (
        "The finest levels agree to within round-off (or the solver's tolerance) of the value: the quantity has "
        "converged as far as the arithmetic can show, and no order or GCI can be measured from noise. Report "
        "the finest value with the spread of the finest values as its uncertainty; if that spread matters, "
        "solve more tightly or in higher precision rather than refining further."),
    "insensitive": (
        "The values do not change between the finest levels (to round-off): the quantity is insensitive "
        "to the grid here, or it was written with too few digits. Output more significant digits; if the "
        "values really agree, the discretization error is below round-off and no GCI is needed."),
}


@dataclass(frozen=True)
class ConvergenceClass:
    """Convergence type of a sequence of levels.

    Attributes
    ----------
    kind : str
        ``"monotone"``, ``"oscillatory"``, ``"divergent"``, ``"scattered"``, ``"insensitive"``
        or (only when a ``noise`` level is given) ``"round-off"``.
    detail : str
        A finer description, e.g. ``"oscillatory divergence"``.
    ratios : tuple
        ``R_k = (phi[k+2]-phi[k+1]) / (phi[k+1]-phi[k])`` for each triplet of
        consecutive levels (finer change over coarser change); None for 0/0.
    limits : tuple of float
        The value of ``R`` above which a triplet counts as divergent: 1 for a
        constant ratio, ``ln(h[k+1]/h[k+2]) / ln(h[k]/h[k+1])`` in general (order -> 0).
    triplets : tuple of str
        Type of each triplet.
    advice : str
        What to do.
    """

    kind: str
    detail: str
    ratios: tuple
    limits: tuple
    triplets: tuple
    advice: str

    def __str__(self):
        rows = [(f"{k}-{k + 2}", fmt_num(r, ".4g"), f"{lim:.4g}", t)
                for k, (r, lim, t) in enumerate(zip(self.ratios, self.limits, self.triplets))]
        return (f"convergence: {self.kind} ({self.detail})\n"
                + fmt_table(("levels", "R", "R limit", "type"), rows) + f"\nadvice: {self.advice}")


def classify_convergence(phi, h=None, tol=None, *, noise=None):
    """Classify the convergence of three or more levels (coarse to fine).

    For each triplet of consecutive levels ``R = (phi3 - phi2)/(phi2 - phi1)``
    in coarse-to-fine numbering (the change on the finer pair over the change
    on the coarser pair): ``0 < R < L`` monotone convergence, ``-L < R < 0``
    oscillatory convergence, ``R >= L`` monotone divergence, ``R <= -L``
    oscillatory divergence. ``L = 1`` without ``h`` (constant ratio); with
    ``h`` it is ``ln(h2/h3)/ln(h1/h2)``, the value of ``R`` for an order
    tending to zero, so that non-constant ratios are judged fairly.
    A difference within ``tol`` of zero counts as zero.

    Parameters
    ----------
    phi : array_like
        Values, coarse to fine, at least three.
    h : array_like, optional
        Grid sizes, coarse to fine.
    tol : float, optional
        Absolute tolerance for a zero difference; default ``64 eps max|phi|``.
    noise : float, optional
        Relative noise level of the values (round-off, solver tolerance),
        e.g. :data:`ROUNDOFF_LEVEL`. When given, differences up to
        ``noise * max|phi|`` of the finest three levels count as zero, and
        the kind is ``"round-off"`` when the finest two levels agree to
        that: the last change is noise, so it shows no convergence type.

    Returns
    -------
    ConvergenceClass
        Overall ``kind``: ``"round-off"`` as above; the common type of all
        triplets; ``"divergent"`` when all diverge; ``"insensitive"`` when the
        finest levels agree to ``tol`` and nothing diverges; ``"scattered"``
        for a mixture.

    Examples
    --------
    >>> classify_convergence([5.863, 5.972, 6.063]).kind
    'monotone'
    >>> classify_convergence([6.0909, 5.9624, 6.0042]).kind
    'oscillatory'
    >>> classify_convergence([1.0, 1.1, 1.3]).detail
    'monotone divergence'
    """
    phi = np.asarray(phi, dtype=float)
    if phi.ndim != 1 or len(phi) < 3:
        raise AnalysisError(f"classifying convergence needs values on at least three levels, got {phi.size}; "
                            "run a third grid")
    if not np.all(np.isfinite(phi)):
        raise AnalysisError(f"values must be finite numbers, got {phi.tolist()}")
    if h is not None:
        h, _ = as_levels(h, phi, "phi", need=3)
        lh = np.log(h[:-1] / h[1:])
        limits = lh[1:] / lh[:-1]
    else:
        limits = np.ones(len(phi) - 2)
    if tol is None:
        tol = 64 * _EPS * max(float(np.max(np.abs(phi))), np.finfo(float).tiny)
    d = np.diff(phi)
    zero = np.abs(d) <= tol
    if noise is not None:
        if not (math.isfinite(noise) and noise >= 0):
            raise AnalysisError(f"noise must be a non-negative relative level, got {noise!r}")
        band = noise * float(np.max(np.abs(phi[-3:])))
        zero[-2:] |= np.abs(d[-2:]) <= band
    ratios, types = [], []
    for k in range(len(d) - 1):
        lim = float(limits[k])
        if zero[k] and zero[k + 1]:
            ratios.append(None)
            types.append("flat")
        elif zero[k + 1]:
            ratios.append(0.0)
            types.append("converged")
        elif zero[k]:
            ratios.append(math.inf)
            types.append("monotone divergence")
        else:
            R = float(d[k + 1] / d[k])
            ratios.append(R)
            if 0 < R < lim:
                types.append("monotone")
            elif -lim < R < 0:
                types.append("oscillatory")
            elif R >= lim:
                types.append("monotone divergence")
            else:
                types.append("oscillatory divergence")
    kinds = set(types)
    diverging = {"monotone divergence", "oscillatory divergence"}
    if noise is not None and zero[-1]:
        both = bool(zero[-2])
        kind = "round-off"
        detail = (f"the finest {'three' if both else 'two'} levels agree within {band:.3g} "
                  f"({noise:.3g} of max |value|)")
    elif np.all(zero):
        kind, detail = "insensitive", "all values equal to round-off"
    elif kinds <= {"monotone", "converged", "flat"} and types[-1] in ("converged", "flat"):
        kind, detail = "insensitive", "the finest levels agree to round-off"
    elif len(kinds) == 1 and types[0] in ("monotone", "oscillatory"):
        kind, detail = types[0], f"{types[0]} convergence"
    elif kinds <= diverging:
        kind, detail = "divergent", " and ".join(sorted(kinds))
    else:
        kind, detail = "scattered", "mixed: " + ", ".join(types)
    return ConvergenceClass(kind, detail, tuple(ratios), tuple(float(x) for x in limits), tuple(types),
                            _ADVICE[kind])


# --------------------------------------------------------------------------
# asymptotic range and error floors
# --------------------------------------------------------------------------

_ROUNDOFF_FACTOR = 1e3  # common practice: within ~1000 eps of the solution size counts as round-off
_HEALTHY, _STALLED = 0.5, 0.2  # fractions of the reference order: falling / stopped falling
_FAR_FROM_FORMAL = 0.25  # common practice: flag an observed order more than 25 % away from the formal order


def far_from_formal(order, formal_order):
    """Whether an observed order is more than 25 % away from the formal order (False if either is None)."""
    return order is not None and formal_order is not None and abs(order - formal_order) > _FAR_FROM_FORMAL * formal_order


@dataclass(frozen=True)
class AsymptoticCheck:
    """Whether observed orders have settled, and whether errors hit a floor.

    Attributes
    ----------
    kind : str
        ``"error"`` (values are error norms) or ``"solution"`` (values of a quantity).
    h : tuple of float
        Grid sizes, coarse to fine.
    orders : tuple
        Pairwise orders (errors) or triplet apparent orders (solutions); None where undefined.
    spread : float or None
        Max minus min of the finest (up to three) defined orders.
    settled : bool or None
        Spread within ``tol`` (relative to ``max(1, reference order)``); None if fewer than two orders.
    formal_order : float or None
        The design order, if given.
    near_formal : bool or None
        Finest order within ``tol`` (relative) of the formal order.
    floor : str or None
        ``"round-off"``, ``"iteration"`` (a floor well above round-off) or None.
    floor_value : float or None
        Size of the error (or level-to-level change) at the floor.
    drop_levels : tuple of int
        0-based indices of the levels to drop before estimating orders.
    tolerance_hint : float or None
        Iteration tolerance that would take the floor below the discretization error.
    message : str
        The finding and what to do, in words.
    """

    kind: str
    h: tuple
    orders: tuple
    spread: object
    settled: object
    formal_order: object
    near_formal: object
    floor: object
    floor_value: object
    drop_levels: tuple
    tolerance_hint: object
    message: str

    def __str__(self):
        label = "pair" if self.kind == "error" else "triplet"
        rows = [(f"{self.h[k]:.4g} -> {self.h[k + (1 if self.kind == 'error' else 2)]:.4g}", fmt_num(p, ".4g"))
                for k, p in enumerate(self.orders)]
        lines = [f"asymptotic check ({self.kind} values, {label} orders)",
                 fmt_table(("levels (h)", "order"), rows),
                 f"spread of finest orders: {fmt_num(self.spread, '.3g')}   settled: {_yesno(self.settled)}"
                 + (f"   near formal order {self.formal_order:g}: {_yesno(self.near_formal)}"
                    if self.formal_order is not None else ""),
                 f"floor: {self.floor or 'none detected'}"
                 + (f" at about {self.floor_value:.3g}" if self.floor_value is not None else ""),
                 f"drop levels (0-based): {list(self.drop_levels) if self.drop_levels else 'none'}",
                 self.message]
        return "\n".join(lines)


def _yesno(b):
    return "n/a" if b is None else ("yes" if b else "no")


def asymptotic_check(h, e_or_phi, formal_order=None, *, kind="error", scale=None, tol=0.1):
    """Check that orders have settled and detect a round-off or iteration floor.

    Parameters
    ----------
    h : array_like
        Grid sizes, coarse to fine.
    e_or_phi : array_like
        Error norms (``kind="error"``, three or more levels) or values of a
        quantity (``kind="solution"``, four or more levels).
    formal_order : float, optional
        Design order; the reference for "settled" and "falling" when given.
    kind : {"error", "solution"}
        What ``e_or_phi`` holds.
    scale : float, optional
        Size of the solution (e.g. max |u|) for the round-off test of error
        norms; for solutions it defaults to ``max |phi|``, for errors to 1.
    tol : float, optional
        Relative tolerance on the spread of orders and the distance to the formal order.

    Returns
    -------
    AsymptoticCheck

    Notes
    -----
    A floor is reported when the error (or level-to-level change) falls at
    an order of at least half the reference order on coarse levels and then
    at less than a fifth of it on every finer level (the ratio of successive
    errors near 1). It is called round-off when its size is within about
    1000 machine epsilons of ``scale``, otherwise an iteration (or other)
    floor, with a hint for the solver tolerance.

    Examples
    --------
    >>> h = [0.1, 0.05, 0.025, 0.0125, 0.00625]
    >>> chk = asymptotic_check(h, [4e-3, 1e-3, 2.6e-4, 2.5e-4, 2.5e-4], formal_order=2)
    >>> chk.floor, chk.drop_levels
    ('iteration', (3, 4))
    >>> asymptotic_check(h, [4e-3, 1e-3, 2.5e-4, 6.25e-5, 1.5625e-5], formal_order=2).settled
    True
    """
    if kind not in ("error", "solution"):
        raise AnalysisError(f"kind must be 'error' or 'solution', got {kind!r}")
    need = 3 if kind == "error" else 4
    h, v = as_levels(h, e_or_phi, "e_or_phi", need=need)
    n = len(h)
    if kind == "error":
        if np.any(v < 0):
            raise AnalysisError(f"error norms must be non-negative, got {v.tolist()}; pass norms, not signed errors")
        proxy, first_level = v, 0
        S = 1.0 if scale is None else float(scale)
    else:
        d = np.diff(v)
        orders = []
        for k in range(n - 2):
            lim = math.log(h[k + 1] / h[k + 2]) / math.log(h[k] / h[k + 1])
            ok = d[k] != 0 and d[k + 1] != 0 and 0 < d[k + 1] / d[k] < lim  # monotone convergence only
            p = apparent_order(h[k + 1] / h[k + 2], h[k] / h[k + 1], -d[k + 1], -d[k])[0] if ok else None
            orders.append(p)
        proxy, first_level = np.abs(d), 1
        S = float(np.max(np.abs(v))) if scale is None else float(scale)
    # stage orders of the proxy sequence (proxy j sits at level j + first_level)
    lvl = np.arange(len(proxy)) + first_level
    with np.errstate(divide="ignore", invalid="ignore"):
        q = np.log(proxy[:-1] / proxy[1:]) / np.log(h[lvl[:-1]] / h[lvl[1:]])
    if kind == "error":  # the stage orders of the errors are the observed pair orders
        orders = [None if not np.isfinite(p) else float(p) for p in q]
    # floor detection
    roundoff = _ROUNDOFF_FACTOR * _EPS * S
    qs = np.where(np.isnan(q), -np.inf, q)  # 0/0 counts as stalled
    coarse_q = q[:max(1, len(q) - 1)]
    coarse_q = coarse_q[np.isfinite(coarse_q)]
    ref = formal_order if formal_order is not None else (float(np.median(coarse_q)) if coarse_q.size else 0.0)
    floor = floor_value = hint = None
    drop = ()
    msgs = []
    if ref > 0:
        stalled = qs < _STALLED * ref
        healthy = qs >= _HEALTHY * ref
        j0 = len(q)
        while j0 > 0 and stalled[j0 - 1]:
            j0 -= 1
        if j0 < len(q) and np.any(healthy[:j0]):
            first_bad = int(lvl[j0 + 1])
            drop = tuple(range(first_bad, n))
            floor_value = float(np.median(proxy[j0 + 1:]))
            what = "errors" if kind == "error" else "level-to-level changes"
            hs = ", ".join(f"{h[i]:g}" for i in drop)
            if floor_value <= roundoff:
                floor = "round-off"
                msgs.append(f"{what} stop falling at about {floor_value:.3g}, within round-off of the solution "
                            f"size {S:.3g}: drop the levels with h = {hs}; finer grids cannot help in double precision.")
            else:
                floor = "iteration"
                good_order = float(np.max(q[:j0][np.isfinite(q[:j0])])) if formal_order is None else formal_order
                expected = float(proxy[j0] * (h[lvl[-1]] / h[lvl[j0]]) ** good_order)
                hint = expected / 10.0
                msgs.append(f"{what} stop falling at about {floor_value:.3g}, far above round-off: an error that "
                            f"does not shrink with h is left, such as iteration error (tighten the solver tolerance "
                            f"below about {hint:.1g}, a tenth of the {'error' if kind == 'error' else 'change'} "
                            f"expected on the finest level), a frozen error of another kind (a fixed time step or "
                            f"grid) or an inconsistent term of the scheme. Find which before dropping the levels "
                            f"with h = {hs}.")
    if floor is None and proxy[-1] <= roundoff:
        msgs.append(f"the finest {'error' if kind == 'error' else 'change'} ({proxy[-1]:.3g}) is at round-off "
                    f"relative to {S:.3g}; its order is noise: drop the level with h = {h[-1]:g}.")
        drop = (n - 1,)
        floor, floor_value = "round-off", float(proxy[-1])
    # settling, judged on the levels that are kept
    span = 1 if kind == "error" else 2
    first_dropped = drop[0] if drop else n
    defined = [p for k, p in enumerate(orders) if p is not None and k + span < first_dropped]
    fin = defined[-3:]
    spread = float(max(fin) - min(fin)) if len(fin) >= 2 else None
    ref_order = formal_order if formal_order is not None else (float(np.median(fin)) if fin else None)
    settled = None if spread is None else spread <= tol * max(1.0, abs(ref_order))
    near = None
    if formal_order is not None and defined:
        near = abs(defined[-1] - formal_order) <= tol * max(1.0, abs(formal_order))
    kept = "" if not drop else " (after dropping the floor levels)"
    if settled is None:
        msgs.append("too few defined orders to judge whether they have settled; add a level.")
    elif settled:
        msgs.append(f"the finest orders{kept} agree within {spread:.3g}: in the asymptotic range.")
    else:
        msgs.append(f"the finest orders{kept} still spread by {spread:.3g}: not yet in the asymptotic range; refine "
                    "further or drop the coarsest level.")
    if near is False:
        msgs.append(f"the finest order {defined[-1]:.3g} is not within {tol:g} (relative) of the formal order "
                    f"{formal_order:g}.")
    return AsymptoticCheck(kind, tuple(h.tolist()), tuple(orders), spread, settled, formal_order, near, floor,
                           floor_value, drop, hint, " ".join(msgs))
