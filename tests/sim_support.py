"""Shared helpers of the simulator tests: worlds built from templates, test controllers."""

from __future__ import annotations

from pathlib import Path

import numpy as np

from neurodrome.sim.seeding import uniforms
from neurodrome.world import world_from_data
from neurodrome.world.templates import make

WORLDS_DIR = Path(__file__).resolve().parent.parent / "worlds"


def bundled_world_paths() -> list[Path]:
    return sorted(p for p in WORLDS_DIR.glob("*.json") if not p.name.endswith(".schema.json"))


def template_world(kind: str = "junction", *, physics=None, scoring=None, robot=None, **options):
    data = make(kind, **options)
    if physics:
        data["physics"].update(physics)
    if scoring:
        data["task"].setdefault("scoring", {}).update(scoring)
    if robot:
        data["robot"].update(robot)
    return world_from_data(data, f"<{kind} template>")


class Constant:
    """Test controller: the same wheel commands every step."""

    n_agents = 1

    def __init__(self, left: float, right: float) -> None:
        self.wheels = np.array([[left, right]])

    def reset_lifetime(self, seeds):
        pass

    def reset_trial(self, mask):
        pass

    def act(self, obs):
        return self.wheels


class Jitterbug:
    """Test controller: wheel commands drawn from each agent's own seed and a step count,
    switching between full-speed runs, spins and reversals; vectorised and combinable."""

    def __init__(self, n_agents: int = 1, mode: str = "random") -> None:
        self.n_agents = n_agents
        self.mode = mode
        self.keys = np.zeros(n_agents, dtype=np.uint64)
        self.t = np.zeros(n_agents, dtype=np.int64)

    @classmethod
    def combine(cls, items):
        out = cls(sum(c.n_agents for c in items), items[0].mode)
        return out

    def reset_lifetime(self, seeds):
        self.keys = np.asarray(seeds, dtype=np.uint64).copy()
        self.t[:] = 0

    def reset_trial(self, mask):
        pass

    def act(self, obs):
        u = uniforms(self.keys, self.t, 3, salt=7)
        self.t += 1
        if self.mode == "ram":  # full speed ahead with slow random drift of heading
            return np.column_stack([np.ones(len(u)), 0.6 + 0.4 * u[:, 0]])
        if self.mode == "spin":
            return np.column_stack([-np.ones(len(u)), np.ones(len(u))])
        if self.mode == "alternate":
            sign = np.where(self.t % 20 < 10, 1.0, -1.0)
            return np.column_stack([sign, sign * (0.5 + 0.5 * u[:, 0])])
        # random: hold a random command for a few steps
        phase = (self.t // 5).astype(np.uint64)
        v = uniforms(self.keys, phase, 2, salt=11) * 2 - 1
        return v
