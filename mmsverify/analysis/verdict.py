"""The verdict: does the observed order match the formal order?

One :class:`Verdict` per field and norm. The observed order is taken on the
two finest levels that both succeeded; the statement says which levels,
the formal order and the tolerance, so a reader can check it by hand.
"""

from dataclasses import dataclass

import numpy as np

from mmsverify.analysis.order import asymptotic_check, observed_orders

__all__ = ["Verdict", "judge", "ROUNDOFF"]

#: Errors below this fraction of the solution's size are treated as round-off.
ROUNDOFF = 1e-11  # common practice: a few hundred ulps of double precision


@dataclass(frozen=True)
class Verdict:
    """Outcome for one field and norm.

    ``status`` is ``"confirmed"`` (within tolerance of the formal order),
    ``"below"``, ``"above"`` or ``"inconclusive"`` (too few levels, errors
    at round-off so no order can be seen, or observed orders still closing
    on the formal order by more than the tolerance from one pair of levels
    to the next).
    """

    field: str
    norm: str
    formal: float
    observed: float
    tolerance: float
    status: str
    reason: str

    @property
    def ok(self):
        return self.status == "confirmed"

    def __str__(self):
        return f"{self.field} {self.norm}: {self.status.upper()} - {self.reason}"


def _fmt(p):
    return "n/a" if p is None or not np.isfinite(p) else f"{p:.2f}"


def judge(field, norm, h, errors, formal, tolerance, scale=1.0, levels=None):
    """Judge one error sequence.

    Parameters
    ----------
    field, norm : str
    h, errors : sequence of float
        Sizes and errors of the levels that succeeded, coarse to fine.
    formal : float
        The order the scheme is designed for.
    tolerance : float
        Allowed ``|observed - formal|``.
    scale : float
        Size of the solution, to recognise errors at round-off.
    levels : sequence of int, optional
        Level numbers for the statement (default 0, 1, ...).

    Examples
    --------
    >>> judge("u", "L2", [0.1, 0.05], [1e-2, 2.6e-3], 2, 0.1).status
    'confirmed'
    """
    levels = list(range(len(h))) if levels is None else list(levels)
    if len(h) < 2:
        return Verdict(field, norm, formal, None, tolerance, "inconclusive",
                       f"only {len(h)} level(s) succeeded; an order needs at least two")
    e = np.asarray(errors, dtype=float)
    floor = ROUNDOFF * max(scale, 1e-300)
    if e[-1] <= floor and e[-2] <= floor:
        return Verdict(field, norm, formal, None, tolerance, "inconclusive",
                       f"errors on levels {levels[-2]} and {levels[-1]} are at round-off ({e[-1]:.1e}); the "
                       "scheme reproduces this solution exactly, so choose a manufactured solution whose "
                       "higher derivatives do not vanish")
    p = observed_orders(h, e)
    last = float(p[-1])
    pair = f"levels {levels[-2]}-{levels[-1]}"
    if not np.isfinite(last):
        return Verdict(field, norm, formal, None, tolerance, "inconclusive",
                       f"no order on {pair}: an error is zero")
    diff = last - formal
    if abs(diff) <= tolerance:
        status, how = "confirmed", f"within {tolerance:g}"
    elif diff < 0:
        status, how = "below", f"short by {-diff:.2f}, more than the tolerance {tolerance:g}"
    else:
        status, how = "above", (f"exceeds it by {diff:.2f}, more than the tolerance {tolerance:g}: the levels may "
                                "not be in the asymptotic range, or the formal order is understated")
    reason = f"observed {_fmt(last)} on {pair}; formal {formal:g}; {how}"
    check = asymptotic_check(h, e, formal, scale=scale) if len(h) >= 3 and status != "confirmed" else None
    if check is not None and check.floor:
        # the errors stopped falling: say so rather than blame the scheme
        if check.floor == "round-off":
            status = "inconclusive"
        reason += ". " + check.message[:1].upper() + check.message[1:]
    elif len(p) >= 2 and np.isfinite(p[-2]) and abs(p[-1] - p[-2]) > tolerance:
        toward = (status == "below" and p[-1] > p[-2]) or (status == "above" and p[-1] < p[-2])
        if toward:
            # still closing on the formal order by more than the tolerance per level: the grids are not
            # yet in the asymptotic range, which says nothing either way about the scheme
            status = "inconclusive"
            reason += (f" (orders still moving toward the formal order: {', '.join(_fmt(q) for q in p)}; "
                       "the grids are not yet in the asymptotic range; add a finer level)")
        else:
            reason += f" (orders still moving: {', '.join(_fmt(q) for q in p)}; add a finer level)"
    return Verdict(field, norm, formal, last, tolerance, status, reason)
