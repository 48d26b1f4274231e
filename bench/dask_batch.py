"""Issue 19: a batch of independent studies on a Dask LocalCluster of 2 workers against 1 (target >= 1.6x).

The batch is ``parallel_batch.JOBS`` through ``mmsverify.study.batch.run_studies(jobs,
executor=client)``; each cluster (one worker process of one thread, or two)
is started before its rounds and its start is not timed. Rounds alternate
(one worker, two, one, two, ...) and the fastest of each is kept. The
results of the two clusters are compared bit for bit with each other.
Two workers can only approach 2x when both cores are free; the load average
is printed with the result.

Run: ``python bench/dask_batch.py [--repeats 2]``; ``--tiny`` is a smoke run.
"""

import argparse
import os
import sys
import time

from _common import machine, table
from parallel_batch import JOBS, TINY_JOBS, study_jobs


def _numbers(results):
    return [([(lv.h, lv.errors) for lv in r.levels], [v.observed for v in r.verdicts]) for r in results]


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=2, help="rounds per cluster size")
    ap.add_argument("--tiny", action="store_true", help="smoke run: two small studies, one round")
    args = ap.parse_args(argv)
    import distributed
    from mmsverify.study.batch import run_studies
    jobs = study_jobs(TINY_JOBS if args.tiny else JOBS)
    repeats = 1 if args.tiny else args.repeats
    run_studies(jobs[:1])  # fill the derivation cache, so that no round pays for derivations
    clusters = {n: distributed.LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                            dashboard_address=None, silence_logs=40) for n in (1, 2)}
    clients = {n: distributed.Client(c) for n, c in clusters.items()}
    try:
        for client in clients.values():   # warm the workers: imports and derivations, untimed
            run_studies(jobs, executor=client)
        load0 = os.getloadavg()
        best, numbers = {}, {}
        for _ in range(repeats):
            for n, client in clients.items():
                start = time.perf_counter()
                results = run_studies(jobs, executor=client)
                wall = time.perf_counter() - start
                best[n] = min(best.get(n, wall), wall)
                numbers[n] = _numbers(results)
        load1 = os.getloadavg()
    finally:
        for n in clients:
            clients[n].close()
            clusters[n].close()
    same = "yes" if numbers[1] == numbers[2] else "NO"
    print(f"# {len(jobs)} studies on a Dask LocalCluster, 2 workers against 1 (fastest of {repeats} round(s))\n")
    print(table(["1 worker: wall s", "2 workers: wall s", "speed-up (wall 1 / wall 2)", "target",
                 "results identical"],
                [[f"{best[1]:.2f}", f"{best[2]:.2f}", f"**{best[1] / best[2]:.2f}x**", ">= 1.6x", same]]))
    print()
    print(f"load average before {load0[0]:.2f}, after {load1[0]:.2f} (1-minute)")
    print("Machine: " + "; ".join(machine()))
    return 0 if same == "yes" else 1


if __name__ == "__main__":
    sys.exit(main())
