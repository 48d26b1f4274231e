"""Issue 5: first- against second-order schemes at equal cost.

Two pairs of schemes on the same manufactured problem each, one study per
scheme (``solvers_demo.equal_cost.compare_at_equal_cost``, which runs
``mmsverify.run_study``): relative L2 error (norm / max |exact|) against h
and against the solver seconds that study measured for each level, and the
time and cells each scheme needs for a 1 % error (log-log interpolation
between the two levels that bracket it), and the same for 0.1 % from the
same measurements.

* ``fd``: estuary-advection (2-D advection-diffusion, k = 0.01), node-centred
  finite differences, first-order upwind against second-order central
  convection, sparse LU.
* ``fv``: plume-advection (2-D pure advection), cell-centred finite volumes
  on the perturbed mesh, donor cell against unlimited linear reconstruction
  (defect correction).

Run: ``python bench/equal_cost.py [--levels 7] [--base 8] [--out bench]``;
writes ``equal_cost_fd.png`` and ``equal_cost_fv.png`` to ``--out``.
"""

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402  (after the thread limits)
from pathlib import Path  # noqa: E402

from _common import machine, table  # noqa: E402

from solvers_demo.equal_cost import compare_at_equal_cost, plot_equal_cost  # noqa: E402
from solvers_demo.fd.advection import FDAdvectionDiffusion  # noqa: E402
from solvers_demo.fv.advection import FVAdvection  # noqa: E402

PAIRS = {
    "fd": ("estuary-advection", {"first-order upwind": FDAdvectionDiffusion(convection="upwind"),
                                 "second-order central": FDAdvectionDiffusion(convection="central")}),
    "fv": ("plume-advection", {"donor cell": FVAdvection(grid="perturbed", reconstruction="first-order"),
                               "linear reconstruction": FVAdvection(grid="perturbed", reconstruction="unlimited")}),
}


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--levels", type=int, default=7)
    parser.add_argument("--base", type=int, default=8, help="cells per direction on the coarsest level")
    parser.add_argument("--target", type=float, default=0.01)
    parser.add_argument("--pairs", nargs="+", default=list(PAIRS), choices=list(PAIRS))
    parser.add_argument("--out", default=str(Path(__file__).resolve().parent), help="folder for the figures")
    args = parser.parse_args(argv)
    print("Machine:", "; ".join(machine()))
    for key in args.pairs:
        problem, schemes = PAIRS[key]
        c = compare_at_equal_cost(problem, schemes, levels=args.levels, base_cells=args.base, target=args.target)
        print(f"\n### {key}: {problem}, {args.levels} levels from {args.base} cells per direction\n")
        rows = []
        for s in c.schemes:
            for n, h, e, t in zip(s.cells, s.h, s.errors, s.seconds):
                rows.append((s.name, n, f"{h:.4g}", f"{e:.3e}", f"{t:.4f}"))
        print(table(("scheme", "cells", "h", "relative L2 error", "solver s"), rows))
        print()
        rows = []
        for cc in (c, c.at(args.target / 10)):
            rows += [(f"{100 * cc.target:g}%", s.name, f"{s.cells_to_target:,.0f}", f"{s.seconds_to_target:.4g}", s.how)
                     for s in cc.schemes]
        print(table(("target", "scheme", "cells to reach it", "solver seconds to reach it", "how"), rows))
        print(f"\n{str(c).splitlines()[-1]}\n{str(c.at(args.target / 10)).splitlines()[-1]}")
        path = Path(args.out) / f"equal_cost_{key}.png"
        plot_equal_cost(c, path)
        print(f"figure: {path}")


if __name__ == "__main__":
    main()
