"""Solution-verification demo: a heat-spreader plate with no closed-form solution.

Invented scenario. A copper spreader plate, 40 mm x 30 mm and 2 mm thick,
carries a 10 mm x 8 mm chip that dissipates 15 W. The left and right edges
are clamped to cold rails at 35 C; the top and bottom edges are insulated.
Steady conduction ``-k lap T = q`` with the chip's heat as a smoothly edged
volumetric source (edges 0.5 mm wide, as a real die attach spreads heat).

Nothing here knows the answer: the plate is solved on a sequence of grids and
the quantities an engineer would quote (chip-centre temperature, mean chip
temperature, heat into the right rail) are handed to mmsverify's solution
verification, which estimates the discretization error left in each.

The heat into the right rail is known without solving: with insulated long
edges and a source symmetric about the chip centre it is ``POWER * x_chip /
LX`` = 5.625 W. Its error shrinks much faster than second order (the source's
quadrature converges exponentially), and from the 64-grid on the values
agree to about 1e-11 of 5.625 W, which is round-off: the difference to
5.625 W grows like h^-2 on finer grids, as the condition number does. The
study therefore shows a quantity converged to round-off beside two
second-order ones.

Run ``python -m solvers_demo.spreader`` to see the whole study;
``python -m solvers_demo.spreader --csv levels.csv`` also writes the level
table, to be read by ``python -m mmsverify estimate levels.csv``.
"""

import time

import numpy as np
import scipy.sparse as sps
import scipy.sparse.linalg as spla

LX, LY, THICK = 0.040, 0.030, 0.002          # m
K = 390.0                                    # W/(m K), copper
T_RAIL = 35.0                                # C
POWER = 15.0                                 # W
CHIP = (0.015, 0.015, 0.010, 0.008)          # centre x, centre y, width, height (m)
EDGE = 0.0005                                # m, width of the source's smooth edge


def _bump(s, centre, width):
    """Smooth indicator of |s - centre| < width/2 with tanh edges."""
    return 0.25 * (1 + np.tanh((s - centre + width / 2) / EDGE)) * (1 - np.tanh((s - centre - width / 2) / EDGE))


def source(x, y):
    """Volumetric heat source in W/m^3, normalised to POWER over the plate volume (to 1e-12)."""
    cx, cy, w, hgt = CHIP
    shape = _bump(x, cx, w) * _bump(y, cy, hgt)
    return POWER / (w * hgt * THICK) * shape


def solve_plate(n):
    """Solve on a grid of 4n x 3n cells; returns the quantities and the solve time.

    Node-centred second-order finite differences; Dirichlet rails, ghost-node
    insulated edges.
    """
    start = time.perf_counter()
    nx, ny = 4 * n, 3 * n
    hx, hy = LX / nx, LY / ny
    x, y = np.linspace(0, LX, nx + 1), np.linspace(0, LY, ny + 1)

    def d2(m, h, neumann):
        lo, mid, up = -np.ones(m), 2 * np.ones(m + 1), -np.ones(m)
        if neumann:
            up[0] = lo[-1] = -2.0
        return sps.diags([lo, mid, up], [-1, 0, 1]) / h ** 2

    A = K * (sps.kron(d2(nx, hx, False), sps.identity(ny + 1)) + sps.kron(sps.identity(nx + 1), d2(ny, hy, True)))
    A = A.tocsr()
    f = source(x[:, None], y[None, :]).ravel()
    fixed = np.zeros((nx + 1, ny + 1), dtype=bool)
    fixed[[0, -1], :] = True
    fixed = fixed.ravel()
    T = np.full(f.size, T_RAIL)
    free = ~fixed
    T[free] = spla.spsolve(A[free][:, free].tocsc(), f[free] - A[free][:, fixed] @ T[fixed])
    T = T.reshape(nx + 1, ny + 1)
    wx, wy = np.full(nx + 1, hx), np.full(ny + 1, hy)
    wx[[0, -1]] /= 2
    wy[[0, -1]] /= 2
    cx, cy, w, hgt = CHIP
    i, j = int(round(cx / hx)), int(round(cy / hy))
    chip_weight = _bump(x, cx, w)[:, None] * _bump(y, cy, hgt)[None, :]
    mean_chip = float(np.sum(wx[:, None] * wy[None, :] * chip_weight * T) / np.sum(wx[:, None] * wy[None, :] * chip_weight))
    # heat into the right rail: -k dT/dx at x = LX, one-sided third-order difference, times thickness
    dTdx = (11 * T[-1] - 18 * T[-2] + 9 * T[-3] - 2 * T[-4]) / (6 * hx)
    rail = float(-K * THICK * np.sum(wy * dTdx))
    return {"cells": nx * ny, "chip_centre_T": float(T[i, j]), "mean_chip_T": mean_chip,
            "right_rail_W": rail, "seconds": time.perf_counter() - start}


LEVELS = (16, 32, 64, 128)  # 4n x 3n cells; 128 takes about a second
QUANTITIES = ("chip_centre_T", "mean_chip_T", "right_rail_W")


def run(levels=LEVELS):
    """Solve on every level; a list of result dicts, coarse to fine."""
    return [solve_plate(n) for n in levels]


def write_levels(rows, path):
    """Write the quantities as a level table for ``mmsverify estimate`` (full float64 digits)."""
    lines = ["# heat-spreader demo (invented scenario), solvers_demo/spreader.py", "dim = 2",
             f"volume = {LX * LY!r}", "formal_order = 2", "cells, " + ", ".join(QUANTITIES)]
    lines += [", ".join([str(r["cells"])] + [repr(r[q]) for q in QUANTITIES]) for r in rows]
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("\n".join(lines) + "\n")
    return str(path)


def main(levels=LEVELS, csv=None):
    from mmsverify.analysis.estimate import assess

    rows = run(levels)
    print(__doc__.split("\n\n")[1].replace("\n", " ").replace("``", ""))
    print()
    print(f"{'cells':>8} {'chip centre T (C)':>18} {'mean chip T (C)':>16} {'right rail (W)':>15} {'solve (s)':>10}")
    for r in rows:
        print(f"{r['cells']:>8} {r['chip_centre_T']:>18.6f} {r['mean_chip_T']:>16.6f} {r['right_rail_W']:>15.6f} "
              f"{r['seconds']:>10.3f}")
    print(f"(heat balance: the right rail takes POWER * x_chip / LX = {POWER * CHIP[0] / LX:g} W)")
    cells = [r["cells"] for r in rows]
    for q in QUANTITIES:
        print()
        print(assess([r[q] for r in rows], cells=cells, dim=2, volume=LX * LY, name=q, formal_order=2))
    if csv:
        print(f"\nwrote {write_levels(rows, csv)}; run: python -m mmsverify estimate {csv}")


if __name__ == "__main__":
    import argparse

    ap = argparse.ArgumentParser(description="heat-spreader solution-verification demo")
    ap.add_argument("--levels", default=",".join(map(str, LEVELS)),
                    help="grid levels n (4n x 3n cells), comma-separated, coarse to fine")
    ap.add_argument("--csv", help="also write the level table to this file")
    a = ap.parse_args()
    main(tuple(int(v) for v in a.levels.split(",")), a.csv)
