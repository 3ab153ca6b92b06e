"""Bundled scripted (non-network) agents: a courier that follows corridors and chooses
its route at junctions by an explicit rule.

The courier only uses its observations and odometry (heading change integrated from its
own wheel commands, exact in free space). In a corridor it keeps to the centre line by
balancing its side range finders; when a marker signal rises (a junction) it drives on
to the junction's centre and turns in place by the angle of its next choice; when the
reward signal rises, or a wall blocks the way ahead (an arm's end), it turns round and
drives home, taking the reverse of its outbound choices at each junction.

A *route* is the sequence of choices made at the junctions of one outbound trip. Policies:

- ``memory``: remembers the reward each route paid last time; tries untried routes
  first, then keeps to the best-paying route; after a worse reward the tie-break is the
  route tried longest ago, so it switches (an explicit-memory ideal learner);
- ``same-arm``: always the first choice at every junction;
- ``random``: a uniformly random choice at every junction, from its own seed.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from .protocol import Layout

CRUISE, APPROACH, TURN = 0, 1, 2

#: name -> (policy, short description), for ``neurodrome agents``.
BUNDLED = {
    "courier-memory": ("memory", "corridor follower; keeps to the best-paying route, switches after a worse reward"),
    "courier-same-arm": ("same-arm", "corridor follower that always takes the first (left-hand) choice"),
    "courier-random": ("random", "corridor follower that picks a random choice at every junction"),
}


class Courier:
    """A batch of scripted couriers (see the module docstring); implements the protocol."""

    def __init__(
        self,
        layout: Layout,
        policy: str = "memory",
        n_agents: int = 1,
        *,
        turn_angles_deg: Sequence[float] = (90.0, -90.0),
        cruise: float = 0.8,
        approach_m: float = 0.3,
        centring_gain: float = 1.2,
        name: str | None = None,
    ) -> None:
        if policy not in ("memory", "same-arm", "random"):
            raise ValueError(f"unknown courier policy '{policy}'; choose memory, same-arm or random")
        self.layout = layout
        self.policy = policy
        self.n_agents = n_agents
        self.name = name or f"courier-{policy}"
        self.turn_angles = np.radians(np.asarray(turn_angles_deg, dtype=float))
        self.cruise = cruise
        self.approach_m = approach_m
        self.gain = centring_gain
        ang = np.asarray(layout.ray_angles_deg, dtype=float)
        self._front = int(np.argmin(np.abs(ang)))
        self._left = [k for k, a in enumerate(ang) if 20 <= a <= 100]
        self._right = [k for k, a in enumerate(ang) if -100 <= a <= -20]
        self._markers = [k for k, c in enumerate(layout.channels) if not c.startswith("range_") and c not in ("home", "reward", "bias")]
        self._reward = layout.get("reward")
        self._home = layout.get("home")
        # one control step at full differential command turns by this much (radians)
        self._turn_step = 2.0 * layout.max_wheel_speed * layout.control_period_s / layout.wheel_base
        self._step_m = layout.max_wheel_speed * layout.control_period_s
        self.reset_lifetime(np.zeros(n_agents, dtype=np.uint64))

    def batch_key(self) -> tuple:
        return (self.policy, tuple(self.turn_angles.tolist()), self.cruise, self.approach_m, self.gain, self.layout)

    @classmethod
    def combine(cls, couriers: Sequence[Courier]) -> Courier:
        first = couriers[0]
        if any(c.batch_key() != first.batch_key() for c in couriers):
            raise ValueError("only couriers of one policy and one set of turns combine")
        out = cls.__new__(cls)
        out.__dict__.update({k: v for k, v in first.__dict__.items()})
        out.n_agents = sum(c.n_agents for c in couriers)
        for key in ("mode", "remaining", "turn_dir", "was_marked", "homing", "reward_seen", "had_reward", "depth"):
            out.__dict__[key] = np.concatenate([getattr(c, key) for c in couriers])
        out.route = [r for c in couriers for r in c.route]
        out.memory = [m for c in couriers for m in c.memory]
        out.rngs = [g for c in couriers for g in c.rngs]
        out.clock = [t for c in couriers for t in c.clock]
        return out

    # -- protocol -------------------------------------------------------------------
    def reset_lifetime(self, seeds: np.ndarray) -> None:
        n = self.n_agents
        self.memory: list[dict[tuple, tuple[float, int]]] = [{} for _ in range(n)]
        self.rngs = [np.random.default_rng(int(s)) for s in np.asarray(seeds).reshape(-1)[:n]]
        self.clock = [0] * n
        self.route: list[list[int]] = [[] for _ in range(n)]
        self._clear(np.ones(n, dtype=bool))
        self.reward_seen = np.zeros(n)
        self.had_reward = np.zeros(n, dtype=bool)

    def reset_trial(self, mask: np.ndarray) -> None:
        for k in np.flatnonzero(mask).tolist():
            if self.route[k]:
                self.clock[k] += 1
                self.memory[k][tuple(self.route[k])] = (float(self.reward_seen[k]), self.clock[k])
            self.route[k] = []
        self._clear(mask)
        self.reward_seen[mask] = 0.0
        self.had_reward[mask] = False

    def _clear(self, mask: np.ndarray) -> None:
        n = self.n_agents
        for key, dtype in (("mode", np.int64), ("remaining", float), ("turn_dir", float), ("was_marked", bool), ("homing", bool), ("depth", np.int64)):
            if not hasattr(self, key) or getattr(self, key).shape != (n,):
                setattr(self, key, np.zeros(n, dtype=dtype))
            getattr(self, key)[mask] = 0

    def act(self, obs: np.ndarray) -> np.ndarray:
        n = obs.shape[0]
        front = obs[:, self._front]
        left = obs[:, self._left].mean(axis=1) if self._left else np.zeros(n)
        right = obs[:, self._right].mean(axis=1) if self._right else np.zeros(n)
        marked = obs[:, self._markers].max(axis=1) > 0.5 if self._markers else np.zeros(n, dtype=bool)
        rising = marked & ~self.was_marked
        self.was_marked = marked

        if self._reward is not None:
            r = obs[:, self._reward]
            got = (r != 0) & ~self.had_reward
            self.reward_seen = np.where(got, r, self.reward_seen)
            self.had_reward |= r != 0
        else:
            got = np.zeros(n, dtype=bool)

        cruising = self.mode == CRUISE
        # turn round at an arm's end (reward received, or a wall close ahead)
        blocked = front > 0.8
        uturn = cruising & ((got & ~self.homing) | blocked)
        self.homing |= uturn
        self._start_turn(uturn, np.full(n, math.pi))

        approach = cruising & ~uturn & rising
        self.mode[approach] = APPROACH
        self.remaining[approach] = self.approach_m

        wheels = np.zeros((n, 2))
        # cruise: forward, steer to the corridor centre, slow down near a wall ahead
        steer = self.gain * (right - left)
        speed = self.cruise * (1.0 - 0.5 * np.clip(front, 0, 1))
        c = self.mode == CRUISE
        wheels[c, 0] = speed[c] - steer[c]
        wheels[c, 1] = speed[c] + steer[c]

        a = self.mode == APPROACH
        if a.any():
            stride = np.minimum(self.remaining, self.cruise * self._step_m)
            wheels[a, :] = (stride[a] / self._step_m)[:, None]
            self.remaining[a] -= stride[a]
            arrived = a & (self.remaining <= 1e-9)
            if arrived.any():
                angles = np.zeros(n)
                for k in np.flatnonzero(arrived).tolist():
                    angles[k] = self._choose(k)
                self.mode[arrived] = CRUISE
                self._start_turn(arrived, angles)

        t = self.mode == TURN
        if t.any():
            step = np.minimum(self.remaining, self._turn_step * 0.5)
            cmd = step / self._turn_step  # differential command giving exactly that rotation
            wheels[t, 0] = -(self.turn_dir[t] * cmd[t])
            wheels[t, 1] = self.turn_dir[t] * cmd[t]
            self.remaining[t] -= step[t]
            self.mode[t & (self.remaining <= 1e-9)] = CRUISE
        return np.clip(wheels, -1.0, 1.0)

    def _start_turn(self, mask: np.ndarray, angles: np.ndarray) -> None:
        mask = mask & (np.abs(angles) > 1e-9)
        self.mode[mask] = TURN
        self.remaining[mask] = np.abs(angles[mask])
        self.turn_dir[mask] = np.sign(angles[mask])

    # -- route choice (only when an agent reaches a junction) -------------------------
    def _choose(self, k: int) -> float:
        choices = len(self.turn_angles)
        if self.homing[k]:
            depth = int(self.depth[k])
            back = self.route[k][::-1]
            self.depth[k] += 1
            if depth < len(back):
                return -float(self.turn_angles[back[depth]])
            return 0.0
        prefix = tuple(self.route[k])
        if self.policy == "same-arm":
            pick = 0
        elif self.policy == "random":
            pick = int(self.rngs[k].integers(choices))
        else:
            pick = self._best(k, prefix, choices)
        self.route[k].append(pick)
        return float(self.turn_angles[pick])

    def _best(self, k: int, prefix: tuple, choices: int) -> int:
        memory = self.memory[k]
        best, best_key = 0, None
        for c in range(choices):
            routes = [(v, t) for r, (v, t) in memory.items() if r[: len(prefix) + 1] == prefix + (c,)]
            if not routes:
                return c  # untried: explore it first
            value, when = max(routes)
            key = (value, -when)  # equal value: the route tried longest ago
            if best_key is None or key > best_key:
                best, best_key = c, key
        return best


def bundled_factory(name: str):
    """Factory for a bundled agent name; raises KeyError listing the names."""
    if name not in BUNDLED:
        raise KeyError(f"no bundled agent '{name}'; bundled agents are {', '.join(BUNDLED)}")
    policy = BUNDLED[name][0]

    def factory(layout: Layout) -> Courier:
        return Courier(layout, policy, name=name)

    factory.__name__ = name
    return factory
