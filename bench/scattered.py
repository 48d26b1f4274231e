"""Evaluation at scattered points (quadrature points of an unstructured mesh) against hand-written NumPy.

The source, the exact field and its gradient of problems/plate-poisson.toml
(-lap u = f, u = sin(a pi x + 0.2) cos(b pi y) + exp(x y / 2)) at ``--n``
random points in the unit square (1-D coordinate arrays, as a finite-element
code has them), evaluated by

* hand-written NumPy (the reference; the expressions differentiated by hand);
* mmsverify's derived evaluators (Manufactured.source, exact, gradient).

For each: best wall and CPU seconds of ``--repeats`` interleaved runs, the
ratio to the hand-written code, the peak memory traced during one call
(tracemalloc, in full arrays of n points, output included) and the largest
difference from the reference relative to its largest value.
Run: ``python bench/scattered.py [--n 1000000]``.
"""

import argparse
import tracemalloc

import numpy as np

from _common import Timer, machine, table

from mmsverify import derive, load_problem

A, B = 0.7, 1.3


def hand_source(x, y):
    s = np.sin(A * np.pi * x + 0.2) * np.cos(B * np.pi * y)
    return (A * A + B * B) * np.pi ** 2 * s - 0.25 * (x * x + y * y) * np.exp(0.5 * x * y)


def hand_exact(x, y):
    return np.sin(A * np.pi * x + 0.2) * np.cos(B * np.pi * y) + np.exp(0.5 * x * y)


def hand_gradient(x, y):
    e = np.exp(0.5 * x * y)
    return (A * np.pi * np.cos(A * np.pi * x + 0.2) * np.cos(B * np.pi * y) + 0.5 * y * e,
            -B * np.pi * np.sin(A * np.pi * x + 0.2) * np.sin(B * np.pi * y) + 0.5 * x * e)


def _peak(fn, x, y):
    tracemalloc.start()
    fn(x, y)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak / x.nbytes


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=1_000_000, help="number of scattered points (default 10^6)")
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--tiny", action="store_true", help="smoke run: 1000 points, one repeat")
    args = ap.parse_args(argv)
    n, repeats = (1000, 1) if args.tiny else (args.n, args.repeats)
    rng = np.random.default_rng(7)
    x, y = rng.random(n), rng.random(n)
    mms = derive(load_problem("plate-poisson"))
    pairs = {
        "source": (hand_source, lambda x, y: mms.source("u", x, y)),
        "exact": (hand_exact, lambda x, y: mms.exact("u", x, y)),
        "gradient": (hand_gradient, lambda x, y: mms.gradient("u", x, y)),
    }
    for _, derived in pairs.values():
        derived(x[:10], y[:10])            # code generation happens once, outside the timing
    rows = []
    for name, (hand, derived) in pairs.items():
        best = {"hand": [np.inf, np.inf], "derived": [np.inf, np.inf]}
        for _ in range(repeats):
            for label, fn in (("hand", hand), ("derived", derived)):
                with Timer() as t:
                    fn(x, y)
                best[label] = [min(best[label][0], t.wall), min(best[label][1], t.cpu)]
        ref, got = np.atleast_2d(hand(x, y)), np.atleast_2d(derived(x, y))
        diff = float(np.max(np.abs(ref - got)) / np.max(np.abs(ref)))
        for label, fn in (("hand-written NumPy", hand), ("mmsverify", derived)):
            key = "hand" if label.startswith("hand") else "derived"
            rows.append([name, label, f"{best[key][0] * 1e3:.1f}", f"{best[key][1] * 1e3:.1f}",
                         f"{best[key][0] / best['hand'][0]:.2f}x", f"{_peak(fn, x, y):.1f}",
                         f"{diff:.1e}" if key == "derived" else "-"])
    print("\n".join(machine()))
    print(f"{n} scattered points, best of {repeats}")
    print(table(["quantity", "code", "wall ms", "CPU ms", "ratio", "peak (arrays of n)", "max rel. diff"], rows))


if __name__ == "__main__":
    main()
