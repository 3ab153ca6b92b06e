"""Where chunks of an evaluation run: in this process, local worker processes, a Dask
cluster, or any ``concurrent.futures.Executor``.

Everything goes through one interface, ``Executor.submit(fn, *args) -> Future``; the
local pool and Dask's ``Client.get_executor`` both provide it. A local pool whose worker
dies is rebuilt and the lost chunks are sent again (see :func:`run_chunks`); on Dask the
scheduler itself re-runs the tasks of a lost worker.

Several threads may share one :class:`LocalPool` or :class:`DaskExecutor` (an evolver
running several runs side by side, each thread evaluating its own generation): the pool
is built and rebuilt under a lock, a dead worker forces one rebuild however many threads
notice it, and each thread re-sends the chunks it lost, so no thread loses results;
:meth:`DaskExecutor.release` drops only what the calling thread shared.
"""

from __future__ import annotations

import concurrent.futures as cf
import multiprocessing
import os
import threading
from concurrent.futures.process import BrokenProcessPool
from typing import Any, Callable, Sequence

from .errors import MissingExtraError


def default_workers() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _load_core() -> None:
    """Worker initializer: import the simulator once, when the worker starts, not on its
    first chunk."""
    import neurodrome.evaluate  # noqa: F401


def _pause(seconds: float) -> None:
    import time

    time.sleep(seconds)


class LocalPool:
    """A pool of local worker processes that survives the death of a worker.

    Keep one for many evaluations (an evolver's whole run) to pay process start-up once::

        with LocalPool(4) as pool:
            for generation in range(100):
                results = evaluate(world, population, seed=generation, executor=pool)
    """

    def __init__(self, workers: int | None = None) -> None:
        if workers is not None and workers < 0:
            raise ValueError(f"a pool needs 1 or more workers (0 or None: all cores), not {workers}")
        self.workers = workers or default_workers()
        self._pool: cf.ProcessPoolExecutor | None = None
        self.rebuilds = 0  #: how many times a dead worker forced a new pool
        # guards _pool and _epoch; _epoch counts the process pools a rebuild has replaced,
        # so a thread can tell whether the pool it used has been replaced since
        self._lock = threading.RLock()
        self._epoch = 0

    def executor(self) -> cf.ProcessPoolExecutor:
        with self._lock:
            if self._pool is None:
                # spawn: workers start clean, whatever threads or windows the parent holds
                self._pool = cf.ProcessPoolExecutor(
                    self.workers, mp_context=multiprocessing.get_context("spawn"), initializer=_load_core
                )
            return self._pool

    def _current(self) -> tuple[cf.ProcessPoolExecutor, int]:
        """The process pool to submit to and its epoch, read together."""
        with self._lock:
            return self.executor(), self._epoch

    def _replace_broken(self, epoch: int) -> None:
        """Rebuild after a dead worker, unless another thread already replaced the pool of
        ``epoch``. The broken pool's futures all fail with BrokenProcessPool, so nothing
        is cancelled here: every thread sees its own losses and re-sends them."""
        with self._lock:
            if epoch != self._epoch:
                return
            if self._pool is not None:
                self._pool.shutdown(wait=False)
                self._pool = None
                self.rebuilds += 1
            self._epoch += 1

    def start(self) -> LocalPool:
        """Start every worker process now (they otherwise start as chunks arrive)."""
        ex = self.executor()
        # tasks that overlap in time force one process each
        for future in [ex.submit(_pause, 0.3) for _ in range(self.workers)]:
            future.result()
        return self

    def rebuild(self) -> None:
        with self._lock:
            if self._pool is not None:
                self._pool.shutdown(wait=False, cancel_futures=True)
            self._pool = None
            self._epoch += 1
            self.rebuilds += 1

    def close(self) -> None:
        with self._lock:
            pool, self._pool = self._pool, None
        if pool is not None:  # waits for running chunks outside the lock
            pool.shutdown(wait=True, cancel_futures=True)

    def __enter__(self) -> LocalPool:
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()


