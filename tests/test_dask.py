"""Studies on a Dask cluster give the same numbers, bit for bit, as in this process.

`distributed` is part of the test extra, so these tests run in CI rather than being skipped.
"""

import distributed
import pytest

from mmsverify import run_study
from mmsverify.study.batch import run_studies
from mmsverify.study.settings import Refinement, Running

JOBS = [dict(problem="plate-poisson", solver="poisson2d", refinement=4),
        dict(problem="plate-poisson", solver="poisson2d-neumann1", refinement=4),
        dict(problem="fin-diffusion", solver="fd-diffusion", refinement=3),
        dict(problem="cavity-flow", solver="ns-staggered", refinement=3)]


def _numbers(result):
    """Every number a study produced that must not depend on where it ran."""
    return ([(lv.level, lv.h, lv.status, lv.errors, lv.scale, lv.quantities) for lv in result.levels],
            [(v.field, v.norm, v.observed, v.status) for v in result.verdicts], result.passed)


@pytest.fixture(scope="module")
def client():
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None,
                                  silence_logs=40) as cluster, distributed.Client(cluster) as client:
        yield client


def test_a_batch_of_studies_on_two_dask_workers_matches_a_serial_run_bit_for_bit(client):
    assert len(client.scheduler_info()["workers"]) == 2
    on_cluster = run_studies(JOBS, executor=client)
    serial = run_studies(JOBS)
    assert [_numbers(r) for r in on_cluster] == [_numbers(r) for r in serial]
    assert [r.passed for r in serial] == [True, False, True, True]   # the seeded Neumann mistake is caught


def test_the_levels_of_one_study_on_the_cluster_match_too(client):
    assert _numbers(run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=3), running=Running(executor=client))) == \
        _numbers(run_study("plate-poisson", "poisson2d", refinement=Refinement(levels=3)))
