"""The optional stall rule: a trial ends early, as a timeout, once the robot's centre has
stayed within ``distance`` of one spot for ``seconds`` (common practice in evolutionary
robotics, no single source); the expected step counts are computed by hand below."""

from __future__ import annotations

import math

import pytest

from neurodrome.errors import NeurodromeError
from neurodrome.evaluate import evaluate
from neurodrome.world import world_from_data, world_to_data
from sim_support import Constant, template_world


def _world(stall=None, trials=3):
    data = world_to_data(template_world("junction", trials=trials))
    if stall is not None:
        data["task"]["stall"] = stall
    return world_from_data(data)


def test_standing_still_ends_each_trial_after_the_stall_time():
    world = _world({"distance": 0.05, "seconds": 2.0})
    (result,) = evaluate(world, [Constant(0.0, 0.0)], trials=3)
    steps = math.ceil(2.0 / world.physics.control_period_s)  # 20 control steps
    assert [t.steps for t in result.trials] == [steps] * 3
    assert all(t.timed_out and t.stalled for t in result.trials)
    assert result.fitness == pytest.approx(3 * world.task.scoring.timeout_penalty)


def test_spinning_on_the_spot_counts_as_standing_still():
    world = _world({"distance": 0.05, "seconds": 2.0})
    (result,) = evaluate(world, [Constant(-0.5, 0.5)], trials=2)
    assert all(t.stalled and t.steps == 20 for t in result.trials)


def test_without_the_rule_a_still_robot_runs_to_the_time_limit():
    world = _world(None)
    (result,) = evaluate(world, [Constant(0.0, 0.0)], trials=1)
    limit = math.ceil(world.task.time_limit_s / world.physics.control_period_s - 1e-9)
    assert result.trials[0].steps == limit and not result.trials[0].stalled


def test_a_moving_courier_is_not_affected():
    """courier-memory drives on and never stands 2 s in one place: same results either way."""
    with_rule = evaluate(_world({"distance": 0.05, "seconds": 2.0}, trials=6), ["courier-memory"], seed=2)
    without = evaluate(_world(None, trials=6), ["courier-memory"], seed=2)
    assert [r.to_dict() for r in with_rule] == [r.to_dict() for r in without]


@pytest.mark.parametrize("stall", [{"distance": 0.0, "seconds": 2.0}, {"distance": 0.05}, {"distance": "5 cm", "seconds": 1}])
def test_bad_stall_rules_are_refused_with_their_path(stall):
    with pytest.raises(NeurodromeError) as err:
        _world(stall)
    assert "stall" in str(err.value)
