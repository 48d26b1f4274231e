"""Issue 9, target 5: independent studies on two worker processes against one.

Three batches, each run with one worker and with two, in interleaved rounds
(one, two, one, two, ...); the fastest round of each is kept:

1. ``catalogue``: the seeded-mistake catalogue,
   ``solvers_demo.detection.run_catalogue(workers=N)`` in this process
   (every entry is an independent study);
2. ``mistakes command``: the same as the user types it,
   ``python -m mmsverify mistakes --workers N``, end to end in a new
   process (interpreter start and imports included);
3. ``studies``: a batch of independent studies of bundled problems and
   solvers through ``mmsverify.study.batch.run_studies(jobs, workers=N)``.

Next to the wall seconds: the CPU seconds of this process and the children
it waited for (workers started by forkserver are the server's children and
are not counted, so the figure understates the work of pools), and the best ratio the
speed-up the work allows on two cores: min(2, all jobs / longest job), from
the seconds each job took in the one-worker round.
Two workers can only approach 2x when both cores are free; the load
average before and after is printed with the results. BLAS thread pools
are left as a user gets them (set OPENBLAS_NUM_THREADS=1 to pin them).

Run: ``python bench/parallel_batch.py [--repeats 3]``; ``--tiny`` is a
smoke run (a few catalogue entries, two small studies, one round).
"""

import argparse
import os
import subprocess
import sys
import time

from _common import ROOT, machine, table

#: Independent studies of the ``studies`` batch: (problem, solver, run_study keywords).
JOBS = (  # longest first (seconds in one study on this machine), so the pool is not left with a long tail
    ("cavity-flow", "ns-staggered-u", dict(levels=4, base_cells=16)),                           # ~4.4
    ("plate-poisson", "poisson2d", dict(levels=4, base_cells=96)),                              # ~3.8
    ("kiln-conduction", "fd-heat-cn", dict(levels=4, base_cells=16)),                           # ~1.6
    ("block-poisson3d", "poisson2d", dict(levels=4, base_cells=8, options={"linear": "amg"})),  # ~1.6
    ("estuary-advection", "fd-advection-central", dict(levels=4, base_cells=48)),               # ~1.0
    ("plate-poisson", "fv-diffusion-perturbed", dict(levels=4, base_cells=24)),                 # ~0.8
    ("fin-diffusion", "fd-diffusion", dict(levels=4, base_cells=64)),                           # ~0.7
    ("plume-advection", "fv-advection-unlimited", dict(levels=4, base_cells=24)),               # ~0.4
)
TINY_JOBS = (("plate-poisson", "poisson2d", dict(levels=4, base_cells=8)),
             ("fin-diffusion", "fd-diffusion", dict(levels=4, base_cells=8)))
TINY_KEYS = ["fd-source-shifted", "ok-fd-poisson-2d", "ok-heat-crank-nicolson", "ok-adv-central"]


def _cpu():
    t = os.times()
    return t.user + t.system + t.children_user + t.children_system


def _catalogue(workers, keys):
    from solvers_demo.detection import run_catalogue
    report = run_catalogue(keys=keys, workers=workers)
    if not report.ok:
        raise SystemExit(f"the catalogue did not behave as expected with {workers} worker(s):\n{report}")
    longest = max(o.seconds for o in report.outcomes)
    return sum(o.seconds for o in report.outcomes), longest


def _command(workers, keys):
    cmd = [sys.executable, "-m", "mmsverify", "mistakes", "--workers", str(workers)]
    if keys:
        cmd += ["--only", *keys]
    res = subprocess.run(cmd, capture_output=True, text=True, cwd=ROOT, timeout=1800)
    if res.returncode:
        raise SystemExit(f"`{' '.join(cmd[1:])}` failed (exit {res.returncode}):\n{res.stdout}\n{res.stderr}")
    return None, None


def study_jobs(rows):
    """run_study arguments of (problem, solver, plan) rows; a plan's "options" go to the solver."""
    from mmsverify.study.settings import Refinement
    return [dict(problem=p, solver=s, refinement=Refinement(**{k: v for k, v in kw.items() if k != "options"}),
                 options=kw.get("options")) for p, s, kw in rows]


def _studies(workers, jobs):
    from mmsverify.study.batch import run_studies
    results = run_studies(study_jobs(jobs), workers=workers)
    for (p, s, _), r in zip(jobs, results):
        if not r.passed:
            raise SystemExit(f"study {p} / {s} did not pass:\n{r}")
    solver = [sum(lv.seconds for lv in r.levels) for r in results]
    return sum(solver), max(solver)


def _measure(fn, arg, repeats):
    """Interleaved rounds; fastest wall per worker count, with its CPU seconds and work figures."""
    best = {}
    for _ in range(repeats):
        for workers in (1, 2):
            w, c = time.perf_counter(), _cpu()
            work, longest = fn(workers, arg)
            wall, cpu = time.perf_counter() - w, _cpu() - c
            if workers not in best or wall < best[workers][0]:
                best[workers] = (wall, cpu, work, longest)
    return best


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=3, help="interleaved rounds per batch")
    ap.add_argument("--tiny", action="store_true", help="smoke run: small batches, one round")
    args = ap.parse_args(argv)
    keys = TINY_KEYS if args.tiny else None
    jobs = TINY_JOBS if args.tiny else JOBS
    repeats = 1 if args.tiny else args.repeats
    # fill the derivation cache first, so that no batch pays for derivations the other one reuses
    _catalogue(1, TINY_KEYS if args.tiny else None)
    _studies(1, jobs)
    load0 = os.getloadavg()
    batches = [
        ("catalogue: run_catalogue(workers=N)", _measure(_catalogue, keys, repeats)),
        ("mistakes command: python -m mmsverify mistakes --workers N", _measure(_command, keys, repeats)),
        (f"studies: run_studies of {len(jobs)} studies, workers=N", _measure(_studies, jobs, repeats)),
    ]
    load1 = os.getloadavg()
    rows = []
    for name, best in batches:
        (w1, c1, work, longest), (w2, c2, _, _) = best[1], best[2]
        bound = f"{min(2.0, work / longest):.2f}x" if work else "-"
        rows.append([name, f"{w1:.2f} / {c1:.2f}", f"{w2:.2f} / {c2:.2f}", f"**{w1 / w2:.2f}x**",
                     f"{c2 / c1:.2f}" if c1 else "-", bound])
    print(f"# Independent studies on 2 workers against 1 (fastest of {repeats} interleaved round(s))\n")
    print(table(["batch", "1 worker: wall / CPU s", "2 workers: wall / CPU s", "speed-up (wall 1 / wall 2)",
                 "CPU 2 / CPU 1", "best speed-up the jobs allow"], rows))
    print()
    print(f"load average before {load0[0]:.2f}, after {load1[0]:.2f} (1-minute)")
    print("Machine: " + "; ".join(machine()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
