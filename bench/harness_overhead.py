"""Issue 9, target 1: harness overhead of a four-level 2-D Poisson study.

The study is the command a user types,
``mmsverify run plate-poisson poisson2d --levels 4 --base-cells 128 --cache DIR --json FILE --timeout none``
(levels 128^2 ... 1024^2 cells, about a million unknowns on the finest),
run through :func:`mmsverify.cli.console` (the program's entry) in a child process with light
timers around each stage. Exclusive times (a stage nested in another is
subtracted from it):

* solver, own work: the solver call minus the evaluations it asks for;
* evaluation of sources and boundary data the solver asks for;
* evaluation of the exact solution for the norms;
* code generation of the evaluators, reading and deriving the problem;
* checking the returned Solution, error norms, level-cache I/O (key,
  store), progress callback, report text and JSON file;
* the command parser and the design warnings of ``run``;
* the rest (planning, orders, verdicts, runner bookkeeping).

Harness = total - solver's own work, for the command and for the
``run_study`` call inside it (the command minus parser and design
warnings). Nothing derived is kept between processes, so every run is the
first run of the problem content: it reads and derives the problem,
generates the evaluators and runs the design checks, synchronously, ahead
of the study. Interpreter start and imports (mmsverify, the
solver's module and its libraries pyamg and scipy.fft) are timed apart and
left out of the total: they are the same for any command (see
``bench/first_contact.py``).

Children run with Python's default bytecode cache (``PYTHONDONTWRITEBYTECODE``
removed from their environment), as a user's Python runs.

Run: ``python bench/harness_overhead.py [--base 128] [--levels 4] [--repeats 2]``;
``--tiny`` is a smoke run (base 8, 4 levels). The stage tables show the
fastest run per state; the spread table the harness share of every run
(the solver's own time moves by 10-20 % between runs, and the share with it).
"""

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

from _common import ROOT, machine, table

STAGES = (
    ("solver", "solver, own work"),
    ("eval_solver", "evaluate source and boundary data (asked by the solver)"),
    ("eval_exact", "evaluate exact solution (for the norms)"),
    ("codegen", "generate evaluator code"),
    ("derive", "read and derive the problem"),
    ("check", "check the returned Solution"),
    ("norms", "error norms"),
    ("cache", "level cache I/O"),
    ("progress", "progress callback"),
    ("report", "report text and JSON file"),
    ("parser", "command parser (CLI only)"),
    ("design", "design warnings (CLI run only)"),
    ("rest", "rest: planning, orders, verdicts, bookkeeping"),
)


STATES = ("first run of the content",)


class _Clock:
    """Exclusive wall and CPU seconds per stage, nested stages subtracted from their parents."""

    def __init__(self):
        self.wall = {k: 0.0 for k, _ in STAGES}
        self.cpu = {k: 0.0 for k, _ in STAGES}
        self.stack = []
        self.open = []
        self.in_solver = False

    def wrap(self, label, fn):
        def wrapper(*a, **k):
            stage = label(self) if callable(label) else label
            if "design" in self.open and stage in ("codegen", "eval_exact"):
                stage = "design"  # the design checks compile and evaluate their own expressions
            w, c = time.perf_counter(), time.process_time()
            self.stack.append([0.0, 0.0])
            self.open.append(stage)
            try:
                return fn(*a, **k)
            finally:
                self.open.pop()
                iw, ic = self.stack.pop()
                dw, dc = time.perf_counter() - w, time.process_time() - c
                self.wall[stage] += dw - iw
                self.cpu[stage] += dc - ic
                if self.stack:
                    self.stack[-1][0] += dw
                    self.stack[-1][1] += dc
        return wrapper


