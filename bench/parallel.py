"""Issue 6: wall time of a four-level study with one worker process and with two.

Each configuration runs the same four-level study through a local process
pool (``run_study(..., workers=N)``) with N = 1 and N = 2, in interleaved
rounds, and reports the best wall time of each, their ratio, and the ratio
the level costs allow at best: with two workers the study cannot finish
before its most expensive level, so the bound is max(level) / sum(levels)
(or 1/2, whichever is larger), taken from the per-level solver seconds of
the one-worker run.

Configurations:

* ``c-sor``: the C demo (solvers_demo/c/poisson2d.c, SOR, cost ~ n^3)
  through the external-program runner, plate-poisson, 4 levels, ratio 2;
* ``c-sor-r1.41``: the same with refinement ratio sqrt(2), where the levels
  cost more alike;
* ``py-sparse``, ``py-sparse-r1.41``: the bundled Python solver (sparse
  direct), ratio 2 and sqrt(2);
* ``2 studies``: two independent four-level studies (``c-sor-r1.41`` and
  ``py-sparse-r1.41``) through :func:`mmsverify.study.batch.run_studies`, one
  study per worker, against the same two run one after the other.

BLAS thread pools are limited to one thread per process (set before NumPy
loads), so one worker uses one core and two workers two; otherwise each
worker's BLAS threads compete with the other worker's. The machine should
be otherwise idle: the load average printed with the results tells.

Run: ``python bench/parallel.py [--repeats 3] [--base 48]``. Needs gcc for
the C configurations (skipped without it).
"""

import os

for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402  (after the thread limits)
import shutil  # noqa: E402
import subprocess  # noqa: E402
import tempfile  # noqa: E402
from pathlib import Path  # noqa: E402

from _common import ROOT, Timer, machine, table  # noqa: E402

from mmsverify import run_study  # noqa: E402
from mmsverify.outputs.export import write_export  # noqa: E402
from mmsverify.execute.external import ExternalSolver  # noqa: E402
from mmsverify.study.settings import Refinement, Running

PROBLEM = "plate-poisson"


def _build(folder):
    write_export(PROBLEM, "c", folder / "mms_problem.h")
    exe = folder / "poisson2d"
    subprocess.run(["gcc", "-std=c99", "-O2", f"-I{folder}", str(ROOT / "solvers_demo" / "c" / "poisson2d.c"),
                    "-o", str(exe), "-lm"], check=True)
    return exe


def _measure(solver, base, ratio, repeats):
    walls = {1: [], 2: []}
    levels = None
    for _ in range(repeats):
        for workers in (1, 2):
            with Timer() as t:
                result = run_study(PROBLEM, solver, refinement=Refinement(levels=4, base_cells=base, ratio=ratio), running=Running(workers=workers))
            if not all(lv.ok for lv in result.levels):
                raise SystemExit(f"a level failed:\n{result}")
            walls[workers].append(t.wall)
            if workers == 1 and (levels is None or t.wall == min(walls[1])):
                levels = [lv.seconds for lv in result.levels]
            cells = [lv.grid.cells[0] for lv in result.levels]
    one, two = min(walls[1]), min(walls[2])
    bound = max(max(levels) / sum(levels), 0.5)
    return cells, levels, one, two, bound


def _studies(jobs, repeats):
    from mmsverify.study.batch import run_studies
    walls = {1: [], 2: []}
    for _ in range(repeats):
        for workers in (1, 2):
            with Timer() as t:
                run_studies(jobs, workers=workers)
            walls[workers].append(t.wall)
    return min(walls[1]), min(walls[2])


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--base", type=int, default=48, help="cells per direction on the coarsest level")
    args = ap.parse_args()
    configs = []
    with tempfile.TemporaryDirectory() as tmp:
        if shutil.which("gcc"):
            exe = _build(Path(tmp))
            c = ExternalSolver([str(exe), "{case}"])
            configs += [("c-sor", c, args.base, 2.0), ("c-sor-r1.41", c, 2 * args.base, 2 ** 0.5)]
        configs += [("py-sparse", "poisson2d", 2 * args.base, 2.0),
                    ("py-sparse-r1.41", "poisson2d", 6 * args.base, 2 ** 0.5)]
        rows = []
        for name, solver, base, ratio in configs:
            cells, levels, one, two, bound = _measure(solver, base, ratio, args.repeats)
            rows.append([name, "/".join(map(str, cells)), " ".join(f"{s:.2f}" for s in levels),
                         f"{one:.2f}", f"{two:.2f}", f"{two / one:.2f}", f"{bound:.2f}"])
        if shutil.which("gcc"):
            jobs = [dict(problem=PROBLEM, solver=c, refinement=Refinement(levels=4, base_cells=2 * args.base, ratio=2 ** 0.5)),
                    dict(problem=PROBLEM, solver="poisson2d",
                         refinement=Refinement(levels=4, base_cells=6 * args.base, ratio=2 ** 0.5))]
            one, two = _studies(jobs, args.repeats)
            rows.append(["2 studies", "c-sor-r1.41 + py-sparse-r1.41", "-", f"{one:.2f}", f"{two:.2f}",
                         f"{two / one:.2f}", "0.50"])
    print("\n".join(machine()))  # the load average shows whether two cores were free
    print(f"best of {args.repeats} interleaved rounds; {PROBLEM}, 4 levels\n")
    print(table(["config", "cells per direction", "level solver s (1 worker)", "1 worker s", "2 workers s",
                 "ratio 2/1", "best possible"], rows))


if __name__ == "__main__":
    main()
