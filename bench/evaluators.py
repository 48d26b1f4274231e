"""Issue 9, target 2: derived evaluators against hand-written NumPy.

The energy source of mmsverify/problem/bundled/compressible-2d.toml (compressible
Navier-Stokes, Roy et al. 2004 style fields) on an N x N mesh, evaluated by

* hand-written NumPy (bench/_handwritten.py) on the full mesh: the reference;
* the same on broadcasting axis arrays;
* mmsverify's generated evaluator (Manufactured.source) on the full mesh, on
  axis arrays, and with 2 threads;
* sympy.lambdify with CSE, and plain lambdify (slow; ``--plain``);
* numexpr running every CSE line on full arrays, when numexpr is installed.

For each: best wall and CPU seconds of ``--repeats`` runs taken in
interleaved rounds, the ratio to hand-written NumPy on the full mesh, the
peak memory traced during one call (tracemalloc, in full N x N arrays,
output included) and the largest difference from the reference relative to
its largest value. Run: ``python bench/evaluators.py [--n 2048]``.
"""

import argparse
import re
import sys
import tracemalloc

import numpy as np

from _common import Timer, machine, table
import _handwritten

import sympy as sp
from mmsverify import derive, load_problem
from mmsverify.problem.evaluate import build_program


def _numexpr_variant(program):
    """Every line of the generated program through numexpr, on full arrays."""
    try:
        import numexpr
    except ImportError:
        return None

    def convert(code):
        code = code.replace("numpy.pi", repr(np.pi)).replace("numpy.", "")
        code = re.sub(r"_ipow\(([^,()]+), (-?\d+)\)", r"(\1**\2)", code)
        code = re.sub(r"\((\d+)/(\d+)\)", lambda m: repr(int(m.group(1)) / int(m.group(2))), code)
        return code
    lines = [(name, convert(code)) for name, code, _, _ in program.lines]
    result = convert(program.result[0])

    def run(x, y):
        env = {"_a0": x, "_a1": y}
        for name, code in lines:
            env[name] = numexpr.evaluate(code, local_dict=env)
        return numexpr.evaluate(result, local_dict=env)
    try:
        run(np.linspace(0, 1, 3)[:, None], np.linspace(0, 1, 3)[None, :])
    except Exception:  # a function numexpr does not have
        return None
    return run


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=2048, help="mesh points per direction (default 2048)")
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--plain", action="store_true", help="also time plain lambdify (about 20 s at 2048^2)")
    ap.add_argument("--tiny", action="store_true", help="smoke run: 48 x 48, one repeat")
    args = ap.parse_args(argv)
    n, repeats = (48, 1) if args.tiny else (args.n, args.repeats)

    problem = load_problem("compressible-2d")
    mms = derive(problem)
    expr = mms.equations["p"]
    xs = np.linspace(0.0, 1.0, n)
    X, Y = np.meshgrid(xs, xs, indexing="ij")
    xa, ya = xs[:, None], xs[None, :]
    full = X.nbytes

    variants = {
        "hand-written NumPy, full mesh": lambda: _handwritten.energy_source(X, Y),
        "hand-written NumPy, axis arrays": lambda: _handwritten.energy_source(xa, ya),
        "mmsverify, full mesh": lambda: mms.source("p", X, Y),
        "mmsverify, axis arrays": lambda: mms.source("p", xa, ya),
    }
    with Timer() as t_cse:
        cse = sp.lambdify(problem.coords, expr, modules="numpy", cse=True)
    variants["lambdify with CSE, full mesh"] = lambda: cse(X, Y)
    ne = _numexpr_variant(build_program(expr, problem.coords))
    if ne is not None:
        variants["numexpr per CSE line, full mesh"] = lambda: ne(X, Y)
    if args.plain or args.tiny:
        plain = sp.lambdify(problem.coords, expr, modules="numpy")
        variants["plain lambdify, full mesh"] = lambda: plain(X, Y)

    reference = _handwritten.energy_source(X, Y)
    scale = np.max(np.abs(reference))
    for name in ("mmsverify, full mesh", "mmsverify, axis arrays"):
        variants[name]()                             # generate code and block plans outside the timing
    best = {k: [np.inf, np.inf] for k in variants}
    for _ in range(repeats):
        for name, f in variants.items():
            with Timer() as t:
                out = f()
            best[name][0] = min(best[name][0], t.wall)
            best[name][1] = min(best[name][1], t.cpu)
            del out
    rows = []
    ref_wall, ref_cpu = best["hand-written NumPy, full mesh"]
    for name, f in variants.items():
        tracemalloc.start()
        try:
            out = f()
            _, peak = tracemalloc.get_traced_memory()
        finally:
            tracemalloc.stop()
        err = float(np.max(np.abs(np.broadcast_to(out, X.shape) - reference)) / scale)
        del out
        wall, cpu = best[name]
        rows.append([name, f"{wall:.3f}", f"{cpu:.3f}", f"{wall / ref_wall:.2f}", f"{cpu / ref_cpu:.2f}",
                     f"{peak / full:.1f}", f"{err:.1e}"])

    print(f"# Energy source of compressible-2d on a {n} x {n} mesh ({n * n} points), best of {repeats}")
    print()
    print(table(["evaluator", "wall s", "CPU s", "wall ratio", "CPU ratio", "peak (full arrays)",
                 "max rel. diff"], rows))
    print()
    print(f"lambdify with CSE took {t_cse.wall:.2f} s to generate; ratios are to hand-written NumPy, full mesh.")
    print("Machine: " + "; ".join(machine()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
