"""Trials, scoring, relocation and faults, checked against the junction-maze protocol
(Soltoggio et al. 2008; Blynel & Floreano 2003) and hand-counted expectations."""

from __future__ import annotations

import numpy as np
import pytest

from neurodrome.control.protocol import Layout, PerAgentAdapter
from neurodrome.control.reference import Courier
from neurodrome.sim.batch import Batch
from neurodrome.sim.task import CRASHED
from sim_support import Constant, Jitterbug, template_world

FAST = {"time_step_s": 0.05, "control_period_s": 0.1}


def ideal_learner_bound(trials: int, high: float, low: float, exploratory: int) -> float:
    """N r_H - sum_k e_k (r_H - r_L) (Soltoggio et al. 2008; Blynel & Floreano 2003, computed)."""
    return trials * high - exploratory * (high - low)


def couriers(world, policy, n=1):
    layout = Layout.of(world)
    return [Courier(layout, policy) for _ in range(n)]


def test_memory_courier_scores_the_maximum_in_a_static_junction():
    """Static single junction: the explicit-memory courier loses only its first
    (exploratory) trial, the ideal learner's score (Soltoggio et al. 2008; Blynel & Floreano 2003)."""
    world = template_world("junction", trials=12, physics=FAST)
    result = Batch(world, couriers(world, "memory"), seed=1).run()[0]
    assert result.fitness == pytest.approx(ideal_learner_bound(12, 1.0, 0.2, 1))
    assert all(t.returned_home and not t.crashed for t in result.trials)


def test_relocation_memory_within_bound_and_beats_same_arm():
    """Relocating junction: the memory courier stays within the ideal-learner bound (one
    exploratory trial at the start, one after the relocation) and beats the courier that
    always takes the same arm, which sits near the low-reward plateau (Soltoggio
    et al. 2008, common practice)."""
    world = template_world("junction", trials=16, relocate="fixed", physics=FAST)
    memory, same = Batch(world, couriers(world, "memory") + couriers(world, "same-arm"), seed=3).run()
    bound = ideal_learner_bound(16, 1.0, 0.2, 2)
    assert memory.fitness <= bound + 1e-9
    assert memory.fitness >= bound - 0.8  # at most one further wrong trial
    assert same.fitness < memory.fitness
    # the same-arm courier gets the low reward before the swap and the high one after
    after = world.task.relocations[0].after_trial
    assert same.fitness == pytest.approx(after * 0.2 + (16 - after) * 1.0)
    assert [r.after_trial for r in memory.relocations] == [after]
    assert memory.relocations[0].before == {"west-store": 0.2, "east-store": 1.0}
    assert memory.relocations[0].after == {"west-store": 1.0, "east-store": 0.2}


def test_crash_penalty_ends_the_trial():
    """A robot that drives into a wall gets the crash penalty once and its trial ends
    (published T-maze protocol: crash penalty, trial ends; Soltoggio et al. 2008; Blynel & Floreano 2003)."""
    world = template_world("junction", trials=3, physics=FAST)
    result = Batch(world, [Jitterbug(mode="ram")], seed=0).run()[0]
    penalty = world.task.scoring.crash_penalty
    assert len(result.trials) == 3
    for t in result.trials:
        assert t.crashed and t.crashes == 1 and t.outcome == CRASHED and t.score == pytest.approx(penalty)
    assert result.fitness == pytest.approx(3 * penalty)


def test_timeout_penalty_when_the_robot_never_leaves():
    """A robot that only spins in place times out every trial with the timeout penalty,
    after exactly time_limit / control_period steps."""
    world = template_world("junction", trials=2, physics=FAST)
    world = world.model_copy(update={"task": world.task.model_copy(update={"time_limit_s": 3.0})})
    result = Batch(world, [Jitterbug(mode="spin")], seed=0).run()[0]
    assert [t.steps for t in result.trials] == [30, 30]
    assert all(t.timed_out and t.site is None for t in result.trials)
    assert result.fitness == pytest.approx(2 * world.task.scoring.timeout_penalty)
    assert result.steps == 60


def test_without_homing_trial_ends_after_reward_signal():
    """Without return_home the trial ends reward_signal_steps control steps after the site
    is reached, and the reward channel held the value all that time."""
    world = template_world("junction", trials=2, physics=FAST, scoring={"return_home": False})
    layout = Layout.of(world)
    seen = []
    courier = Courier(layout, "same-arm")
    batch = Batch(world, [courier], seed=0)
    while not batch.done:
        events = batch.step()
        seen.append(batch.obs[0, layout.index("reward")])
        if any(e.kind == "site" for e in events):
            site_step = len(seen)
    result = batch.results()[0]
    assert result.fitness == pytest.approx(0.4)
    assert all(t.site == "west-store" and not t.returned_home for t in result.trials)
    hold = world.task.reward_signal_steps
    assert seen[site_step - 1: site_step - 1 + hold] == [0.2] * hold


def test_nan_and_raising_controllers_fail_only_themselves():
    """A controller emitting NaN and one raising are stopped with the fault recorded;
    the other agents of the batch are unaffected (same result as alone)."""
    world = template_world("junction", trials=4, physics=FAST)
    layout = Layout.of(world)

    def nan_after_ten(obs, state={"t": 0}):
        state["t"] += 1
        return (float("nan"), 1.0) if state["t"] > 10 else (0.5, 0.5)

    def raises(obs):
        raise RuntimeError("sensor driver unplugged")

    good = couriers(world, "memory")
    batch = Batch(world, [PerAgentAdapter(nan_after_ten), good[0], PerAgentAdapter(raises)], seed=9, agent_ids=[0, 1, 2])
    nan_result, good_result, raise_result = batch.run()
    assert "non-finite" in nan_result.fault and nan_result.steps == 10
    assert "RuntimeError" in raise_result.fault and raise_result.steps == 0
    alone = Batch(world, couriers(world, "memory"), seed=9, agent_ids=[1]).run()[0]
    assert good_result.fault is None and good_result.fitness == alone.fitness and good_result.trials == alone.trials


def test_trials_override_and_step_count():
    """``trials`` overrides the world's trial count; steps counts robot control steps."""
    world = template_world("junction", trials=50, physics=FAST)
    result = Batch(world, couriers(world, "same-arm"), seed=0, trials=2).run()[0]
    assert len(result.trials) == 2
    assert result.steps == sum(t.steps for t in result.trials)


def test_trial_after_a_crash_starts_exactly_at_home():
    """A robot that crashed restarts with no trace of the contact: the first steps of
    every trial of a constant controller are bit-identical to those of trial 1."""
    world = template_world("junction", trials=3, physics=FAST)

    batch = Batch(world, [Constant(1.0, 0.97)], seed=0)  # slightly curving: it hits the stem's wall
    starts, previous = {}, None
    while not batch.done:
        trial = int(batch.trial[0])
        batch.step()
        if trial != previous:
            starts[trial] = (batch.positions[0].copy(), float(batch.angles[0]))
            previous = trial
    result = batch.results()[0]
    assert all(t.crashed for t in result.trials)
    for k in (2, 3):
        assert np.array_equal(starts[k][0], starts[1][0]) and starts[k][1] == starts[1][1]
