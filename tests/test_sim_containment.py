"""Robots never leave the free space, whatever their controllers do."""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from neurodrome.sim.batch import Batch
from neurodrome.world import load_world
from sim_support import Jitterbug, bundled_world_paths

WORLDS = bundled_world_paths()
MODES = ("random", "ram", "spin", "alternate")


def hammer(path, agents_per_mode: int, steps: int) -> int:
    world = load_world(path)
    # keep robots pushing into walls instead of restarting at home after each contact
    task = world.task.model_copy(update={"scoring": world.task.scoring.model_copy(update={"crash_ends_trial": False})})
    world = world.model_copy(update={"task": task})
    controllers = [Jitterbug(agents_per_mode, mode) for mode in MODES]
    batch = Batch(world, controllers, seed=77)
    # Contacts are found after the physics step that makes them (pymunk has no continuous
    # collision detection), so a robot at full speed can sink up to v_max * dt into a wall
    # before the solver pushes it out: the centre must stay at least r - v_max dt - 1 mm
    # from every wall (0.74 r in the bundled worlds: most of the radius). Shapely checks it.
    robot = world.robot
    keep = robot.radius - robot.max_wheel_speed * world.physics.time_step_s - 1e-3
    assert keep > 0.5 * robot.radius
    allowed = batch.geometry.free.buffer(-keep)
    simulated = 0
    for _ in range(steps):
        batch.step()
        pos = batch.positions
        assert np.isfinite(batch.arena.state).all() and np.isfinite(batch.obs).all()
        inside = shapely.contains_xy(allowed, pos[:, 0], pos[:, 1])
        assert inside.all(), f"agents {np.flatnonzero(~inside)[:5]} left the free space at {pos[~inside][:3]}"
        simulated += int((batch.phase != 3).sum())
    return simulated


@pytest.mark.parametrize("path", WORLDS, ids=[p.stem for p in WORLDS])
def test_adversarial_controls_stay_inside_quick(path):
    """Random, full-speed-into-walls, spinning and alternating controls (64 agents, 300
    steps) never put a robot centre deeper than one physics step's travel into a wall's
    clearance (see hammer), and nothing becomes NaN."""
    assert hammer(path, 16, 300) > 0


@pytest.mark.slow
def test_adversarial_controls_stay_inside_million_steps():
    """The same over at least 10^6 robot-steps across every bundled world."""
    total = sum(hammer(path, 128, 520) for path in WORLDS)
    assert total >= 1_000_000
