"""Balancing: constants that keep every term of comparable size and the fields admissible.

:func:`balance` reads a problem file, keeps the chosen ``[constants]``
(amplitudes, wavenumbers, offsets: by default every constant the fields use
that no coefficient of the operator uses) as symbols, and searches for values
that make the terms of every equation as close in size as possible while
every bound (``[bounds]`` and the positivity the operator needs) holds on the
samples. The search is a bounded Nelder-Mead minimisation in the logarithm
of each constant (a constant may change by at most ``max_factor`` either
way; a zero constant moves additively within +-1), stopped after the
stated number of ``iterations``.

Objective: the mean over equations of the variance of ``log10`` of the RMS
sizes of its terms, plus a penalty for bound violations on the samples, plus
a penalty on fields too wavy for the coarsest grid of a study, plus a pull
towards the original values. Waviness of a field in a direction is the ratio
``R = rms(f_xx) / rms(f_x)`` (``k pi`` for ``sin(k pi x)``); a suggestion may
not push ``R h`` above 1 (about six points per wavelength) on the coarsest
grid spacing ``h`` (from ``[study] base_cells``, default 8 cells), unless the
original design already did. The suggested design is then checked like any
other (:func:`mmsverify.design.checks.audit` with optimisation).
"""

from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
import sympy as sp

from mmsverify.design.model import diff, model_from_text, sample_points
from mmsverify.design.checks import SMALL_TERM, admissibility_at, term_sizes_at
from mmsverify.errors import ProblemError
from mmsverify.problem.record import PROBLEM_DIR

__all__ = ["BalanceResult", "balance", "read_problem_text"]


def read_problem_text(problem):
    """``(text, source)`` of a problem file path or bundled problem name."""
    p = Path(problem)
    if not p.exists() and not p.suffix and (PROBLEM_DIR / f"{problem}.toml").exists():
        p = PROBLEM_DIR / f"{problem}.toml"
    try:
        return p.read_text(encoding="utf-8"), str(p)
    except (OSError, UnicodeDecodeError) as exc:
        raise ProblemError(f"{p}: cannot read the problem file to balance it ({exc}); balancing needs "
                           "the file, since it changes the file's [constants]") from None


def _spreads(report):
    out = {}
    for t in report.terms:
        lo, hi = out.get(t.equation, (np.inf, 0.0))
        out[t.equation] = (min(lo, t.rms), max(hi, t.rms))
    return {eq: (hi / lo if lo > 0 else np.inf) for eq, (lo, hi) in out.items()}


@dataclass(frozen=True)
class BalanceResult:
    """Suggested constants and how the design changes with them."""

    problem: str
    tuned: tuple
    before: dict
    after: dict
    spread_before: dict
    spread_after: dict
    admissible_before: bool
    admissible_after: bool
    iterations: int
    max_iterations: int
    evaluations: int
    warnings_after: tuple

    @property
    def improved(self):
        worst = lambda s: max(s.values(), default=1.0)
        return worst(self.spread_after) <= worst(self.spread_before) and \
            (self.admissible_after or not self.admissible_before)

    def constants_toml(self):
        """The ``[constants]`` table with the suggested values."""
        return "\n".join(["[constants]"] + [f"{k} = {v:.6g}" for k, v in self.after.items()]) + "\n"

    def __str__(self):
        lines = [f"balancing {self.problem}: {self.iterations} of at most {self.max_iterations} iterations "
                 f"({self.evaluations} evaluations), tuning {', '.join(self.tuned) or 'nothing'}",
                 f"  {'equation':<10}{'largest/smallest term before':<32}after"]
        for eq in self.spread_before:
            lines.append(f"  {eq:<10}{self.spread_before[eq]:<32.3g}{self.spread_after[eq]:.3g}")
        lines.append(f"  admissible before: {'yes' if self.admissible_before else 'NO'}, "
                     f"after: {'yes' if self.admissible_after else 'NO'}")
        lines.append(f"  {'constant':<14}{'before':<14}suggested")
        for k in self.tuned:
            lines.append(f"  {k:<14}{self.before[k]:<14.6g}{self.after[k]:.6g}")
        lines += [f"  !! after balancing: {w}" for w in self.warnings_after]
        return "\n".join(lines)


def first_study_cells(text):
    """Cells per direction of the coarsest grid in a problem file's ``[study]`` (default 8)."""
    import tomllib
    cells = tomllib.loads(text).get("study", {}).get("base_cells", 8)
    return float(min(cells) if isinstance(cells, list) else cells)


def _default_tune(model):
    """Constants the fields use and no operator coefficient uses (those stay physical)."""
    in_fields = set().union(*(sp.sympify(e).free_symbols for e in model.fields.values()))
    in_operator = set().union(*(sp.sympify(e).free_symbols for e in model.parameters.values()))
    return [str(c) for c in model.consts if c in in_fields and c not in in_operator]


