"""The controller interface.

A *controller* drives a batch of ``n_agents`` robots (often just one) with three calls:

- ``reset_lifetime(seeds)`` at the start of an evaluation: restore initial weights and
  reseed any randomness, one seed per agent (``seeds`` has shape (n_agents,), uint64);
- ``reset_trial(mask)`` at the start of a trial for the agents where ``mask`` (shape
  (n_agents,), bool) is true: clear activations, keep what was learned;
- ``act(obs)`` once per control step: ``obs`` (n_agents, C) float64 observations laid out
  as :class:`Layout` says, returns (n_agents, 2) wheel commands (left, right) in [-1, 1]
  of the maximum wheel speed. Non-finite commands stop that agent and fail its result.

Controllers are built by a *factory* called with the :class:`Layout` of the world, so a
controller can find its channels by name. Controllers of one class may offer
``combine(controllers)`` to fuse into one batch (controllers whose ``batch_key()`` differ
are not fused); the result must give each agent exactly what it would get alone.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Protocol, Sequence, runtime_checkable

import numpy as np


@dataclass(frozen=True)
class Layout:
    """The observation vector of a world: channel names in order.

    Channels are ``range_0 .. range_{R-1}`` (proximity 1 - d/range in [0, 1], 0 when
    nothing is in range, one per range finder in the world's order), then the robot's
    signals in the world's order: ``home`` (1 inside the home zone), ``reward`` (the value
    just collected, held for ``reward_signal_steps`` control steps, else 0), ``bias``
    (always 1) and each listed marker (1 inside it).
    """

    channels: tuple[str, ...]
    ray_angles_deg: tuple[float, ...]
    #: the body, for controllers that use odometry (dead reckoning from their own commands)
    wheel_base: float = 0.18
    max_wheel_speed: float = 0.5
    control_period_s: float = 0.1
    body_radius: float = 0.1
    max_range: float = 1.0

    @property
    def size(self) -> int:
        return len(self.channels)

    def index(self, name: str) -> int:
        try:
            return self.channels.index(name)
        except ValueError:
            raise KeyError(f"observation channel '{name}' is not provided; channels are {list(self.channels)}") from None

    def get(self, name: str) -> int | None:
        return self.channels.index(name) if name in self.channels else None

    @classmethod
    def of(cls, world) -> Layout:
        robot = world.robot
        return cls(
            tuple(world.observation_channels()),
            tuple(robot.range_finders.angles_deg),
            wheel_base=robot.wheel_base,
            max_wheel_speed=robot.max_wheel_speed,
            control_period_s=world.physics.control_period_s,
            body_radius=robot.radius,
            max_range=robot.range_finders.max_range,
        )


@runtime_checkable
class Controller(Protocol):
    n_agents: int

    def reset_lifetime(self, seeds: np.ndarray) -> None: ...

    def reset_trial(self, mask: np.ndarray) -> None: ...

    def act(self, obs: np.ndarray) -> np.ndarray: ...


#: Something that builds a controller for a world's observation layout.
ControllerFactory = Callable[[Layout], Controller]


class PerAgentAdapter:
    """Turns a plain per-agent Python callable into a batch controller of one agent.

    ``policy(obs) -> (left, right)`` is called with the observation vector (C,). If it
    has ``reset_lifetime(seed)`` / ``reset_trial()`` methods they are called too.
    """

    def __init__(self, policy: Callable[[np.ndarray], Any], name: str | None = None) -> None:
        self.policy = policy
        self.n_agents = 1
        self.name = name or getattr(policy, "__name__", type(policy).__name__)

    def reset_lifetime(self, seeds: np.ndarray) -> None:
        hook = getattr(self.policy, "reset_lifetime", None)
        if callable(hook):
            hook(int(seeds[0]))

    def reset_trial(self, mask: np.ndarray) -> None:
        hook = getattr(self.policy, "reset_trial", None)
        if callable(hook) and bool(mask[0]):
            hook()

    def act(self, obs: np.ndarray) -> np.ndarray:
        out = np.asarray(self.policy(np.array(obs[0], copy=True)), dtype=float).reshape(-1)
        if out.shape != (2,):
            raise ValueError(f"controller {self.name} returned {out.size} values; expected 2 (left, right)")
        return out.reshape(1, 2)


def combine_runs(controllers: Sequence[Controller]) -> list[Controller]:
    """Fuse consecutive controllers that offer ``combine`` and share a class and a
    ``batch_key()`` (if they define one); order is kept."""
    out: list[Controller] = []
    run: list[Controller] = []

    def key(c: Controller):
        if not hasattr(type(c), "combine"):
            return None
        own = getattr(c, "batch_key", None)
        return (type(c), own() if callable(own) else None)

    def flush() -> None:
        if len(run) > 1:
            out.append(type(run[0]).combine(list(run)))  # type: ignore[attr-defined]
        else:
            out.extend(run)
        run.clear()

    for c in controllers:
        if run and (key(c) is None or key(c) != key(run[0])):
            flush()
        run.append(c)
    flush()
    return out
