"""Wall contacts found by the arena's compiled test agree with pymunk's own collision
handlers (the reference: pymunk calls ``begin`` when a robot-wall shape pair starts to
collide and ``separate`` when it stops), step by step, under adversarial driving."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from neurodrome.sim.arena import ROBOT_TYPE, WALL_TYPE, Arena
from neurodrome.world import build_geometry, load_world, world_from_data
from neurodrome.world.templates import make

WORLDS = sorted((Path(__file__).resolve().parent.parent / "worlds").glob("clinic-*.json"))


@pytest.mark.parametrize("path", WORLDS + ["spiral"], ids=lambda p: getattr(p, "stem", p))
def test_contacts_match_pymunk_handlers(path):
    """The bundled worlds and the spiral template (about 1000 short walls, so a robot
    often touches two segments at once)."""
    world = world_from_data(make("spiral")) if path == "spiral" else load_world(path)
    geometry = build_geometry(world)
    n = 24
    arena = Arena(world, geometry, n)
    agent_of = {id(shape): k for k, shape in enumerate(arena.shapes)}
    begun = np.zeros(n, dtype=bool)
    touching = np.zeros(n, dtype=np.int64)

    def robot(arbiter):
        a, b = arbiter.shapes
        return agent_of.get(id(a), agent_of.get(id(b)))

    def on_begin(arbiter, space, data):
        begun[robot(arbiter)] = True
        touching[robot(arbiter)] += 1

    def on_separate(arbiter, space, data):
        touching[robot(arbiter)] -= 1

    arena.space.on_collision(ROBOT_TYPE, WALL_TYPE, begin=on_begin, separate=on_separate)
    rng = np.random.default_rng(3)
    home = np.tile(np.asarray(world.home.position, dtype=float), (n, 1))
    arena.place(np.arange(n), home, rng.uniform(-np.pi, np.pi, n))
    contacts = 0
    for step in range(600):
        if step % 40 == 0:  # new headings towards the walls now and then
            wheels = rng.choice([-1.0, 1.0], size=(n, 1)) * np.ones((n, 2))
            wheels[:, 1] *= rng.choice([1.0, 0.6, -0.2], size=n)
        begun[:] = False
        arena.contact_begun[:] = False
        arena.step(wheels, world.robot.max_wheel_speed, world.robot.wheel_base)
        np.testing.assert_array_equal(arena.contact_begun, begun, err_msg=f"begin at step {step}")
        np.testing.assert_array_equal(arena.touching, touching, err_msg=f"touching at step {step}")
        contacts += int(begun.sum())
    assert contacts > 50, "the drive should hit walls often"
