"""First against second order at equal cost: error against grid size and against measured time.

:func:`compare_at_equal_cost` runs one study per scheme on the same
manufactured problem (:func:`mmsverify.run_study`), takes the relative
error of each level (norm divided by the largest exact value) and the
solver time ``run_study`` measured for that level, and finds the time and
the cell count each scheme needs to reach a target error (1 % by default):
interpolated in log-log between the two levels that bracket the target, or
extrapolated along the last two levels when no level reaches it (and then
marked as extrapolated). Each scheme is run once on the coarsest grid
before its study, so that one-time set-up (compiling the manufactured
expressions) is not charged to its first level.

Examples
--------
>>> from solvers_demo.fd.advection import FDAdvectionDiffusion
>>> c = compare_at_equal_cost("estuary-advection", {"upwind": FDAdvectionDiffusion(convection="upwind"),
...                           "central": FDAdvectionDiffusion()}, levels=5, base_cells=8)
>>> c.cheaper, c.schemes[0].how, c.schemes[1].how
('central', 'extrapolated', 'interpolated')
"""

from dataclasses import dataclass, replace
import math

import numpy as np

from mmsverify.study.settings import Refinement
from mmsverify import AnalysisError, Case, derive, plan_grids

from .studies import problem_for, verify

__all__ = ["SchemeCost", "CostComparison", "compare_at_equal_cost", "plot_equal_cost"]


def _pct(fraction):
    return f"{100 * fraction:g}%"


def _reach(x, err, target):
    """``x`` (time or cells) at which ``err`` reaches ``target``, and how it was found.

    ``"interpolated"`` between the bracketing levels, ``"at most"`` the
    coarsest level's value when that level already meets the target, or
    ``"extrapolated"`` along the last two levels when none does.
    """
    lx, le = np.log(np.asarray(x, dtype=float)), np.log(np.asarray(err, dtype=float))
    lt = math.log(target)
    below = np.flatnonzero(le <= lt)
    if below.size and below[0] == 0:
        return float(x[0]), "at most"
    if below.size:
        (a, b), how = (below[0] - 1, below[0]), "interpolated"
    else:
        (a, b), how = (len(x) - 2, len(x) - 1), "extrapolated"
    if not le[b] < le[a]:
        return None, how
    slope = (lx[b] - lx[a]) / (le[b] - le[a])
    return float(math.exp(lx[a] + slope * (lt - le[a]))), how


@dataclass(frozen=True)
class SchemeCost:
    """One scheme's error, size and time per level, and its cost to reach the target."""

    name: str
    formal_order: float
    h: tuple
    cells: tuple
    errors: tuple
    seconds: tuple
    seconds_to_target: float
    cells_to_target: float
    how: str


@dataclass(frozen=True)
class CostComparison:
    """Schemes compared on one problem at one target error."""

    problem: str
    norm: str
    target: float
    schemes: tuple

    def at(self, target):
        """The same measurements judged at another target error (nothing is rerun)."""
        schemes = []
        for s in self.schemes:
            t_reach, how = _reach(s.seconds, s.errors, target)
            n_reach, _ = _reach(s.cells, s.errors, target)
            schemes.append(replace(s, seconds_to_target=t_reach, cells_to_target=n_reach, how=how))
        return replace(self, target=target, schemes=tuple(schemes))

    @property
    def cheaper(self):
        """Name of the scheme that reaches the target in less measured time (None if unknown)."""
        known = [s for s in self.schemes if s.seconds_to_target is not None]
        return min(known, key=lambda s: s.seconds_to_target).name if known else None

    def __str__(self):
        lines = [f"Equal-cost comparison on {self.problem}: relative {self.norm} error (norm / max |exact|), "
                 f"target {_pct(self.target)}"]
        for s in self.schemes:
            lines.append(f"\n  {s.name} (formal order {s.formal_order:g})")
            lines.append(f"    {'cells':>10}  {'h':>10}  {'error':>10}  {'seconds':>10}")
            for n, h, e, t in zip(s.cells, s.h, s.errors, s.seconds):
                lines.append(f"    {n:>10d}  {h:>10.4g}  {e:>10.3e}  {t:>10.4f}")
            if s.seconds_to_target is None:
                lines.append("    target: cannot be estimated (the error does not fall)")
            else:
                about = "at most" if s.how == "at most" else "about"
                lines.append(f"    reaches {_pct(self.target)}: {about} {s.cells_to_target:,.0f} cells, "
                             f"{s.seconds_to_target:.4g} s ({s.how})")
        winner = self.cheaper
        lines.append("")
        if winner is None:
            lines.append("No scheme's cost to the target could be estimated.")
        else:
            others = [s for s in self.schemes if s.name != winner and s.seconds_to_target is not None]
            best = next(s for s in self.schemes if s.name == winner)
            ratio = ", ".join(f"{o.seconds_to_target / best.seconds_to_target:.3g} times less than {o.name}"
                              for o in others)
            lines.append(f"Cheaper to reach {_pct(self.target)}: {winner}" + (f" ({ratio})" if ratio else ""))
        return "\n".join(lines)


