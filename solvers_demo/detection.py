"""Run the seeded-mistake catalogue and measure what the order test detects.

:func:`run_catalogue` runs one manufactured-solution study per
:class:`~solvers_demo.catalogue.Entry` (with :func:`mmsverify.run_study`,
judged against the orders the solver states) and returns a
:class:`DetectionReport`: per entry the expected effect, the observed
orders, whether the verdict flagged it and whether that agrees with the
expectation. An entry is *flagged* when any of its judged norms is not
confirmed (below, above or inconclusive).

Examples
--------
>>> report = run_catalogue(keys=["fd-source-shifted"])
>>> report.outcomes[0].flagged, report.ok
(True, True)
"""

from dataclasses import dataclass, field
import time

import numpy as np

from mmsverify.study.settings import Refinement
from mmsverify.execute.runner import process_pool

from .catalogue import entries
from .studies import verify

__all__ = ["Outcome", "DetectionReport", "run_entry", "run_catalogue"]

_NORMS = ("L1", "L2", "Linf")


class _Recorder:
    """Calls a solver and keeps each level's ``Solution.info``."""

    def __init__(self, solver):
        self.solver = solver
        self.infos = []
        self.name = solver.name
        self.formal_order = solver.formal_order
        if hasattr(solver, "time_order"):
            self.time_order = solver.time_order
        self.not_computed = getattr(solver, "not_computed", ())

    def __call__(self, case):
        sol = self.solver(case)
        self.infos.append(sol.info)
        return sol


@dataclass(frozen=True)
class Outcome:
    """The result of one catalogue entry."""

    entry: object
    formal: float
    orders: dict
    statuses: dict
    flagged: bool
    seconds: float
    info: dict = field(default_factory=dict)
    message: str = ""

    @property
    def agrees(self):
        """True when the verdict matches the expectation (flagged exactly when the order should change)."""
        return self.flagged == self.entry.should_flag

    @property
    def detail(self):
        """Short text of extra facts (Newton iterations, failed levels)."""
        parts = []
        if "newton_per_step" in self.info:
            parts.append(f"Newton {self.info['newton_per_step']:.1f}/step")
        elif "newton_iterations" in self.info:
            parts.append(f"Newton {self.info['newton_iterations']} it.")
        if self.message:
            parts.append(self.message)
        return "; ".join(parts)


def run_entry(entry):
    """Run the study of one entry and judge it."""
    start = time.perf_counter()
    recorder = _Recorder(entry.solver)
    plan = dict(entry.study)
    options = plan.pop("options", None)
    result = verify(recorder, entry.problem, Refinement(**plan), options=options)
    verdicts = [v for v in result.verdicts if v.norm in entry.norms]
    flagged = not verdicts or any(not v.ok for v in verdicts)
    # per norm, the field verdict furthest from the formal order (quantities, norm "value", are not columns)
    worst = {}
    for v in result.verdicts:
        if v.norm in _NORMS:
            miss = float("inf") if v.observed is None else abs(v.observed - v.formal)
            if v.norm not in worst or miss > worst[v.norm][0]:
                worst[v.norm] = (miss, v)
    orders = {n: v.observed for n, (_, v) in worst.items()}
    statuses = {n: v.status for n, (_, v) in worst.items()}
    failed = result.failed_levels
    message = f"{len(failed)} level(s) failed: {failed[0].message.splitlines()[0]}" if failed else ""
    info = recorder.infos[-1] if recorder.infos else {}
    return Outcome(entry, result.formal_order, orders, statuses, flagged, time.perf_counter() - start,
                   {k: v for k, v in info.items() if k.startswith("newton")}, message)


def _fmt(p):
    return "-" if p is None or not np.isfinite(p) else f"{p:.2f}"


