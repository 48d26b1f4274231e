"""The verdict: does the observed order match the formal order?

One :class:`Verdict` per field and norm (and per reported quantity). The
verdict is decided from error models fitted over all levels that succeeded
(:mod:`mmsverify.analysis.errormodel`), never from the last pair alone:

1. Levels whose error is at or below round-off (:data:`ROUNDOFF` times the
   solution's size) are left out and named.
2. A tail of levels on which the error stopped falling is a *floor*. It is
   round-off when the error grows as the size shrinks, otherwise an error
   that does not shrink with the refined size (a frozen resolution of the
   other kind, or iteration error). The levels before it are judged; a floor
   leaves the verdict inconclusive unless those levels show the order is off.
3. A weighted least-squares line of ``ln e`` on ``ln h`` gives the observed
   order with a 95 % interval (Eca and Hoekstra 2014); so does the same line
   over the finest three levels alone, which, when they lie on one power
   law, are taken as the asymptotic range (Roy 2005). With four or more
   levels that bend away from that line, a model with the next term,
   ``e = C h**p + D h**(p+q)`` for ``q`` = 1 and 2, gives the asymptotic order;
   levels where the next term still moves the local order by more than the
   tolerance are outside the asymptotic range (Roy 2005). Fits are compared
   by their standard deviations over their degrees of freedom (Eca and
   Hoekstra 2014), and the next term must pass the extra-sum-of-squares
   F-test. Residuals that the next term does not explain are *scattered*
   (noise around a trend).
4. The order is off (``below``/``above``) only when the interval lies
   outside ``formal +- tolerance`` (and, for levels that bend, the intervals
   of every next term that fits as well and of the finest three levels; for
   scattered levels, of every next term that fits better than the line).
   Linf on grids the solver reports irregular is off only more than half an
   order away (see ``_WORST_CELL``).
   It is confirmed when the estimate lies within it (for scattered levels:
   when the interval also holds the formal order and lies within a quarter
   of it), or when the levels follow ``C h**formal + D h**(formal+q)`` to
   2 % (converging to the formal order from outside the asymptotic range);
   otherwise inconclusive.

A rule may be one-sided (``at_least``): anything from ``formal - tolerance``
up is confirmed, for superconvergent functionals and nodal sampling.
"""

import math
from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.errormodel import CONFIDENCE, bend_fit, f_quantile, find_floor, fixed_fit, power_fit
from mmsverify.errors import AnalysisError
from mmsverify.problem.rules import check_rule

__all__ = ["Verdict", "judge", "ROUNDOFF", "KINDS"]

#: Errors below this fraction of the solution's size are treated as round-off.
ROUNDOFF = 1e-11  # common practice: a few hundred ulps of double precision

#: What the levels show, as :attr:`Verdict.kind` names it.
KINDS = ("formal order", "another order", "scattered", "pre-asymptotic", "round-off floor", "frozen floor",
         "too few levels", "exact", "irregular grid")

_SMOOTH = 0.02      # rms of ln e below which the levels lie on one power law  # common practice (2 % error noise)
#: Exponents q of the next term h^(p+q) tried: 1 and 2, as in the Taylor series of a scheme  # common practice
_NEXT_TERMS = (1.0, 2.0)
_RIVAL = 2.0        # a next term whose rms residual is within this factor of the best one fits as well
_EXPLAINED = 3.0    # the next term must cut the rms residual this many times to explain a bend
_EPS = np.finfo(float).eps
#: A floor that grows under refinement is round-off only this small relative to the solution; round-off of a
#: solve grows like cond(A) eps, about 1e-10 to 1e-8 for a million unknowns  # common practice
_ROUNDOFF_GROWTH = 1e-7
#: Errors that never fall and stay above this fraction of the solution's size are no solver tolerance: where
#: nothing else is held fixed, the solver does not converge  # common practice (tolerances are far tighter)
_NOT_CONVERGING = 0.01


@dataclass(frozen=True)
class Verdict:
    """Outcome for one field and norm.

    ``status`` is ``"confirmed"``, ``"below"`` or ``"above"`` (the evidence
    says the order is off) or ``"inconclusive"`` (the levels cannot decide:
    too few, a floor, not yet in the asymptotic range). ``kind`` says what
    the levels show (one of :data:`KINDS`), ``interval`` the 95 % interval of
    ``observed`` (None when two levels give none), ``at_least`` whether the
    rule was one-sided and ``left_out`` the levels not fitted (round-off or
    a floor).
    """

    field: str
    norm: str
    formal: float
    observed: float
    tolerance: float
    status: str
    reason: str
    kind: str = ""
    interval: tuple = None
    at_least: bool = False
    left_out: tuple = ()

    @property
    def ok(self):
        return self.status == "confirmed"

    def __str__(self):
        return f"{self.field} {self.norm}: {self.status.upper()} - {self.reason}"


