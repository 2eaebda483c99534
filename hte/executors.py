"""Where independent jobs run: in this process, in a local process pool, or on a Dask distributed cluster.

Jobs are plain picklable arguments of a top-level function; results are handed to a callback as they arrive
(in completion order), so the caller can commit each one to the weight cache at once.  With a Dask scheduler
(``--scheduler tcp://HOST:8786``) the computation spreads over every worker connected to it; a worker that
dies has its tasks rerun by the scheduler on the others, and since each result is committed exactly once by
key in this process, nothing is lost or stored twice.

References
----------
.. [1] Dask Development Team, Dask: Library for dynamic task scheduling (2016), https://dask.org
   (distributed scheduler; chosen because it is well kept, pure Python, and runs unchanged from a laptop to
   an HPC batch allocation via dask-jobqueue or `dask scheduler` / `dask worker` started by hand).
"""

from __future__ import annotations

from concurrent.futures import ProcessPoolExecutor, as_completed


def run_jobs(function, jobs: list, on_result, *, workers: int = 1, scheduler: str | None = None) -> None:
    """Run ``function(job)`` for every job and call ``on_result(result)`` as each one finishes.

    Parameters
    ----------
    function : callable
        A module-level function (picklable).
    jobs : list
        Its arguments, one per call.
    on_result : callable
        Called in this process with each result, in completion order.
    workers : int
        Local processes (1 = run here, no pool).  Ignored when `scheduler` is given.
    scheduler : str, optional
        Address of a running Dask distributed scheduler.
    """
    if not jobs:
        return
    if scheduler:
        _run_on_dask(function, jobs, on_result, scheduler)
    elif workers > 1 and len(jobs) > 1:
        pool = ProcessPoolExecutor(max_workers=min(workers, len(jobs)))
        try:
            futures = [pool.submit(function, job) for job in jobs]
            for future in as_completed(futures):
                on_result(future.result())
        except BaseException:
            pool.shutdown(wait=False, cancel_futures=True)
            raise
        pool.shutdown(wait=True)
    else:
        for job in jobs:
            on_result(function(job))


def _run_on_dask(function, jobs, on_result, scheduler: str) -> None:
    from hte.errors import ParameterError

    try:
        from distributed import Client
        from distributed import as_completed as dask_as_completed
    except ImportError:  # pragma: no cover - installed by scripts/setup
        raise ParameterError("--scheduler needs the Dask distributed package: pip install 'dask[distributed]'") from None
    try:
        client = Client(scheduler, timeout=30)
    except OSError as exc:
        raise ParameterError(f"--scheduler {scheduler}: cannot reach a Dask scheduler there ({exc}); start one with "
                             "`dask scheduler` and workers with `dask worker ADDRESS`") from None
    try:
        futures = client.map(function, jobs, pure=False)
        for future in dask_as_completed(futures):
            on_result(future.result())
    finally:
        client.close()
