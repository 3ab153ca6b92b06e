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
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Callable, Sequence

from .control.protocol import Layout
from .control.sources import is_portable, label, resolve
from .errors import NeurodromeError
from .executors import LocalPool, default_workers, dask_executor, run_chunks
from .sim.arena import MAX_AGENTS
from .sim.batch import Batch
from .sim.task import AgentResult
from .world import WorldSpec, load_world, world_from_data, world_to_data


def _as_world(world: WorldSpec | str | Path | dict) -> WorldSpec:
    if isinstance(world, WorldSpec):
        return world
    if isinstance(world, dict):
        return world_from_data(world)
    return load_world(world)


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
        except (NeurodromeError, ValueError, TypeError, ImportError) as exc:
            results[k] = AgentResult(agent=int(agent_ids[k]), fitness=None, fault=f"bad controller: {exc}", controller=labels[k])
            continue
        controllers.append(ctrl)
        ids.append(int(agent_ids[k]))
        names.append(labels[k])
        slots.append(k)
    if controllers:
        batch = Batch(world, controllers, seed=seed, agent_ids=ids, trials=trials, labels=names)
        for slot, result in zip(slots, batch.run()):
            results[slot] = result
    return results  # type: ignore[return-value]


def plan_chunks(n: int, workers: int, chunk_size: int | None = None) -> list[range]:
    """Contiguous index ranges: about two chunks per worker, none above MAX_AGENTS."""
    if n == 0:
        return []
    size = chunk_size or max(1, math.ceil(n / max(1, 2 * workers if workers > 1 else 1)))
    size = min(size, MAX_AGENTS)
    return [range(a, min(n, a + size)) for a in range(0, n, size)]


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
    in ``world``; results come back in input order.

    Where it runs: ``workers=1`` (default) in this process; ``workers=K`` on K local
    worker processes (``None`` or 0: all cores); ``executor`` a
    :class:`~neurodrome.executors.LocalPool`, any ``concurrent.futures.Executor``, a
    ``distributed.Client`` or a Dask scheduler address (``"tcp://host:8786"``).
    ``progress(done, total)`` is called as chunks finish.
    """
    spec = _as_world(world)
    n = len(controllers)
    ids = list(range(n)) if agent_ids is None else [int(a) for a in agent_ids]
    if len(ids) != n:
        raise ValueError(f"agent_ids has {len(ids)} entries for {n} controllers")
    labels = [label(c) for c in controllers]
    own_pool: LocalPool | None = None
    pool: LocalPool | None = None
    ex = None
    if executor is None and workers not in (1,):
        own_pool = pool = LocalPool(workers or default_workers())
    elif isinstance(executor, LocalPool):
        pool = executor
    elif isinstance(executor, str) or type(executor).__name__ == "Client":
        ex = dask_executor(executor)
    elif executor is not None:
        ex = executor
    remote = pool is not None or ex is not None
    if remote:
        bad = [labels[k] for k, c in enumerate(controllers) if not is_portable(c)]
        if bad:
            raise ValueError(
                f"controllers {bad[:3]} are Python objects and cannot be sent to worker processes; "
                "pass names, files, network descriptions or module:attribute, or use workers=1"
            )
    width = pool.workers if pool is not None else (default_workers() if ex is not None else 1)
    chunks = plan_chunks(n, width, chunk_size if remote else (chunk_size or 1024))
    world_data = world_to_data(spec) if remote else spec
    jobs = [(world_data, [controllers[k] for k in r], [ids[k] for k in r], seed, trials, [labels[k] for k in r]) for r in chunks]
    done = [0]

    def tick(k: int, _result: Any) -> None:
        done[0] += len(chunks[k])
        if progress:
            progress(done[0], n)

    try:
        parts = run_chunks(run_batch, jobs, executor=ex, pool=pool, on_done=tick)
    finally:
        if own_pool is not None:
            own_pool.close()
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
    """Re-run the given controllers as agents ``agent_ids`` and write a replay file.

    Because an agent's run depends only on (seed, agent index), the replay shows exactly
    what happened in the evaluation that produced its result.
    """
    from .sim.replay import record_replay

    spec = _as_world(world)
    layout = Layout.of(spec)
    batch = Batch(spec, [resolve(c, layout) for c in controllers], seed=seed, agent_ids=list(agent_ids), trials=trials, labels=[label(c) for c in controllers])
    record_replay(batch, path)
    return batch.results()
