"""Headless evaluation: the entry point for evolvers.

>>> from neurodrome import evaluate, load_world
>>> results = evaluate(load_world("worlds/clinic-junction.json"), ["courier-memory"], seed=1, trials=3)
>>> round(results[0].fitness, 2)
2.2

``evaluate`` splits the population into chunks, runs each chunk as one batched
simulation (here, on local worker processes, or on a Dask cluster) and returns one
:class:`~neurodrome.sim.task.AgentResult` per controller, in input order. Agent k draws
its randomness from (seed, k) only, so results do not depend on the chunking, the
executor or the number of workers.

What travels to a worker: one task per chunk, holding the world once (as plain data; on
Dask it is placed on every worker once per evaluation and chunks refer to it) and the
chunk's controller sources. Network descriptions are compiled on the worker into one
batched network per chunk.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np

from .control.protocol import Layout
from .control.sources import is_portable, label, resolve
from .errors import NeurodromeError, Problem
from .executors import DaskExecutor, LocalPool, default_workers, is_dask_client, run_chunks
from .sim.arena import MAX_AGENTS
from .sim.batch import Batch
from .sim.task import AgentResult
from .world import WorldSpec, load_world, world_from_data, world_to_data

#: Smallest chunk when splitting for several workers: a batch's per-step cost is mostly
#: fixed overhead at small sizes, so tiny chunks buy no speed and add per-task overhead.
MIN_CHUNK = 8


def _as_world(world: WorldSpec | str | Path | dict) -> WorldSpec:
    if isinstance(world, WorldSpec):
        return world
    if isinstance(world, dict):
        return world_from_data(world)
    return load_world(world)


class _Guarded:
    """Wraps a controller that cannot be fused with others, so that an exception in its
    resets fails only its own agent: the reason is kept and raised from the next ``act``,
    where the batch records it as that agent's fault."""

    def __init__(self, inner: Any) -> None:
        self._inner = inner
        self.n_agents = inner.n_agents
        self._failure: str | None = None

    def __getattr__(self, name: str) -> Any:
        if name.startswith("__") or name == "_inner":
            raise AttributeError(name)
        return getattr(self._inner, name)

    def _call(self, hook: str, arg: np.ndarray) -> None:
        if self._failure is not None:
            return
        try:
            getattr(self._inner, hook)(arg)
        except Exception as exc:  # user code may raise anything: fail only this agent
            self._failure = f"{hook}() raised {type(exc).__name__}: {exc}"

    def reset_lifetime(self, seeds: np.ndarray) -> None:
        self._call("reset_lifetime", seeds)

    def reset_trial(self, mask: np.ndarray) -> None:
        self._call("reset_trial", mask)

    def act(self, obs: np.ndarray) -> np.ndarray:
        if self._failure is not None:
            raise RuntimeError(self._failure)
        return self._inner.act(obs)


def run_batch(
    world: WorldSpec | dict,
    sources: Sequence[Any],
    agent_ids: Sequence[int],
    seed: int,
    trials: int | None = None,
    labels: Sequence[str] | None = None,
) -> list[AgentResult]:
    """Evaluate one chunk as a single batch; a source that cannot be built fails only its
    own result (``fault`` set, ``fitness`` None)."""
    world = _as_world(world)
    layout = Layout.of(world)
    labels = list(labels) if labels is not None else [label(s) for s in sources]
    controllers, ids, names, slots = [], [], [], []
    results: list[AgentResult | None] = [None] * len(sources)
    for k, source in enumerate(sources):
        try:
            ctrl = resolve(source, layout)
            if ctrl.n_agents != 1:
                raise ValueError(f"a controller source must drive one agent, this one drives {ctrl.n_agents}")
        except Exception as exc:  # a user's factory may raise anything: fail only its result
            reason = exc.render() if isinstance(exc, NeurodromeError) else f"{type(exc).__name__}: {exc}"
            results[k] = AgentResult(agent=int(agent_ids[k]), fitness=None, fault=f"bad controller: {reason}", controller=labels[k])
            continue
        controllers.append(ctrl if hasattr(type(ctrl), "combine") else _Guarded(ctrl))
        ids.append(int(agent_ids[k]))
        names.append(labels[k])
        slots.append(k)
    if controllers:
        batch = Batch(world, controllers, seed=seed, agent_ids=ids, trials=trials, labels=names)
        for slot, result in zip(slots, batch.run()):
            results[slot] = result
    return results  # type: ignore[return-value]


def plan_chunks(n: int, workers: int, chunk_size: int | None = None) -> list[range]:
    """Contiguous index ranges: one chunk per worker, none under MIN_CHUNK unless
    ``chunk_size`` says so, none above MAX_AGENTS.

    One per worker because a batch steps in lockstep until its slowest agent has
    finished, and a step costs mostly fixed overhead at these sizes: two half-size
    chunks on one worker cost nearly twice the time of one full chunk.
    """
    if n == 0:
        return []
    if chunk_size is not None and chunk_size < 1:
        raise ValueError(f"chunk_size must be 1 or more, not {chunk_size}")
    if chunk_size:
        size = chunk_size
    elif workers > 1:
        size = max(MIN_CHUNK, math.ceil(n / workers))
    else:
        size = n
    size = min(size, MAX_AGENTS)
    return [range(a, min(n, a + size)) for a in range(0, n, size)]


