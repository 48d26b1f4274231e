"""Issue 9, target 3: deriving compressible Navier-Stokes sources, cold and cached.

For mmsverify/problem/bundled/compressible-2d.toml and compressible-3d.toml, each in a fresh
Python process (so no in-memory cache helps):

* cold: an empty derivation cache; reading the file, differentiating
  (sources, fluxes), the content hash, then generating the evaluator code
  (CSE, hoisting, printing) of every source term and exact field;
* cached: the same again with the cache the cold run left behind.

Imports (mmsverify, sympy, NumPy) are timed apart from derivation. For
comparison the cold process also times ``sympy.lambdify(..., cse=True)`` of
the same source terms. Every phase in wall and CPU seconds; the ratio of
cached to cold. Run: ``python bench/derivation.py``.
"""

import argparse
import json
import os
import subprocess
import sys
import tempfile

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
    for name in problem.equations:
        mms.source(name, *point)
    for name in problem.fields:
        mms.exact(name, *point)
timed("CSE and code generation", generate)
if sys.argv[2] == "compare":
    timed("lambdify with CSE (comparison)",
          lambda: [sp.lambdify(problem.coords, e, "numpy", cse=True) for e in problem.equations.values()])
out["operations"] = int(sum(sp.count_ops(e) for e in problem.equations.values()))
print(json.dumps(out))
"""


def _run(problem, cache, compare):
    env = {**os.environ, "MMSVERIFY_CACHE": cache}
    res = subprocess.run([sys.executable, "-c", _CHILD, problem, "compare" if compare else "-"],
                         capture_output=True, text=True, env=env, cwd=ROOT, timeout=900)
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
        cold, warm = [], []
        for _ in range(repeats):
            with tempfile.TemporaryDirectory() as cache:
                cold.append(_run(name, cache, compare=True))
                warm.append(_run(name, cache, compare=False))
        best = {}
        for label, runs in (("cold", cold), ("cached", warm)):
            total = min(runs, key=lambda r: sum(r[p][0] for p in phases))
            best[label] = total
            cells = [f"{total[p][0]:.3f} / {total[p][1]:.3f}" for p in phases]
            t_wall, t_cpu = sum(total[p][0] for p in phases), sum(total[p][1] for p in phases)
            rows.append([name, label, f"{total['import'][0]:.2f} / {total['import'][1]:.2f}", *cells,
                         f"**{t_wall:.3f}** / {t_cpu:.3f}"])
        ratio = (sum(best["cached"][p][0] for p in phases) / sum(best["cold"][p][0] for p in phases))
        lam = best["cold"]["lambdify with CSE (comparison)"]
        rows.append([name, f"cached/cold ratio {ratio:.3f}; {best['cold']['operations']} operations; "
                           f"lambdify+CSE alone {lam[0]:.2f} s", "", "", "", ""])
    print(f"# Derivation of compressible Navier-Stokes sources, best of {repeats} fresh processes")
    print()
    print("Each cell: wall / CPU seconds. Total = derivation without imports.")
    print()
    print(table(["problem", "run", "imports", *phases, "total"], rows))
    print()
    print("Machine: " + "; ".join(machine()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
