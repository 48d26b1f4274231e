"""Issue 9, target 6: first contact, ``mmsverify demo`` from a fresh process.

Two measurements:

1. The command exactly as a new user types it (``python -m mmsverify demo``),
   end to end in a new process, twice (nothing derived is kept between
   processes, so both are first runs of the content).
2. Where the time goes: the same demo in a child process with light timers
   wrapped around the stages: interpreter start and imports, building the
   command parser (which imports the chosen command's module), importing the
   solver's module on first use, reading and deriving problems
   (``problem_from_text``), generating evaluator code,
   evaluating exact solutions and sources, the solvers themselves (minus the
   evaluations they ask for), and the rest (norms, orders, verdicts, report).

Run: ``python bench/first_contact.py``.
"""

import argparse
import json
import os
import subprocess
import sys
import time

from _common import ROOT, machine, table

_SPLIT = r"""
import io, json, sys, time, contextlib
t_start = float(sys.argv[1])
w0 = time.perf_counter()
import mmsverify
from mmsverify import derive as _d
from mmsverify.problem import derive as problem_mod
from mmsverify.study import refinement as study_mod
from mmsverify.problem import evaluate as _evaluate
import mmsverify.cli as cli
imports = time.perf_counter() - w0
spent = {"cli": 0.0, "derive": 0.0, "codegen": 0.0, "evaluate": 0.0, "solver import": 0.0, "solver": 0.0}
depth = []

def timed(label, fn):
    def wrapper(*a, **k):
        w = time.perf_counter()
        depth.append(0.0)
        try:
            return fn(*a, **k)
        finally:
            inner = depth.pop()
            total = time.perf_counter() - w
            spent[label] += total - inner
            if depth:
                depth[-1] += total
    return wrapper

cli.build_parser = timed("cli", cli.build_parser)
problem_mod.problem_from_text = timed("derive", problem_mod.problem_from_text)
sys.modules["mmsverify.problem.derive"].build_program = timed("codegen", _evaluate.build_program)
_evaluate.Evaluator.__call__ = timed("evaluate", _evaluate.Evaluator.__call__)
resolve = study_mod.resolve_solver
study_mod.resolve_solver = lambda spec: timed("solver", timed("solver import", resolve)(spec))
w1 = time.perf_counter()
with contextlib.redirect_stdout(io.StringIO()) as out:
    code = cli.console(sys.argv[2:])  # what the mmsverify program runs
run = time.perf_counter() - w1
spent["rest"] = run - sum(spent.values())
spent["start and imports"] = (w0 - t_start) + imports
print(json.dumps({"code": code, "spent": spent, "tail": out.getvalue().strip().splitlines()[-1]}))
"""


def _env():
    return dict(os.environ)


def _end_to_end(args):
    start = time.perf_counter()
    res = subprocess.run([sys.executable, "-m", "mmsverify", *args], capture_output=True, text=True,
                         env=_env(), cwd=ROOT, timeout=900)
    return time.perf_counter() - start, res


def _split(args):
    res = subprocess.run([sys.executable, "-c", _SPLIT, repr(time.perf_counter()), *args], capture_output=True,
                         text=True, env=_env(), cwd=ROOT, timeout=900)
    if res.returncode:
        raise SystemExit(f"instrumented demo failed:\n{res.stderr}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--tiny", action="store_true", help="smoke run: demo with 4 levels")
    args = ap.parse_args(argv)
    demo = ["demo"]
    if args.tiny:
        helptext = subprocess.run([sys.executable, "-m", "mmsverify", "demo", "--help"], capture_output=True,
                                  text=True, cwd=ROOT).stdout
        demo += ["--levels", "4"] if "--levels" in helptext else []
    rows, splits = [], {}
    for label in ("first run", "second run"):
        seconds, res = _end_to_end(demo)
        lines = res.stdout.strip().splitlines() or [""]
        outcome = [ln for ln in lines if ln.startswith("Demo outcome")] or lines[-1:]
        rows.append([label, f"**{seconds:.2f}**", str(res.returncode), outcome[-1][:90]])
    for label in ("first run", "second run"):
        splits[label] = _split(demo)
    print(f"# First contact: `python -m mmsverify {' '.join(demo)}`, wall seconds")
    print()
    print(table(["run", "total s", "exit", "outcome line"], rows))
    print()
    stages = ["start and imports", "cli", "solver import", "derive", "codegen", "evaluate", "solver", "rest"]
    names = {"cli": "command parser (imports the chosen command)",
             "solver import": "import the solver's module (SciPy sparse, pyamg)", "derive": "read and derive problems", "codegen": "generate evaluator code",
             "evaluate": "evaluate exact and source", "solver": "solvers (own work)",
             "rest": "norms, orders, verdicts, report"}
    split_rows = []
    for stage in stages:
        split_rows.append([names.get(stage, stage)] + [f"{splits[k]['spent'][stage]:.3f}" for k in splits])
    split_rows.append(["total"] + [f"{sum(s['spent'].values()):.3f}" for s in splits.values()])
    print(table(["stage (instrumented child)", *splits], split_rows))
    print()
    print("Machine: " + "; ".join(machine()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