def _child(argv):
    """Run the study in this process with timers; print one JSON line."""
    w0, c0 = time.perf_counter(), time.process_time()
    import mmsverify.cli as cli
    import mmsverify.cli._run as run_cmd
    from importlib import import_module
    # modules by full name: the package exports functions of the same names (mmsverify.problem.derive, ...)
    cache_mod, derive_mod, study, progress_mod = (
        import_module(f"mmsverify.{m}") for m in ("execute.cache", "problem.derive", "study.refinement",
                                                  "cli.progress"))
    import_module("mmsverify.execute.runner")  # imported by run_study on first use; not part of the timed run
    files_mod = import_module("mmsverify.outputs.studyfile")
    import solvers_demo.fd.poisson  # noqa: F401  (the solver's modules and libraries: their imports are not harness)
    import pyamg  # noqa: F401
    import scipy.fft  # noqa: F401
    imports = (time.perf_counter() - w0, time.process_time() - c0)

    clock = _Clock()

    class Timed:
        """The solver as the study resolves it, with its calls timed (attributes pass through)."""

        def __init__(self, solve):
            self._solve = solve

        def __getattr__(self, name):
            return getattr(self._solve, name)

        def __call__(self, case):
            clock.in_solver = True
            try:
                return self._solve(case)
            finally:
                clock.in_solver = False

    Timed.__call__ = clock.wrap("solver", Timed.__call__)
    resolve = study.resolve_solver
    study.resolve_solver = lambda spec: Timed(resolve(spec))
    derive_mod.Manufactured._eval = clock.wrap(lambda c: "eval_solver" if c.in_solver else "eval_exact",
                                               derive_mod.Manufactured._eval)
    derive_mod.build_program = clock.wrap("codegen", derive_mod.build_program)
    study.get_problem = clock.wrap("derive", study.get_problem)
    derive_mod.get_problem = clock.wrap("derive", derive_mod.get_problem)
    study.derive = clock.wrap("derive", study.derive)
    study.check_solution = clock.wrap("check", study.check_solution)
    study.magnitude_norms = clock.wrap("norms", study.magnitude_norms)
    for name in ("key", "load", "store"):
        setattr(cache_mod.LevelCache, name, clock.wrap("cache", getattr(cache_mod.LevelCache, name)))
    files_mod.write_json = clock.wrap("report", files_mod.write_json)
    study.StudyResult.__str__ = clock.wrap("report", study.StudyResult.__str__)
    cli.build_parser = clock.wrap("parser", cli.build_parser)
    run_cmd.print_design_warnings = clock.wrap("design", run_cmd.print_design_warnings)
    progress_mod.LevelProgress.__call__ = clock.wrap("progress", progress_mod.LevelProgress.__call__)

    import contextlib
    import io
    out = io.StringIO()
    w, c = time.perf_counter(), time.process_time()
    with contextlib.redirect_stdout(out):
        code = cli.console(argv)  # what the mmsverify program runs (main in a process of its own)
    total = (time.perf_counter() - w, time.process_time() - c)
    import resource
    child_cpu = resource.getrusage(resource.RUSAGE_CHILDREN)
    child_cpu = child_cpu.ru_utime + child_cpu.ru_stime
    clock.wall["rest"] = total[0] - sum(clock.wall.values())
    clock.cpu["rest"] = total[1] - sum(clock.cpu.values())
    with open(argv[argv.index("--json") + 1], encoding="utf-8") as fh:
        data = json.load(fh)
    levels = [(lv["cells"], lv["seconds"]) for lv in data["levels"]]
    print(json.dumps({"code": code, "total": total, "imports": imports, "wall": clock.wall, "cpu": clock.cpu,
                      "levels": levels, "passed": data["passed"],
                      "child_cpu": child_cpu}))


def _share(r):
    """Harness share of run_study's wall time in one run, percent."""
    tot = r["total"][0] - r["wall"]["parser"] - r["wall"]["design"]
    return 100 * (tot - r["wall"]["solver"]) / tot