class DaskExecutor(cf.Executor):
    """Chunks on a Dask cluster, from a scheduler address or a ``distributed.Client``.

    A client made here from an address is closed by :meth:`shutdown`; a client passed in
    stays open (it belongs to the caller). :meth:`share` places an object on every worker
    once, so chunks refer to it instead of carrying a copy each.
    """

    def __init__(self, target: Any) -> None:
        try:
            import distributed
        except ImportError:
            raise MissingExtraError("cluster", "distributed", "Evaluating on a Dask cluster") from None
        self.owns_client = not isinstance(target, distributed.Client)
        self.client = distributed.Client(target) if self.owns_client else target
        self._executor = self.client.get_executor(pure=False)
        self._shared: dict[int, list[Any]] = {}  # by thread, so each thread releases its own
        self._lock = threading.Lock()

    @property
    def workers(self) -> int:
        """Threads across the cluster's workers now (at least 1)."""
        return max(1, sum(self.client.nthreads().values()))

    def share(self, obj: Any) -> Any:
        # in a list: scatter treats a dict as {key: value} pairs to place separately
        (future,) = self.client.scatter([obj], broadcast=True, hash=False)
        with self._lock:
            self._shared.setdefault(threading.get_ident(), []).append(future)
        return future

    def submit(self, fn: Callable[..., Any], /, *args: Any, **kwargs: Any) -> cf.Future:
        return self._executor.submit(fn, *args, **kwargs)

    def release(self) -> None:
        """Drop what :meth:`share` placed on the workers from this thread (other threads'
        evaluations may still need theirs)."""
        with self._lock:
            futures = self._shared.pop(threading.get_ident(), [])
        for future in futures:
            future.release()

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        with self._lock:
            futures = [f for shared in self._shared.values() for f in shared]
            self._shared.clear()
        for future in futures:
            future.release()
        if cancel_futures:  # drop the chunks still queued or running (a stopped evolution)
            self._executor.shutdown(wait=False)
        if self.owns_client:
            self.client.close()


def dask_executor(target: Any) -> DaskExecutor:
    """An executor on a Dask cluster, from a scheduler address or a ``distributed.Client``."""
    return DaskExecutor(target)


def is_dask_client(obj: Any) -> bool:
    """True for a ``distributed.Client``, found without importing Dask."""
    return any(c.__name__ == "Client" and c.__module__.startswith("distributed") for c in type(obj).__mro__)


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
    ``retries`` times; chunks that had finished are kept. ``on_done(index, result)`` is
    called as each chunk finishes.

    Several threads may call this at once with the same pool: when a worker dies, every
    thread's unfinished chunks on that pool fail, the first thread to notice rebuilds the
    pool, and each thread re-sends its own.
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

    def replaced(epoch: int) -> bool:
        # the process pool was rebuilt (after a dead worker or by the owner) since we used it
        return pool is not None and executor is None and pool._epoch != epoch

    while pending:
        if executor is not None:
            ex, epoch = executor, -1
        else:
            ex, epoch = pool._current()  # type: ignore[union-attr]
        futures: dict[cf.Future, int] = {}
        broken = False
        try:
            for k in sorted(pending):
                futures[ex.submit(fn, *chunks[k])] = k
        except BrokenProcessPool:
            broken = True  # the pool broke while chunks were still being handed out
        except RuntimeError:
            if not replaced(epoch):
                raise
            broken = True  # another thread rebuilt the pool after a dead worker: send again
        try:
            for future in cf.as_completed(futures):
                k = futures[future]
                try:
                    results[k] = future.result()
                except BrokenProcessPool:
                    broken = True
                    continue
                except cf.CancelledError:
                    if not replaced(epoch):
                        raise
                    broken = True
                    continue
                pending.discard(k)
                if on_done:
                    on_done(k, results[k])
        except BaseException:
            for future in futures:
                future.cancel()
            raise
        if broken and pending:
            attempts += 1
            if pool is None or attempts > retries:
                raise RuntimeError(f"worker processes kept dying; {len(pending)} chunk(s) could not be evaluated")
            pool._replace_broken(epoch)
    return results