def _num(x, *edges, digits=2):
    """``x`` with two decimals, or as many more as it takes to compare with each of ``edges`` as ``x`` does."""
    if x is None or not math.isfinite(x):
        return "n/a"

    def agrees(d):
        r = round(x, d)
        return all(not math.isfinite(a) or (r > a) == (x > a) and (r < a) == (x < a) for a in edges)

    while digits < 8 and not agrees(digits):
        digits += 1
    return f"{x:.{digits}f}".replace("-0.00", "0.00") if round(x, digits) == 0 else f"{x:.{digits}f}"


def _span(levels):
    return f"levels {levels[0]}-{levels[-1]}" if len(levels) > 1 else f"level {levels[0]}"


def _sd(rms, n, parameters):
    """Standard deviation of a fit with ``parameters`` parameters from its rms residual over ``n`` levels."""
    return rms * math.sqrt(n / (n - parameters))


def _decide(h, e, levels, formal, tol, at_least):
    """Status, kind, estimate, interval and reason from the fitted models of the levels given."""
    n = len(h)
    lo_band, hi_band = formal - tol, (math.inf if at_least else formal + tol)
    pf = power_fit(h, e)
    p, low, high, kind, note = pf.p, pf.low, pf.high, "formal order", ""
    bends = ()
    fine = power_fit(h[-3:], e[-3:]) if n >= 4 else None    # the finest three levels: the asymptotic range
    if fine is not None and fine.rms <= _SMOOTH and lo_band <= fine.p <= hi_band and not (
            pf.rms <= _SMOOTH and lo_band <= pf.p <= hi_band):
        return "confirmed", "formal order", fine.p, (fine.low, fine.high), (
            f"observed {_num(fine.p, lo_band, hi_band)} [{_num(fine.low, lo_band, hi_band)}, "
            f"{_num(fine.high, lo_band, hi_band)}] (weighted least squares over {_span(levels[-3:])}); "
            + (f"formal {formal:g}, at least {lo_band:g}" if at_least else f"formal {formal:g} +- {tol:g}")
            + f"; within the tolerance on the finest three levels, which lie on one power law (in the asymptotic "
            f"range); over all {n} levels the order is {_num(pf.p)}, the coarser levels are not yet in that range")
    if fine is not None and not (pf.rms <= _SMOOTH and lo_band <= pf.p <= hi_band):
        follows = min((fixed_fit(h, e, formal, q), q) for q in _NEXT_TERMS)
        if follows[0] <= _SMOOTH:
            return "confirmed", "formal order", fine.p, (fine.low, fine.high), (
                f"observed {_num(fine.p)} [{_num(fine.low)}, {_num(fine.high)}] on the finest three levels, "
                f"{_num(pf.p)} over {_span(levels)} (weighted least squares); "
                + (f"formal {formal:g}, at least {lo_band:g}" if at_least else f"formal {formal:g} +- {tol:g}")
                + f"; converging to the formal order: the errors follow C h^{formal:g} + D h^{formal + follows[1]:g} "
                f"to {100 * follows[0]:.2g} % (rms), so the levels approach it from outside the asymptotic range "
                "(add a finer level to see it settle)")
    if n >= 4 and pf.rms > _SMOOTH:
        p_max = max(8.0, 3.0 * formal)
        bends = tuple(bend_fit(h, e, q, p_max) for q in _NEXT_TERMS)
        best = min(bends, key=lambda b: b.rms)
        # each fit is judged by its standard deviation, its residuals over its degrees of freedom (levels less
        # fitted parameters; Eca and Hoekstra 2014), and the third parameter must pass the extra-sum-of-squares
        # F-test (Draper and Smith 1998, Applied Regression Analysis, 3rd ed., sec. 6.1; from memory): with four
        # levels it always cuts the residual of noise, and only a cut beyond chance shows a real bend
        extra = (pf.rms ** 2 - best.rms ** 2) / (best.rms ** 2 / (n - 3)) if best.rms > 0 else math.inf
        if _sd(best.rms, n, 3) * _EXPLAINED < _sd(pf.rms, n, 2) and extra > f_quantile(CONFIDENCE, 1, n - 3):
            p, low, high, kind = best.p, best.low, best.high, "pre-asymptotic"
            note = f"a fit with the next term h^(p+{best.q:g}) over {_span(levels)}"
        else:
            kind = "scattered"
    if not note:
        note = (f"weighted least squares over {_span(levels)}" if n > 2 else
                f"{_span(levels)}; two levels give no interval")
    interval = None if math.isnan(low) else (low, high)
    if interval is None:
        # one pair of levels gives no interval, and cannot tell a wrong order from a next term that still
        # matters (three grids are the least that check the asymptotic range; Roache 1998, from memory)
        off_low = off_high = False
    else:
        off_low, off_high = high < lo_band, low > hi_band
        if bends and kind == "pre-asymptotic":     # off only if no next term that fits as well brings it back
            rivals = [b for b in bends if b.rms <= _RIVAL * min(c.rms for c in bends)]
            off_low = off_low and all(b.high < lo_band for b in rivals)
            off_high = off_high and all(b.low > hi_band for b in rivals)
        if bends and kind == "scattered":
            # a next term the F-test cannot tell from noise, but that fits better than the line, is a model the
            # levels allow as well: off only if it, too, puts the order outside
            rivals = [b for b in bends if _sd(b.rms, n, 3) < _sd(pf.rms, n, 2)]
            off_low = off_low and all(b.high < lo_band for b in rivals)
            off_high = off_high and all(b.low > hi_band for b in rivals)
        if fine is not None and kind == "pre-asymptotic":   # nor the finest three levels on their own
            off_low = off_low and fine.high < lo_band
            off_high = off_high and fine.low > hi_band
    edges = (lo_band, hi_band)
    shown = f"observed {_num(p, *edges)}" + (f" [{_num(low, *edges)}, {_num(high, *edges)}]"
                                             if interval else "") + f" ({note})"
    rule = (f"formal {formal:g}, at least {lo_band:g}" if at_least else f"formal {formal:g} +- {tol:g}")
    if off_low or off_high:
        status = "below" if off_low else "above"
        edge = lo_band if off_low else hi_band
        gap = abs(p - formal)
        tail = (f"the 95 % interval lies {'below' if off_low else 'above'} {edge:g}: converging to another order "
                f"({_num(p, *edges)}), {_num(gap, tol)} from the formal order, more than the tolerance {tol:g}")
        if off_high:
            tail += ("; superconvergence is a possible cause (a functional, or nodal values, converging faster "
                     "than the field): if it is expected, state the rule as at least the formal order, or the "
                     "formal order is understated")
        return status, "another order", p, interval, f"{shown}; {rule}; {tail}"
    within = lo_band <= p <= hi_band
    if kind == "scattered":
        holds = interval is not None and low <= formal and (high >= formal or at_least)
        narrow = interval is not None and (high - low) / 2 <= formal / 4
        if holds and narrow:
            return "confirmed", kind, p, interval, (f"{shown}; {rule}; scattered about the fit (rms {pf.rms:.2g} "
                                                    "in ln error), and the interval holds the formal order")
        outside = interval is not None and (high < lo_band or low > hi_band)
        why = ("the interval is wider than a quarter of the formal order each side" if holds else
               "the interval lies outside the tolerance, but a fit with the next term, which the levels allow as "
               "well, does not" if outside else
               "the interval does not hold the formal order, nor lie outside the tolerance")
        return "inconclusive", kind, p, interval, (f"{shown}; {rule}; scattered about the fit (rms {pf.rms:.2g} "
                                                   f"in ln error) and {why}; add a finer level to narrow it")
    if kind == "pre-asymptotic":
        best = min(bends, key=lambda b: b.rms)
        in_range = 0        # finest levels where the next term moves the local order by less than the tolerance
        for loc in reversed(best.local):
            if abs(loc - best.p) > tol:
                break
            in_range += 1
        where = (f"{'only ' if in_range < len(levels) else ''}the finest {in_range} of {len(levels)} levels "
                 f"{'is' if in_range == 1 else 'are'} in the asymptotic range (the next term moves their order by "
                 f"less than {tol:g})")
        return "inconclusive", kind, p, interval, (
            f"{shown}; {rule}; {where}, and the levels follow neither the formal order with a next term nor "
            "another order clearly enough to decide: add a finer level")
    if within:
        extra = ""
        if p > formal + tol:
            extra = ("; above the formal order, which the one-sided rule allows (superconvergence is a possible "
                     "cause)")
        return "confirmed", "formal order", p, interval, f"{shown}; {rule}; within the tolerance{extra}"
    if interval is None:
        return "inconclusive", "too few levels", p, interval, (
            f"{shown}; {rule}; the order of one pair of levels lies outside the tolerance, but one pair cannot "
            "tell a wrong order from levels outside the asymptotic range: add a level")
    return "inconclusive", "too few levels", p, interval, (
        f"{shown}; {rule}; the estimate lies outside the tolerance but the interval reaches into it: the levels "
        "cannot decide; add a finer level")


