"""Bit-identity: an agent's path and result do not depend on the batch around it."""

from __future__ import annotations

import numpy as np

from neurodrome.sim.batch import Batch
from sim_support import Jitterbug, template_world


def world_with_contacts_and_relocation():
    # crashes do not end trials, so random drivers keep hitting walls; short trials and
    # a relocation window early in life so every agent relocates within the test
    return template_world(
        "junction",
        trials=6,
        relocate="window",
        physics={"time_step_s": 0.05, "control_period_s": 0.1},
        scoring={"crash_ends_trial": False},
    ).model_copy(update={})


def trace(batch: Batch, steps: int, agents) -> np.ndarray:
    out = []
    for _ in range(steps):
        batch.step()
        out.append(np.column_stack([batch.positions[agents], batch.angles[agents], batch.obs[agents]]).copy())
    return np.stack(out)


def test_agent_alone_equals_agent_in_batch_of_64():
    """64 random drivers (wall contacts, trial resets, a relocation drawn per agent):
    agents run alone (with their own index) follow bit-identical paths and results."""
    world = world_with_contacts_and_relocation()
    world = world.model_copy(update={"task": world.task.model_copy(update={"time_limit_s": 6.0})})
    n, steps = 64, 400
    batch = Batch(world, [Jitterbug() for _ in range(n)], seed=2024)
    together = trace(batch, steps, slice(None))
    results = batch.results()
    contacts = sum(t.crashes for r in results for t in r.trials)
    relocated = sum(len(r.relocations) for r in results)
    assert contacts > 50 and relocated > 0  # the test exercises what it claims to
    for k in (0, 1, 17, 37, 63):
        alone = Batch(world, [Jitterbug()], seed=2024, agent_ids=[k])
        path = trace(alone, steps, slice(None))
        assert np.array_equal(path[:, 0], together[:, k])
        a, b = alone.results()[0], results[k]
        assert a.fitness == b.fitness and a.trials == b.trials and a.relocations == b.relocations


def test_same_seed_same_result_other_seed_differs():
    """Re-running with the same seed reproduces every number; another seed changes the
    relocation draws."""
    world = template_world("junction", trials=40, relocate="window", physics={"time_step_s": 0.05})
    def draws(seed):
        batch = Batch(world, [Jitterbug() for _ in range(32)], seed=seed)
        return [s[0][0] for s in batch._schedules]
    assert draws(5) == draws(5)
    assert draws(5) != draws(6)
    window = world.task.relocations[0].window
    assert all(window[0] <= t <= window[1] for t in draws(5) + draws(6))


def test_bit_identity_holds_when_agents_finish_at_different_times():
    """Crashes end trials here, so random drivers finish their evaluations at very
    different times and leave the physics early; the survivors' paths and every result
    still equal runs alone, and reset() brings the finished agents back."""
    world = template_world("junction", trials=4, physics={"time_step_s": 0.05, "control_period_s": 0.1})
    world = world.model_copy(update={"task": world.task.model_copy(update={"time_limit_s": 8.0})})
    n = 64
    batch = Batch(world, [Jitterbug() for _ in range(n)], seed=99)
    path = trace(batch, 330, slice(None))
    results = batch.results()
    finish = sorted(r.steps for r in results)
    assert finish[0] < finish[-1] // 2  # some agents finished long before others
    for k in (3, 30, 60):
        alone = Batch(world, [Jitterbug()], seed=99, agent_ids=[k])
        assert np.array_equal(trace(alone, 330, slice(None))[:, 0], path[:, k])
        assert alone.results()[0].trials == results[k].trials
    batch.reset()
    assert batch.arena.live.all() and np.array_equal(trace(batch, 330, slice(None)), path)