@dataclass(frozen=True)
class DetectionReport:
    """Every outcome of a catalogue run, with the detection counts."""

    outcomes: tuple
    seconds: float

    @property
    def ok(self):
        """True when every entry behaved as expected."""
        return all(o.agrees for o in self.outcomes)

    def counts(self):
        """Detection counts by kind of entry."""
        mistakes = [o for o in self.outcomes if o.entry.kind == "mistake"]
        changing = [o for o in mistakes if o.entry.changes_order]
        silent = [o for o in mistakes if not o.entry.changes_order]
        correct = [o for o in self.outcomes if o.entry.kind == "correct"]
        prop = [o for o in self.outcomes if o.entry.kind == "property"]
        return {
            "mistakes": len(mistakes),
            "order-changing mistakes flagged": (sum(o.flagged for o in changing), len(changing)),
            "order-preserving mistakes flagged": (sum(o.flagged for o in silent), len(silent)),
            "correct solvers flagged": (sum(o.flagged for o in correct), len(correct)),
            "known order losses flagged": (sum(o.flagged for o in prop), len(prop)),
        }

    def rows(self):
        """Table rows: key, kind, expected, formal, L1, L2, Linf, flagged, agrees, detail."""
        return [(o.entry.key, o.entry.kind, o.entry.expected, f"{o.formal:g}",
                 *(_fmt(o.orders.get(n)) for n in _NORMS), "yes" if o.flagged else "no",
                 "ok" if o.agrees else "UNEXPECTED", o.detail) for o in self.outcomes]

    _HEADER = ("entry", "kind", "expected effect", "formal", "L1", "L2", "Linf", "flagged", "as expected", "notes")

    def summary(self):
        lines = []
        for name, value in self.counts().items():
            lines.append(f"{name}: {value if isinstance(value, int) else f'{value[0]} of {value[1]}'}")
        lines.append(f"all entries as expected: {'yes' if self.ok else 'NO'} ({self.seconds:.1f} s)")
        return lines

    def __str__(self):
        rows = [self._HEADER] + self.rows()
        widths = [max(len(str(r[i])) for r in rows) for i in range(len(self._HEADER))]
        out = ["  ".join(str(c).ljust(w) for c, w in zip(r, widths)).rstrip() for r in rows]
        out.insert(1, "  ".join("-" * w for w in widths))
        return "\n".join(out + [""] + self.summary())

    def to_markdown(self):
        """The table and summary as Markdown."""
        lines = ["| " + " | ".join(self._HEADER) + " |", "|" + "---|" * len(self._HEADER)]
        lines += ["| " + " | ".join(str(c).replace("|", "/") for c in r) + " |" for r in self.rows()]
        lines += [""] + [f"- {s}" for s in self.summary()]
        lines += ["", "Observed orders are those of the two finest levels; an entry is flagged when any norm "
                  "it is judged in is not confirmed within the tolerance."]
        return "\n".join(lines) + "\n"

    def to_dict(self):
        """Plain data (JSON-ready)."""
        return {"ok": self.ok, "seconds": self.seconds,
                "counts": {k: list(v) if isinstance(v, tuple) else v for k, v in self.counts().items()},
                "entries": [{"key": o.entry.key, "kind": o.entry.kind, "problem": o.entry.problem,
                             "solver": o.entry.solver.name, "description": o.entry.description,
                             "expected": o.entry.expected, "changes_order": o.entry.changes_order,
                             "norms": list(o.entry.norms), "formal": o.formal,
                             "observed": {n: o.orders.get(n) for n in _NORMS},
                             "status": o.statuses, "flagged": o.flagged, "as_expected": o.agrees,
                             "info": o.info, "message": o.message, "seconds": o.seconds}
                            for o in self.outcomes]}


def run_catalogue(keys=None, kind=None, workers=1, progress=None):
    """Run catalogue entries and report what was detected.

    Parameters
    ----------
    keys : sequence of str, optional
        Only these entries (default: all).
    kind : {"mistake", "correct", "property"}, optional
        Only entries of this kind.
    workers : int
        Processes to spread the entries over (1 runs them here, in order).
    progress : callable, optional
        Called with each :class:`Outcome` as it finishes.

    Returns
    -------
    DetectionReport
    """
    chosen = entries(kind=kind, keys=keys)
    start = time.perf_counter()
    outcomes = []
    if workers and workers > 1:
        with process_pool(workers) as pool:
            for outcome in pool.map(run_entry, chosen):
                outcomes.append(outcome)
                if progress:
                    progress(outcome)
    else:
        for entry in chosen:
            outcome = run_entry(entry)
            outcomes.append(outcome)
            if progress:
                progress(outcome)
    return DetectionReport(tuple(outcomes), time.perf_counter() - start)