def compare_at_equal_cost(problem, schemes, *, levels=5, base_cells=8, target=0.01, norm="L2", options=None):
    """Run each scheme's study and compare the cost of reaching ``target`` relative error.

    Parameters
    ----------
    problem : Problem, path or bundled name
    schemes : dict of str to solver
        Demo solvers (they state ``formal_order``) by display name.
    levels, base_cells : int
        Refinement plan shared by all schemes.
    target : float
        Relative error to reach (0.01 is 1 %).
    norm : {"L1", "L2", "Linf"}
    options : dict, optional
        Passed to the solvers in ``case.options``.

    Returns
    -------
    CostComparison
    """
    if len(schemes) < 2:
        raise AnalysisError("an equal-cost comparison needs at least two schemes")
    out = []
    for name, solver in schemes.items():
        prob = problem_for(problem, solver)
        first = plan_grids(prob, 2, base_cells)[0]
        solver(Case(first, derive(prob), dict(options or {})))  # warm-up, not measured
        result = verify(solver, prob, Refinement(levels=levels, base_cells=base_cells), options=options)
        ok = [lv for lv in result.levels if lv.ok]
        field = prob.field_names[0]
        if len(ok) < 2:
            raise AnalysisError(f"{name}: only {len(ok)} level(s) of {result.problem} succeeded; "
                                f"{result.failed_levels[0].message if result.failed_levels else ''}")
        errors = tuple(lv.errors[field][norm] / lv.scale[field] for lv in ok)
        seconds = tuple(lv.seconds for lv in ok)
        cells = tuple(lv.grid.n_cells for lv in ok)
        t_reach, how = _reach(seconds, errors, target)
        n_reach, _ = _reach(cells, errors, target)
        out.append(SchemeCost(name, solver.formal_order, tuple(lv.h for lv in ok), cells, errors, seconds,
                              t_reach, n_reach, how))
    return CostComparison(str(getattr(problem, "name", problem)), norm, target, tuple(out))


def plot_equal_cost(comparison, path):
    """Save a two-panel figure: error against h and error against measured time."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.ticker import NullFormatter

    fig, (ax1, ax2) = plt.subplots(1, 2, figsize=(10, 4.2))
    for s in comparison.schemes:
        line, = ax1.loglog(s.h, s.errors, "o-", label=f"{s.name} (order {s.formal_order:g})")
        ax2.loglog(s.seconds, s.errors, "o-", color=line.get_color(), label=s.name)
        if s.seconds_to_target is not None:
            ax2.plot([s.seconds_to_target], [comparison.target], "*", ms=14, color=line.get_color())
    for ax in (ax1, ax2):
        ax.xaxis.set_minor_formatter(NullFormatter())
        ax.axhline(comparison.target, color="grey", ls="--", lw=1)
        ax.grid(True, which="both", alpha=0.3)
        ax.set_ylabel(f"relative {comparison.norm} error")
    ax1.set_xlabel("h")
    ax1.invert_xaxis()
    ax2.set_xlabel("measured solver time per level [s]")
    ax1.legend()
    ax1.set_title(f"{comparison.problem}: error against grid size")
    ax2.set_title(f"error against time; star: cost of {_pct(comparison.target)}")
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return path