def _run_child(args, workdir):
    cmd = ["run", args.problem, args.solver, "--levels", str(args.levels), "--base-cells", str(args.base),
           "--cache", os.path.join(workdir, "levels"), "--json", os.path.join(workdir, "study.json"),
           # the stage timers live in this process; a time limit would run the levels in a worker
           "--timeout", "none"]
    env = dict(os.environ)
    # Python's default: compiled modules are cached (this machine's environment turns that off, which
    # makes every module imported during the run compile its source again; a user's Python does not)
    env.pop("PYTHONDONTWRITEBYTECODE", None)
    res = subprocess.run([sys.executable, __file__, "--child", *cmd], capture_output=True, text=True, env=env,
                         cwd=ROOT, timeout=3600)
    if res.returncode:
        raise SystemExit(f"instrumented study failed:\n{res.stdout}\n{res.stderr}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def main(argv=None):
    argv = sys.argv[1:] if argv is None else argv
    if argv[:1] == ["--child"]:
        return _child(argv[1:])
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--problem", default="plate-poisson")
    ap.add_argument("--solver", default="poisson2d")
    ap.add_argument("--base", type=int, default=128, help="cells per direction on the coarsest level")
    ap.add_argument("--levels", type=int, default=4)
    ap.add_argument("--repeats", type=int, default=2, help="runs per cache state; the fastest total is shown")
    ap.add_argument("--tiny", action="store_true", help="smoke run: base 8, 4 levels, 1 repeat")
    args = ap.parse_args(argv)
    if args.tiny:
        args.base, args.levels, args.repeats = 8, 4, 1
    load0 = os.getloadavg()
    runs, shares = {}, {}
    with tempfile.TemporaryDirectory() as tmp:
        for rep in range(args.repeats):
            for state in STATES:
                work = tempfile.mkdtemp(dir=tmp)
                r = _run_child(args, work)
                if r["code"] != 0 or not r["passed"]:
                    raise SystemExit(f"the study did not pass (exit {r['code']}); the figure would be meaningless")
                if state not in runs or r["total"][0] < runs[state]["total"][0]:
                    runs[state] = r
                shares.setdefault(state, []).append(_share(r))
    load1 = os.getloadavg()
    first = next(iter(runs.values()))
    cells = " / ".join(f"{c[0]}^{len(c)}" for c, _ in first["levels"])
    print(f"# Harness overhead: `mmsverify run {args.problem} {args.solver} --levels {args.levels} "
          f"--base-cells {args.base} --cache DIR --json FILE`")
    print(f"levels {cells} cells; fastest of {args.repeats} run(s) per cache state; seconds wall / CPU\n")
    header = ["stage"] + list(runs)
    rows = []
    for key, name in STAGES:
        rows.append([name] + [f"{r['wall'][key]:.3f} / {r['cpu'][key]:.3f}" for r in runs.values()])
    rows.append(["**total (command, imports excluded)**"] +
                [f"**{r['total'][0]:.3f}** / {r['total'][1]:.3f}" for r in runs.values()])
    rows.append(["imports of mmsverify and the solver module (not in total)"] +
                [f"{r['imports'][0]:.3f} / {r['imports'][1]:.3f}" for r in runs.values()])
    print(table(header, rows))
    print()
    ratio_rows = []
    for state, r in runs.items():
        for clock in ("wall", "cpu"):
            tot = r["total"][0 if clock == "wall" else 1]
            harness = tot - r[clock]["solver"]
            cli_only = r[clock]["parser"] + r[clock]["design"]
            ratio_rows.append([state, clock, f"{tot - cli_only:.3f}", f"{harness - cli_only:.3f}",
                               f"**{100 * (harness - cli_only) / (tot - cli_only):.2f} %**", f"{tot:.3f}",
                               f"{harness:.3f}", f"{100 * harness / tot:.2f} %"])
    print(table(["run", "clock", "run_study total s", "run_study harness s", "**harness share, run_study**",
                 "CLI total s", "CLI harness s", "harness share, CLI"], ratio_rows))
    print()
    spread = []
    for state, values in shares.items():
        values = sorted(values)
        spread.append([state, str(len(values)), f"{values[0]:.2f} %", f"{statistics.median(values):.2f} %",
                       f"**{values[-1]:.2f} %**"])
    print(table(["run", "runs", "harness share, run_study, wall: lowest", "median", "highest"],
                spread))
    print()
    print("run_study = the command minus its CLI-only stages (parser, design warnings). CPU seconds count every "
          "thread of the process, so BLAS helper threads still spinning after a solve add to the stage that "
          "follows it; on an idle machine the wall clock is the figure.")
    print("solver seconds per level (as the study measured them): " + ", ".join(
        f"{c[0]}^{len(c)}: {s:.3f}" for c, s in first["levels"]))
    print(f"load average before {load0[0]:.2f}, after {load1[0]:.2f}")
    print("Machine: " + "; ".join(machine()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