class NotPortableError(NeurodromeError):
    """Python controller objects given to an evaluation that runs in other processes."""


def evaluate(
    world: WorldSpec | str | Path | dict,
    controllers: Sequence[Any],
    *,
    seed: int = 0,
    trials: int | None = None,
    workers: int | None = 1,
    executor: Any = None,
    chunk_size: int | None = None,
    agent_ids: Sequence[int] | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> list[AgentResult]:
    """Evaluate ``controllers`` (controller sources, see :mod:`neurodrome.control.sources`)
    in ``world``; results come back in input order, one per controller.

    Where it runs: ``workers=1`` (default) in this process; ``workers=K`` on K local
    worker processes started for this call (``None`` or 0: all cores); ``executor`` a
    :class:`~neurodrome.executors.LocalPool` (keep one for a whole run), any
    ``concurrent.futures.Executor``, a ``distributed.Client`` or a Dask scheduler
    address (``"tcp://host:8786"``). ``progress(done, total)`` is called as chunks
    finish. ``agent_ids`` (default 0..n-1) are the indices that seed each agent.

    A source that cannot be built, or a controller that raises or emits NaN, fails only
    its own result (``fault`` says why, ``fitness`` is None for a source that could not
    be built). Python controller objects and factories only run in this process.
    """
    spec = _as_world(world)
    if trials is not None and (isinstance(trials, bool) or not isinstance(trials, (int, np.integer)) or trials < 1):
        raise NeurodromeError(Problem("trials", "a whole number of trials >= 1", repr(trials)))
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise NeurodromeError(Problem("seed", "a whole number >= 0", repr(seed)))
    n = len(controllers)
    ids = list(range(n)) if agent_ids is None else [int(a) for a in agent_ids]
    if len(ids) != n:
        raise ValueError(f"agent_ids has {len(ids)} entries for {n} controllers")
    labels = [label(c) for c in controllers]
    if n == 0:
        return []
    pool: LocalPool | None = None
    ex: Any = None
    owned: Any = None
    if executor is None and workers != 1:
        owned = pool = LocalPool(workers or default_workers())
    elif isinstance(executor, LocalPool):
        pool = executor
    elif isinstance(executor, str) or is_dask_client(executor):
        owned = ex = DaskExecutor(executor)
    elif executor is not None:
        ex = executor
    remote = pool is not None or ex is not None
    try:
        if remote:
            bad = [k for k, c in enumerate(controllers) if not is_portable(c)]
            if bad:
                raise NotPortableError(
                    Problem(
                        f"controllers[{bad[0]}] ({labels[bad[0]]})" + (f" and {len(bad) - 1} more" if len(bad) > 1 else ""),
                        "controller sources that can be sent to worker processes: bundled names, network files, "
                        "network descriptions (dicts) or 'module:attribute'; run Python objects with workers=1",
                        f"a Python {type(controllers[bad[0]]).__name__} object",
                    )
                )
        if pool is not None:
            width = pool.workers
        elif ex is not None:
            width = getattr(ex, "workers", None) or getattr(ex, "_max_workers", None) or default_workers()
        else:
            width = 1
        chunks = plan_chunks(n, width, chunk_size)
        if remote:
            world_data: Any = world_to_data(spec)
            if isinstance(ex, DaskExecutor):
                world_data = ex.share(world_data)
        else:
            world_data = spec
        jobs = [(world_data, [controllers[k] for k in r], [ids[k] for k in r], seed, trials, [labels[k] for k in r]) for r in chunks]
        done = [0]

        def tick(k: int, _result: Any) -> None:
            done[0] += len(chunks[k])
            if progress:
                progress(done[0], n)

        parts = run_chunks(run_batch, jobs, executor=ex, pool=pool, on_done=tick)
    finally:
        if isinstance(ex, DaskExecutor):
            ex.release()
        if isinstance(owned, LocalPool):
            owned.close()
        elif owned is not None:
            owned.shutdown()
    return [r for part in parts for r in part]


def write_replay(
    world: WorldSpec | str | Path | dict,
    controllers: Sequence[Any],
    path: str | Path,
    *,
    agent_ids: Sequence[int],
    seed: int = 0,
    trials: int | None = None,
) -> list[AgentResult]:
    """Re-run the given controllers as agents ``agent_ids`` and write a replay file
    (atomically: a failed run leaves no file).

    Because an agent's run depends only on (seed, agent index), the replay shows exactly
    what happened in the evaluation that produced its result.
    """
    from .sim.replay import record_replay

    spec = _as_world(world)
    layout = Layout.of(spec)
    built = [resolve(c, layout) for c in controllers]
    batch = Batch(
        spec,
        [c if hasattr(type(c), "combine") else _Guarded(c) for c in built],
        seed=seed,
        agent_ids=list(agent_ids),
        trials=trials,
        labels=[label(c) for c in controllers],
    )
    record_replay(batch, path)
    return batch.results()
