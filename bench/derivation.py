"""Cold derivation of compressible Navier-Stokes sources, each in a fresh process.

For mmsverify/problem/bundled/compressible-2d.toml and compressible-3d.toml: reading the
file, differentiating (sources, fluxes), the content hash, then generating
the evaluator code (CSE, hoisting, printing) of every source term and exact
field. Imports (mmsverify, sympy, NumPy) are timed apart from derivation.
For comparison the process also times ``sympy.lambdify(..., cse=True)`` of
the same source terms. Every phase in wall and CPU seconds.
Run: ``python bench/derivation.py``.
"""

import argparse
import json
import subprocess
import sys

from _common import ROOT, machine, table

_CHILD = r"""
import json, sys, time
w0, c0 = time.perf_counter(), time.process_time()
import numpy as np, sympy as sp
import mmsverify
from mmsverify import derive, load_problem
out = {"import": (time.perf_counter() - w0, time.process_time() - c0)}

def timed(key, fn):
    w, c = time.perf_counter(), time.process_time()
    value = fn()
    out[key] = (time.perf_counter() - w, time.process_time() - c)
    return value

problem = timed("parse and differentiate", lambda: load_problem(sys.argv[1]))
mms = derive(problem)
point = [0.3] * problem.dim

def generate():
    for name in mms.equations:
        mms.source(name, *point)
    for name in problem.fields:
        mms.exact(name, *point)
timed("CSE and code generation", generate)
if sys.argv[2] == "compare":
    timed("lambdify with CSE (comparison)",
          lambda: [sp.lambdify(problem.coords, e, "numpy", cse=True) for e in mms.equations.values()])
out["operations"] = int(sum(sp.count_ops(e) for e in mms.equations.values()))
print(json.dumps(out))
"""


def _run(problem, compare):
    res = subprocess.run([sys.executable, "-c", _CHILD, problem, "compare" if compare else "-"],
                         capture_output=True, text=True, cwd=ROOT, timeout=900)
    if res.returncode:
        raise SystemExit(f"child failed for {problem}:\n{res.stderr}")
    return json.loads(res.stdout.strip().splitlines()[-1])


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3, help="fresh processes per measurement (best kept)")
    ap.add_argument("--tiny", action="store_true", help="smoke run: 2-D only, one repeat")
    args = ap.parse_args(argv)
    problems = ["compressible-2d"] if args.tiny else ["compressible-2d", "compressible-3d"]
    repeats = 1 if args.tiny else args.repeats
    phases = ["parse and differentiate", "CSE and code generation"]
    rows = []
    for name in problems:
        runs = [_run(name, compare=True) for _ in range(repeats)]
        total = min(runs, key=lambda r: sum(r[p][0] for p in phases))
        cells = [f"{total[p][0]:.3f} / {total[p][1]:.3f}" for p in phases]
        t_wall, t_cpu = sum(total[p][0] for p in phases), sum(total[p][1] for p in phases)
        lam = total["lambdify with CSE (comparison)"]
        rows.append([name, f"{total['import'][0]:.2f} / {total['import'][1]:.2f}", *cells,
                     f"**{t_wall:.3f}** / {t_cpu:.3f}", f"{lam[0]:.2f}", str(total["operations"])])
    print(f"# Derivation of compressible Navier-Stokes sources, best of {repeats} fresh processes")
    print()
    print("Each cell: wall / CPU seconds. Total = derivation without imports.")
    print()
    print(table(["problem", "imports", *phases, "total", "lambdify+CSE alone", "operations"], rows))
    print()
    print("Machine: " + "; ".join(machine()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
