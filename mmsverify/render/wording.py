"""Wording every report format shares: the headline, the tables, the cautions.

Kept free of any output syntax, so the text, Markdown, HTML and CSV
writers say the same thing in the same order: verdict, evidence, cautions.
"""

import numpy as np

from mmsverify.execute.gradnorms import GRADIENT_NORMS
from mmsverify.execute.norms import NORMS

__all__ = ["headline", "shown_norms", "level_rows", "level_header", "level_cells", "axis_name", "fmt_num", "fmt_order",
           "study_facts", "CAPTIONS", "TITLES", "extra_cautions", "notes"]

def headline(result):
    """One sentence stating the verdict, for the top of every report."""
    kind = result.outcome
    p = f"{result.formal_order:g}"
    n = len(result.verdicts)
    failed = [str(lv.level) for lv in result.failed_levels]
    if kind == "pass":
        return (f"Every field and norm ({n} checks) converges at the formal order {p} within "
                f"{result.tolerance:g}.")
    if failed and result.orders_confirmed:
        return (f"Level{'s' if len(failed) > 1 else ''} {', '.join(failed)} failed (see below); the "
                f"{n} checks on the other levels confirm the formal order {p}, but the study is not a pass "
                "until every level runs.")
    if kind == "fail":
        off = [v for v in result.verdicts if v.status in ("below", "above")]
        which = ", ".join(f"{v.field} {v.norm}" for v in off)
        return (f"{len(off)} of {n} checks miss the formal order {p} by more than {result.tolerance:g}: "
                f"{which}.")
    if not result.verdicts:
        return "No level succeeded for any field, so no order could be measured."
    return "The observed order could not be judged; see the reasons below."


def notes(result):
    """One-line remarks on how the study was read (declared quantities not reported, an order the solver
    stated against the problem's); not failures. Empty for results that carry none."""
    return tuple(getattr(result, "notes", ()))


def axis_name(result):
    """Name of the refined size: ``"dt"`` for time refinement, else ``"h"``."""
    return "dt" if result.mode == "time" else "h"


def fmt_num(x, spec=".3e"):
    """A number for a table; None and non-finite values print as ``-``."""
    if x is None:
        return "-"
    x = float(x)
    return format(x, spec) if np.isfinite(x) else "-"


def fmt_order(x):
    return fmt_num(x, ".2f")


def shown_norms(result, field_name):
    """The norms the tables of a field show: L1, L2, Linf, and each gradient norm (H1 seminorm, H1,
    energy) that every successful level measured."""
    ok = [lv for lv in result.levels if lv.ok and field_name in lv.errors]
    return NORMS + tuple(n for n in GRADIENT_NORMS if ok and all(n in lv.errors[field_name] for lv in ok))


def level_rows(result, field_name):
    """Rows of the evidence table of one field.

    Returns
    -------
    list of dict
        One per level with keys ``level``, ``grid``, ``h``, ``seconds``,
        ``status``, ``message`` and per norm of :func:`shown_norms`
        ``error_<norm>`` and ``order_<norm>`` (None on the first successful
        level, on failed levels and where the order is undefined).
    """
    ok = [lv for lv in result.levels if lv.ok and field_name in lv.errors]
    norms = shown_norms(result, field_name)
    orders = {n: result.orders(field_name, n) for n in norms}
    rows = []
    for lv in result.levels:
        row = {"level": lv.level, "grid": lv.grid.describe(), "h": lv.h, "seconds": lv.seconds,
               "status": lv.status, "message": lv.message}
        i = ok.index(lv) if lv in ok else None
        for n in norms:
            row[f"error_{n}"] = lv.errors[field_name][n] if i is not None else None
            p = orders[n][i - 1] if i else None
            row[f"order_{n}"] = float(p) if p is not None and np.isfinite(p) else None
        rows.append(row)
    return rows


def study_facts(result):
    """(label, value) pairs describing the study, for the evidence section."""
    lv = result.levels
    facts = [("Problem", result.problem), ("Problem file", result.source or "-"),
             ("Content hash", (result.problem_hash or "-")[:16]), ("Solver", result.solver),
             ("Refinement", f"{result.mode}, {len(lv)} levels"
                            + (f", {lv[0].grid.describe()} to {lv[-1].grid.describe()}" if lv else "")),
             ("Formal order", f"{result.formal_order:g}"), ("Tolerance", f"{result.tolerance:g}")]
    total = sum(x.seconds for x in lv)
    if total > 0:
        facts.append(("Solver run time", f"{total:.3g} s over all levels"))
    return facts


#: Caption of each figure of :func:`mmsverify.render.plots.study_figures`.
CAPTIONS = {
    "error": ("Error norms against the grid size on log-log axes. Dashed lines have the slope of the formal "
              "order and pass through the finest point of each norm; data parallel to them converge at the "
              "formal order."),
    "order": ("Observed order of each pair of consecutive levels, drawn at the finer level's size. The solid "
              "line is the formal order, the band the tolerance; a converging solver settles into the band "
              "as the grid is refined."),
    "cost": ("Error against the solver's run time per level (wall clock, one run; the first level also pays "
             "one-time set-up such as compiling the manufactured expressions)."),
    "map": ("Pointwise error (discrete minus exact) on the finest level that succeeded, from one extra run of "
            "the solver. A mistake in boundary treatment shows up along that boundary."),
}

#: Title of each figure.
TITLES = {"error": "Convergence of the error", "order": "Observed order", "cost": "Error against run time",
          "map": "Where the error lives"}


def extra_cautions(result):
    """Cautions that depend on this study's numbers, beyond the general one."""
    notes = []
    if any(v.status == "above" for v in result.verdicts):
        notes.append("An observed order above the formal order over all levels, beyond what a next term of the "
                     "series explains, is superconvergence (functionals, nodal values), errors that cancel by "
                     "chance, or an understated formal order; where it is expected, state the rule as at least "
                     "the formal order ([order.by]).")
    if any(v.status == "inconclusive" for v in result.verdicts):
        notes.append("Inconclusive checks confirm nothing: the reasons above say what to change.")
    if result.failed_levels:
        notes.append(f"{len(result.failed_levels)} level(s) failed; orders use only the levels that succeeded.")
    ok = [lv for lv in result.levels if lv.ok]
    if result.orders_confirmed and len(ok) < 3:
        notes.append("Only two levels succeeded, so the order was measured once; three or more levels show "
                     "whether it has settled.")
    return notes


def level_header(norms, size="h"):
    """Column names of the level table: level, grid, size, then error and order per norm."""
    return ["Level", "Grid", size] + [c for n in norms for c in (f"{n} error", f"{n} order")]


def level_cells(row, norms=NORMS):
    """The cells of one row of :func:`level_rows` in a table: level, grid, h, then error and order per norm
    (a failed level: its first message line in place of the numbers)."""
    cells = [row["level"], row["grid"], f"{row['h']:.4g}"]
    if row["status"] != "ok":
        return cells + ["failed: " + (row["message"].splitlines() or [""])[0]] + [""] * (2 * len(norms) - 1)
    return cells + [c for n in norms for c in (fmt_num(row[f"error_{n}"]), fmt_order(row[f"order_{n}"]))]
