"""Batches of studies: several run_study calls through one executor or pool."""

from mmsverify.errors import MMSError, SolverError
from mmsverify.execute.runner import as_executor, farm
from mmsverify.study.refinement import run_study

__all__ = ["run_studies"]


def _study_job(kwargs):
    return run_study(**kwargs)


def run_studies(jobs, *, executor=None, workers=None):
    """Run several studies, each a dict of :func:`~mmsverify.study.refinement.run_study` arguments.

    Studies run in parallel through ``executor`` or a local pool of
    ``workers`` processes (serially when neither is given); each study runs
    its own levels serially unless its dict says otherwise. Returns the
    StudyResults in order; an invalid study raises its error, naming the job.
    """
    jobs = [dict(j) for j in jobs]
    for k, job in enumerate(jobs):
        if "problem" not in job or "solver" not in job:
            raise SolverError(f"study job {k} needs 'problem' and 'solver' entries; got {sorted(job)}")
    pool = as_executor(executor)
    outcomes = [None] * len(jobs)
    if pool is not None:
        futures = [pool.submit(_study_job, job) for job in jobs]
        outcomes = [fut.exception() or fut.result() for fut in futures]
    elif workers is not None:
        def done(k, kind, value):
            outcomes[k] = value if kind in ("ok", "error") else SolverError(
                f"study job {k}: the worker process died while running it")
        farm([(k, _study_job, (job,)) for k, job in enumerate(jobs)], int(workers), None, done)
    else:
        for k, job in enumerate(jobs):
            try:
                outcomes[k] = _study_job(job)
            except Exception as exc:
                outcomes[k] = exc
    for k, (job, out) in enumerate(zip(jobs, outcomes)):
        if isinstance(out, MMSError):
            raise type(out)(f"study job {k} ({job['problem']}, {job['solver']}): {out}") from out
        if isinstance(out, BaseException):
            raise out
    return outcomes
