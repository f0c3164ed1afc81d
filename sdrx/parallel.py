"""Running independent jobs here, on local worker processes, or on a Dask cluster.

The one module of sdrx that imports Dask (and only when asked to: a run in
this process never imports it). A job is a plain picklable object and
``fn(job)`` a module-level function, so the same call runs in this process,
on a :class:`dask.distributed.LocalCluster` of N worker processes bound to
the loopback interface, or on the workers of an existing scheduler.

Results are handed to ``on_result(index, result)`` as they complete (in any
order on a cluster) and returned in job order. An error raised by a job is
raised here, with its own type and message (an :class:`~sdrx.errors.SdrxError`
stays one, so the command line still prints one line).

References: Dask distributed documentation, ``Client.submit``,
``as_completed``, ``LocalCluster``.
"""

from __future__ import annotations

import contextlib
import logging
from typing import Callable, Optional, Sequence

from .errors import ParameterError

__all__ = ["run_jobs", "describe", "check_workers"]

LOOPBACK = "127.0.0.1"


def describe(workers: Optional[int], scheduler: Optional[str]) -> str:
    """Where jobs run, for messages: "this process", "4 local workers", "scheduler tcp://...".

    Examples
    --------
    >>> describe(None, None), describe(2, None), describe(None, "tcp://10.0.0.5:8786")
    ('this process', '2 local workers', 'scheduler tcp://10.0.0.5:8786')
    """
    if scheduler:
        return f"scheduler {scheduler}"
    if workers:
        return f"{workers} local worker{'s' if workers != 1 else ''}"
    return "this process"


def check_workers(workers, scheduler) -> None:
    """Refuse both at once, or a number of workers that is not a whole number >= 1."""
    if workers is not None and scheduler is not None:
        raise ParameterError("--workers and --scheduler: give one of them (local workers or an existing cluster)")
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise ParameterError(f"--workers: must be a whole number of worker processes >= 1, got {workers!r}")


@contextlib.contextmanager
def _client(workers, scheduler, connect_timeout_s):
    from dask.distributed import Client, LocalCluster

    if scheduler is not None:
        try:
            client = Client(scheduler, timeout=f"{connect_timeout_s}s")
        except (OSError, TimeoutError, ValueError) as exc:
            raise ParameterError(f"--scheduler {scheduler}: cannot reach a Dask scheduler there ({exc})") from None
        try:
            yield client
        finally:
            client.close()
        return
    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host=LOOPBACK,
                           dashboard_address=None, silence_logs=logging.ERROR)
    try:
        client = Client(cluster)
        try:
            yield client
        finally:
            client.close()
    finally:
        cluster.close()


def run_jobs(fn: Callable, jobs: Sequence, *, workers: Optional[int] = None, scheduler: Optional[str] = None,
             weights: Optional[Sequence[int]] = None, progress=None, on_result=None,
             connect_timeout_s: float = 10.0) -> list:
    """Run ``fn(job)`` for every job; return the results in job order.

    Parameters
    ----------
    fn : callable
        A module-level function (it is pickled by reference for workers).
    jobs : sequence
        Picklable job descriptions.
    workers : int, optional
        Run on this many local worker processes (LocalCluster on 127.0.0.1,
        one thread each).
    scheduler : str, optional
        Address of an existing Dask scheduler (``tcp://host:8786``).
    weights : sequence of int, optional
        Size of each job for the progress bar (default 1 each).
    progress : callable, optional
        ``progress(done, total)`` in the units of ``weights``, after each job.
    on_result : callable, optional
        ``on_result(index, result)`` as each job completes.
    connect_timeout_s : float
        How long to try to reach ``scheduler``.

    Raises
    ------
    ParameterError
        Both or a bad number of workers; a scheduler that cannot be reached.

    Examples
    --------
    >>> run_jobs(abs, [-1, 2, -3])
    [1, 2, 3]
    """
    check_workers(workers, scheduler)
    w = list(weights) if weights is not None else [1] * len(jobs)
    total = sum(w)
    results = [None] * len(jobs)
    done = 0
    if workers is None and scheduler is None:
        for i, job in enumerate(jobs):
            results[i] = fn(job)
            if on_result is not None:
                on_result(i, results[i])
            done += w[i]
            if progress is not None:
                progress(done, total)
        return results
    from dask.distributed import as_completed

    with _client(workers, scheduler, connect_timeout_s) as client:
        futures = [client.submit(fn, job, pure=False) for job in jobs]
        index = {f.key: i for i, f in enumerate(futures)}
        try:
            for fut in as_completed(futures):
                i = index[fut.key]
                results[i] = fut.result()
                fut.release()
                if on_result is not None:
                    on_result(i, results[i])
                done += w[i]
                if progress is not None:
                    progress(done, total)
        except BaseException:
            client.cancel(futures)
            raise
    return results