#: How far from the formal order the pointwise (Linf) order of grids that are irregular at every level (nodes
#: moved at random) may wander on a few levels without showing a mistake. The maximum sits at the worst cell,
#: and each level draws its cells afresh, so the worst distortion, and with it the factor in front of h^p,
#: changes from level to level and grows with the number of cells toward the bound of the perturbation; the
#: L1 and L2 norms average it out, the maximum does not. On random meshes Linf orders of 1.6 to 2.4 over four
#: levels of correct second-order schemes are seen, settling at 2 on finer levels  # common practice
_WORST_CELL = 0.5


def judge(field, norm, h, errors, formal, tolerance, scale=1.0, levels=None, *, at_least=False, axis="h",
          irregular=False, fixed=True):
    """Judge one error sequence.

    Parameters
    ----------
    field, norm : str
    h, errors : sequence of float
        Sizes and errors of the levels that succeeded, coarse to fine.
    formal : float
        The order the scheme is designed for.
    tolerance : float
        Allowed distance of the observed order from the formal order; below
        half the formal order (see :func:`mmsverify.problem.rules.check_rule`).
    scale : float
        Size of the solution, to recognise errors at round-off.
    levels : sequence of int, optional
        Level numbers for the statement (default 0, 1, ...).
    at_least : bool
        One-sided rule: any order from ``formal - tolerance`` up is confirmed.
    axis : str
        Name of the refined size in messages: ``"h"``, or ``"dt"`` in a
        temporal study.
    irregular : bool
        The solver reported its grids irregular (nodes moved at random,
        ``Solution.info["irregular"]``). The pointwise norm ``Linf`` is
        then judged off only when it lies more than half an order (or the
        tolerance, if larger) from the formal order; nearer, it is
        inconclusive (see :data:`_WORST_CELL`).
    fixed : bool
        The study holds another resolution fixed (a space or a time study),
        whose error may be a floor. Without one (a combined study), errors
        that never fall from the coarsest level on and stay above
        :data:`_NOT_CONVERGING` of the solution are judged as they are: the
        solver does not converge (``below``), where a study with a fixed
        resolution leaves them inconclusive.

    Raises
    ------
    AnalysisError
        For a rule :func:`~mmsverify.problem.rules.check_rule` refuses.

    Examples
    --------
    >>> v = judge("u", "L2", [0.1, 0.05, 0.025], [1e-2, 2.6e-3, 6.4e-4], 2, 0.1)
    >>> v.status, v.kind, round(v.observed, 2)
    ('confirmed', 'formal order', 1.99)
    """
    check_rule(formal, tolerance, f"{field} {norm}")
    formal, tolerance = float(formal), float(tolerance)
    levels = list(range(len(h))) if levels is None else list(levels)
    h, e = np.asarray(h, dtype=float), np.asarray(errors, dtype=float)

    def verdict(status, reason, kind, observed=None, interval=None, left=()):
        if irregular and norm == "Linf" and status in ("below", "above"):
            margin = max(tolerance, _WORST_CELL)
            lo, hi = interval if interval is not None else (observed, observed)
            if not (hi < formal - margin or (lo > formal + margin and not at_least)):
                status, kind = "inconclusive", "irregular grid"
                reason += (f". But the grids are irregular, and the maximum error sits at the worst cell, drawn "
                           f"afresh on each level: a pointwise order within {margin:g} of the formal order does "
                           "not show a mistake there; judge the order by L1 or L2, or add finer levels")
        return Verdict(field, norm, formal, observed, tolerance, status, reason, kind, interval, bool(at_least),
                       tuple(left))

    if len(h) < 2:
        return verdict("inconclusive", f"only {len(h)} level(s) succeeded; an order needs at least two",
                       "too few levels")
    if not np.all(np.isfinite(e)) or np.any(e < 0):
        raise AnalysisError(f"{field} {norm}: errors must be finite and non-negative, got {e.tolist()}")
    floor = ROUNDOFF * max(float(scale), 1e-300)
    low = e <= floor
    left = [levels[i] for i in np.nonzero(low)[0]]
    left_text = ""
    if left:
        left_text = (f"level{'s' if len(left) > 1 else ''} {', '.join(map(str, left))} left out: error at or below "
                     f"round-off ({floor:.1e} for a solution of size {scale:.3g})")
    keep = ~low
    if keep.sum() < 2:
        why = ("; the scheme reproduces this solution exactly, so choose a manufactured solution whose higher "
               "derivatives do not vanish") if keep.sum() == 0 or low[-1] else "; add a finer level above round-off"
        return verdict("inconclusive", f"{left_text}: too few levels left to measure an order{why}", "exact",
                       left=left)
    h, e, kept = h[keep], e[keep], [lv for lv, k in zip(levels, keep) if k]
    found = find_floor(h, e, formal) if len(h) >= 3 else None
    prefix = (left_text + ". ") if left_text else ""
    if found is None:
        status, kind, p, interval, reason = _decide(h, e, kept, formal, tolerance, at_least)
        return verdict(status, prefix + reason, kind, p, interval, left)
    # a floor from level kept[j + 1] on: name it, judge the levels before it
    j, value = found
    tail = e[max(j, 0):]
    grows = tail[-1] > 1.1 * tail.min() and e[-1] > e[-2]
    sizes = ", ".join(f"{x:g}" for x in h[j + 1:])
    size = max(float(scale), 1e-300)
    if (grows and value <= _ROUNDOFF_GROWTH * size) or value <= 1e3 * _EPS * size:
        kind = "round-off floor"
        what = (f"the errors stop falling at about {value:.2g} and {'grow' if grows else 'stay'} as {axis} shrinks "
                f"from level {kept[j + 1]} on: round-off, which grows with the number of unknowns; finer levels "
                f"cannot help in double precision, so drop the levels with {axis} = {sizes}")
    else:
        kind = "frozen floor"
        if fixed:
            other = "spatial error of the fixed grid" if axis == "dt" else "time error of the fixed time step"
            cause = f"such as the {other} or, if the solver iterates, iteration error"
            remedy = "refine the fixed resolution, or converge the iterations further"
        else:
            cause = "and this study holds no other resolution fixed: iteration error, if the solver iterates"
            remedy = "converge the iterations further"
        what = (f"the errors level off at about {value:.2g} from level {kept[j + 1]} on, far above round-off: an "
                f"error that does not shrink with {axis} is left, {cause}; remove it ({remedy}) or "
                f"drop the levels with {axis} = {sizes}")
    pre = list(range(j + 1))
    if len(pre) < 2 and kind == "frozen floor" and not fixed and value >= _NOT_CONVERGING * size:
        # nothing fixed could hold the error up, and it is far too large for a solver tolerance: judge the levels
        status, _, p, interval, reason = _decide(h, e, kept, formal, tolerance, at_least)
        if status == "below":
            return verdict(status, f"{prefix}{reason}. The errors stay at about {value:.2g} ({value / size:.1%} of "
                                   f"the solution) from level {kept[0]} on, and this study holds no other resolution "
                                   "fixed: the solver does not converge to the manufactured solution (a solver "
                                   "that stops iterating this far from convergence looks the same)",
                           "another order", p, interval, left)
    left = left + kept[j + 1:]
    if len(pre) >= 3:
        status, _, p, interval, reason = _decide(h[pre], e[pre], kept[:j + 1], formal, tolerance, at_least)
        if status in ("below", "above"):
            return verdict(status, f"{prefix}{reason}. Then {what}", "another order", p, interval, left)
        return verdict("inconclusive", f"{prefix}before the floor, {reason}; but {what}", kind, p, interval, left)
    if len(pre) < 2:
        return verdict("inconclusive", f"{prefix}no level lies clear of a floor, so no order can be judged: {what}",
                       kind, None, None, left)
    p = power_fit(h[pre], e[pre]).p
    return verdict("inconclusive", f"{prefix}observed {_num(p)} on {_span(kept[:j + 1])} before a floor, too few "
                                   f"levels to judge: {what}", kind, p, None, left)