def balance(problem, tune=None, iterations=100, *, max_factor=10.0, base_cells=None, threshold=SMALL_TERM,
            per_axis=None, starts=6, seed=0):
    """Suggest constants that balance the terms and keep the fields admissible.

    Parameters
    ----------
    problem : str or Path
        Problem file, a bundled problem's name, or problem-file text (any
        string with a line break).
    tune : sequence of str, optional
        Constants to change (default: those the fields use and the operator
        coefficients do not).
    iterations : int
        Most Nelder-Mead iterations to spend; the result states how many ran.
    max_factor : float
        Largest factor by which a non-zero constant may change.
    base_cells : int, optional
        Cells per direction of the coarsest grid the design must be resolved
        on (default: the problem's ``[study] base_cells``, else 8).
    threshold, per_axis, starts, seed
        As for :func:`mmsverify.design.checks.audit`, used to judge the result.

    Returns
    -------
    BalanceResult
    """
    text, source = (str(problem), "<text>") if "\n" in str(problem) else read_problem_text(problem)
    first = model_from_text(text, source)
    names = [str(c) for c in first.consts]
    tune = list(tune) if tune is not None else _default_tune(first)
    unknown = set(tune) - set(names)
    if unknown:
        raise ProblemError(f"{source}: cannot tune {sorted(unknown)}: not in [constants] "
                           f"(constants are {', '.join(names) or 'none'})")
    if int(iterations) < 1:
        raise ProblemError(f"iterations must be at least 1, got {iterations}")
    model = model_from_text(text, source, keep=[n for n in names if n not in tune])
    x0 = np.array(model.values, dtype=float)
    pts = sample_points(model, per_axis)
    term_fn = model.compile([t.expr for t in model.terms])
    bound_fn = model.compile([b.expr for b in model.bounds]) if model.bounds else None
    groups = list(model.equations().values())
    cells = base_cells or first_study_cells(text)
    wavy = [(diff(e, (x, 1)), diff(e, (x, 2)), (hi - lo) / cells)
            for e in model.fields.values() for x, (lo, hi) in zip(model.coords, model.box)]
    wavy_fn = model.compile([w for a, b, _ in wavy for w in (a, b)]) if wavy else None
    spacing = np.array([h for _, _, h in wavy])

    def waviness(vals):
        d = wavy_fn(*pts, *vals)
        first = np.array([np.sqrt(np.nanmean(v * v)) for v in d[0::2]])
        second = np.array([np.sqrt(np.nanmean(v * v)) for v in d[1::2]])
        return np.where(first > 0, second / np.maximum(first, 1e-300), 0.0) * spacing

    limit = np.maximum(1.0, waviness(x0)) if wavy else None
    index = {t: i for i, t in enumerate(model.terms)}
    mult = x0 != 0
    span = np.log(float(max_factor))

    def values_of(s):
        return np.where(mult, x0 * np.exp(np.clip(s, -span, span)), np.clip(s, -1.0, 1.0))

    fine = sample_points(model, 2 * len(np.unique(pts[0])) - 1)     # bounds: twice as dense
    margin = [1e-2]                 # stay inside by this fraction; grows if optimisation finds a violation

    def objective(s):
        vals = values_of(s)
        terms = term_fn(*pts, *vals)
        rms = np.array([np.sqrt(np.nanmean(v * v)) if np.any(np.isfinite(v)) else 0.0 for v in terms])
        spread = 0.0
        for g in groups:
            r = rms[[index[t] for t in g]]
            if len(r) > 1 and r.max() > 0:
                spread += float(np.var(np.log10(np.maximum(r, 1e-12 * r.max()))))
        penalty = 0.0
        for b, v in zip(model.bounds, bound_fn(*fine, *vals) if bound_fn else []):
            bad = ~np.isfinite(v)
            penalty += float(bad.mean())
            v = v[~bad]
            if not v.size:
                continue
            scale = max(abs(b.lower or 0.0), abs(b.upper or 0.0), float(np.ptp(v)), 1e-12)
            gap = margin[0] * scale
            short = [b.lower - v.min() + gap if b.lower is not None else 0.0,
                     v.max() - b.upper + gap if b.upper is not None else 0.0]
            penalty += sum(max(0.0, d) / scale + (max(0.0, d) / scale) ** 2 for d in short)
        if wavy:
            penalty += float(np.sum(np.maximum(0.0, waviness(vals) - limit) ** 2))
        return spread / max(len(groups), 1) + 10.0 * penalty + 1e-2 * float(np.sum(np.asarray(s) ** 2))

    n = len(x0)
    best, nit, nfev = np.zeros(n), 0, 0
    a_before = admissibility_at(model, pts, starts, seed)
    after_m, a_after = model, a_before
    # Nelder-Mead within the iteration budget; when optimisation between the samples still finds a
    # violation, widen the safety margin and go on from the best point with the iterations left.
    while n and nit < int(iterations):
        simplex = np.vstack([best] + [best + 0.5 * np.eye(n)[i] for i in range(n)])
        from scipy.optimize import minimize  # here: importing scipy.optimize costs ~0.4 s
        res = minimize(objective, best, method="Nelder-Mead",
                       bounds=[(-span, span) if m else (-1.0, 1.0) for m in mult],
                       options={"maxiter": int(iterations) - nit, "initial_simplex": simplex, "xatol": 1e-3,
                                "fatol": 1e-6})
        nit, nfev = nit + max(int(res.nit), 1), nfev + int(res.nfev)
        if res.fun <= objective(best):
            best = res.x
        after_m = replace(model, values=tuple(float(v) for v in values_of(best)))
        a_after = admissibility_at(after_m, pts, starts, seed)
        if a_after.ok or margin[0] >= 0.2:
            break
        margin[0] *= 4
    after_vals = values_of(best)
    t_before, t_after = term_sizes_at(model, threshold, pts), term_sizes_at(after_m, threshold, pts)
    consts = dict(zip(names, first.values))
    tuned = tuple(str(c) for c in model.consts)
    after = dict(consts) | {k: float(v) for k, v in zip(tuned, after_vals)}
    return BalanceResult(model.name, tuned, consts, after, _spreads(t_before), _spreads(t_after),
                         a_before.ok, a_after.ok, nit, int(iterations), nfev,
                         tuple(t_after.warnings + a_after.warnings))
