"""Where chunks of an evaluation run: in this process, local worker processes, a Dask
cluster, or any ``concurrent.futures.Executor``.

Everything goes through one interface, ``Executor.submit(fn, *args) -> Future``; the
local pool and Dask's ``Client.get_executor`` both provide it. A local pool whose worker
dies is rebuilt and the lost chunks are sent again (see :func:`run_chunks`).
"""

from __future__ import annotations

import concurrent.futures as cf
import multiprocessing
import os
from concurrent.futures.process import BrokenProcessPool
from typing import Any, Callable, Sequence

from .errors import MissingExtraError


def default_workers() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


class LocalPool:
    """A pool of local worker processes that survives the death of a worker.

    Keep one for many evaluations (an evolver's whole run) to pay process start-up once.
    """

    def __init__(self, workers: int | None = None) -> None:
        self.workers = workers or default_workers()
        self._pool: cf.ProcessPoolExecutor | None = None

    def executor(self) -> cf.ProcessPoolExecutor:
        if self._pool is None:
            # spawn: workers start clean, whatever threads or windows the parent holds
            self._pool = cf.ProcessPoolExecutor(self.workers, mp_context=multiprocessing.get_context("spawn"))
        return self._pool

    def rebuild(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=False, cancel_futures=True)
        self._pool = None

    def close(self) -> None:
        if self._pool is not None:
            self._pool.shutdown(wait=True, cancel_futures=True)
            self._pool = None

    def __enter__(self) -> LocalPool:
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()


def dask_executor(target: Any) -> cf.Executor:
    """An executor on a Dask cluster, from a scheduler address or a ``distributed.Client``."""
    try:
        import distributed
    except ImportError:
        raise MissingExtraError("cluster", "distributed", "Evaluating on a Dask cluster") from None
    client = target if isinstance(target, distributed.Client) else distributed.Client(target)
    return client.get_executor(pure=False)


def run_chunks(
    fn: Callable[..., Any],
    chunks: Sequence[tuple],
    *,
    executor: Any = None,
    pool: LocalPool | None = None,
    retries: int = 3,
    on_done: Callable[[int, Any], None] | None = None,
) -> list[Any]:
    """Run ``fn(*chunk)`` for every chunk and return results in chunk order.

    With neither ``executor`` nor ``pool`` the chunks run here, one after another. With a
    ``pool``, a chunk lost to a dead worker process is sent again on a rebuilt pool, up to
    ``retries`` times. ``on_done(index, result)`` is called as each chunk finishes.
    """
    results: list[Any] = [None] * len(chunks)
    if executor is None and pool is None:
        for k, chunk in enumerate(chunks):
            results[k] = fn(*chunk)
            if on_done:
                on_done(k, results[k])
        return results
    pending = set(range(len(chunks)))
    attempts = 0
    while pending:
        ex = executor if executor is not None else pool.executor()
        futures = {ex.submit(fn, *chunks[k]): k for k in sorted(pending)}
        broken = False
        for future in cf.as_completed(futures):
            k = futures[future]
            try:
                results[k] = future.result()
            except BrokenProcessPool:
                broken = True
                continue
            pending.discard(k)
            if on_done:
                on_done(k, results[k])
        if broken and pending:
            attempts += 1
            if pool is None or attempts > retries:
                raise RuntimeError(f"worker processes kept dying; {len(pending)} chunk(s) could not be evaluated")
            pool.rebuild()
    return results
