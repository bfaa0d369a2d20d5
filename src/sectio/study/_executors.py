"""Executors of a study's field tasks: local processes (default) or a Dask cluster.

Both yield ``(task, record, png)`` as fields finish, keep only a bounded number of tasks in
flight (image bytes travel with the task), and cancel what is pending when the caller stops
(Ctrl-C): results already returned have been written by then.
"""

from __future__ import annotations

import multiprocessing as mp
import os
from collections.abc import Callable, Iterable, Iterator

from ..errors import InputError, OptionError
from ._work import FieldTask, init_worker, run_field

__all__ = ["local_executor", "dask_executor", "serial_executor"]


def serial_executor(tasks: Iterable[Callable[[], FieldTask]]) -> Iterator:
    """Run in this process (workers = 1 without a pool; also used by tests)."""
    for make in tasks:
        task = make()
        record, png = run_field(task)
        yield task, record, png


def local_executor(tasks: Iterable[Callable[[], FieldTask]], *, workers: int) -> Iterator:
    """A pool of ``workers`` processes (spawned, one BLAS thread each)."""
    from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

    if workers < 1:
        raise OptionError(f"--workers must be at least 1, got {workers}.")
    for var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(var, "1")
    pool = ProcessPoolExecutor(max_workers=workers, mp_context=mp.get_context("spawn"),
                               initializer=init_worker, initargs=(os.getpid(),))
    it = iter(tasks)
    pending: dict = {}
    try:
        while True:
            while len(pending) < 2 * workers:
                make = next(it, None)
                if make is None:
                    break
                task = make()
                pending[pool.submit(run_field, task)] = task
            if not pending:
                break
            done, _ = wait(pending, return_when=FIRST_COMPLETED)
            for fut in done:
                task = pending.pop(fut)
                record, png = fut.result()
                yield task, record, png
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


def _dask_client(address: str, timeout_s: float):
    try:
        from dask.distributed import Client
    except ImportError:
        raise InputError("--scheduler needs Dask; install it with: pip install 'sectio[dask]'"
                         ) from None
    try:
        return Client(address, timeout=timeout_s, set_as_default=False)
    except (OSError, TimeoutError) as exc:
        raise InputError(f"Cannot reach the Dask scheduler at {address} ({exc}); check the "
                         "address (tcp://HOST:PORT) and that the scheduler is running.") from None


def dask_executor(tasks: Iterable[Callable[[], FieldTask]], *, address: str,
                  in_flight: int | None = None, timeout_s: float = 20.0) -> Iterator:
    """Send the fields to the Dask distributed cluster at ``address`` (tcp://HOST:PORT)."""
    if not address.startswith(("tcp://", "tls://", "inproc://", "ucx://")):
        raise OptionError(f"--scheduler {address!r} is not a scheduler address; give "
                          "tcp://HOST:PORT.")
    client = _dask_client(address, timeout_s)
    try:
        from dask.distributed import as_completed

        n_workers = max(1, sum(w.get("nthreads", 1) for w in
                               client.scheduler_info().get("workers", {}).values()))
        limit = in_flight or 2 * n_workers
        it = iter(tasks)
        pending: dict = {}
        ac = None

        def submit_more():
            while len(pending) < limit:
                make = next(it, None)
                if make is None:
                    return
                task = make()
                fut = client.submit(run_field, task, pure=False)
                pending[fut] = task
                if ac is not None:
                    ac.add(fut)

        submit_more()
        if not pending:
            return
        ac = as_completed(list(pending), loop=client.loop)
        try:
            for fut in ac:
                task = pending.pop(fut)
                record, png = fut.result()
                yield task, record, png
                submit_more()
        finally:
            for fut in pending:
                fut.cancel()
    finally:
        client.close()
