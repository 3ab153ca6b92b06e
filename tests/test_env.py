"""The Gymnasium-style single-agent environment runs the same simulation as evaluate."""

from __future__ import annotations

import os

import numpy as np

from neurodrome import evaluate
from neurodrome.control.protocol import Layout
from neurodrome.control.reference import Courier
from neurodrome.env import MazeEnv
from sim_support import template_world


def test_env_episode_matches_evaluate():
    """Driving the environment with the memory courier's commands gives the fitness and
    trials that evaluate() reports for that courier (same seed, same agent index); the
    summed step rewards equal the fitness."""
    world = template_world("junction", trials=3)
    env = MazeEnv(world, trials=3)
    obs, info = env.reset(seed=5)
    courier = Courier(Layout.of(world), "memory")
    courier.reset_lifetime(np.zeros(1, dtype=np.uint64))
    total, done, trial = 0.0, False, info["trial"]
    while not done:
        action = courier.act(obs[None, :])[0]
        obs, reward, done, truncated, info = env.step(action)
        if info["trial"] != trial or done:
            courier.reset_trial(np.ones(1, dtype=bool))
            trial = info["trial"]
        total += reward
    (expected,) = evaluate(world, ["courier-memory"], seed=5)
    assert env.result().fitness == expected.fitness
    assert env.result().trials == expected.trials
    assert abs(total - expected.fitness) < 1e-9


def test_env_rejects_step_before_reset_and_renders():
    """step() before reset() is a clear error; render() returns an RGB array."""
    os.environ.setdefault("SDL_VIDEODRIVER", "dummy")
    env = MazeEnv(template_world("junction", trials=1))
    try:
        env.step([0, 0])
    except RuntimeError as exc:
        assert "reset" in str(exc)
    else:
        raise AssertionError("step before reset should raise")
    env.reset(seed=0)
    frame = env.render((320, 240))
    assert frame.shape == (240, 320, 3) and frame.dtype == np.uint8
