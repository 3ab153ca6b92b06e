"""A single-agent environment in the Gymnasium style, for reinforcement-learning users.

>>> from neurodrome.env import MazeEnv
>>> env = MazeEnv("worlds/clinic-junction.json", trials=1)
>>> obs, info = env.reset(seed=3)
>>> obs.shape == (env.observation_size,)
True
>>> obs, reward, terminated, truncated, info = env.step([0.5, 0.5])

``step(action)`` takes wheel commands (left, right) in [-1, 1] and advances one control
step of the same simulator that :func:`neurodrome.evaluate` runs; ``reward`` is the
change of fitness over the step (values collected, penalties). An episode is one whole
evaluation (all trials): ``terminated`` when the last trial has ended or the action was
not finite. Gymnasium itself is not required; the method names and return values
follow its ``Env`` API.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from .control.protocol import Layout
from .sim.batch import Batch
from .world import WorldSpec, load_world


class _Held:
    """Controller that plays back the action given to :meth:`MazeEnv.step`."""

    n_agents = 1

    def __init__(self) -> None:
        self.action = np.zeros((1, 2))

    def reset_lifetime(self, seeds: np.ndarray) -> None:
        self.action[:] = 0.0

    def reset_trial(self, mask: np.ndarray) -> None:
        pass

    def act(self, obs: np.ndarray) -> np.ndarray:
        return self.action


class MazeEnv:
    """One robot in one world; see the module docstring."""

    metadata = {"render_modes": ["rgb_array"]}

    def __init__(self, world: WorldSpec | str | Path, *, trials: int | None = None, agent_index: int = 0) -> None:
        self.world = world if isinstance(world, WorldSpec) else load_world(world)
        self.layout = Layout.of(self.world)
        self.trials = trials
        self.agent_index = agent_index
        self.observation_size = self.layout.size
        self.channels = self.layout.channels
        self._held = _Held()
        self._batch: Batch | None = None

    def reset(self, *, seed: int | None = None, options: dict | None = None) -> tuple[np.ndarray, dict[str, Any]]:
        self._batch = Batch(self.world, [self._held], seed=0 if seed is None else int(seed), agent_ids=[self.agent_index], trials=self.trials)
        return self._batch.obs[0].copy(), self._info([])

    def step(self, action) -> tuple[np.ndarray, float, bool, bool, dict[str, Any]]:
        if self._batch is None:
            raise RuntimeError("call reset() before step()")
        batch = self._batch
        before = float(batch.fitness[0])
        self._held.action = np.asarray(action, dtype=float).reshape(1, 2)
        events = batch.step()
        reward = float(batch.fitness[0]) - before
        return batch.obs[0].copy(), reward, batch.done, False, self._info(events)

    def _info(self, events) -> dict[str, Any]:
        b = self._batch
        return {
            "trial": int(b.trial[0]),
            "phase": int(b.phase[0]),
            "fitness": float(b.fitness[0]),
            "events": [e.kind for e in events],
            "fault": b.faults[0],
        }

    def result(self):
        """The evaluation's :class:`~neurodrome.sim.task.AgentResult` so far."""
        return self._batch.results()[0] if self._batch is not None else None

    def render(self, size: tuple[int, int] = (640, 480)) -> np.ndarray:
        """An (H, W, 3) picture of the current state, drawn like the preview (needs pygame)."""
        from .view.draw import PygameCanvas
        from .view.scene import draw_world, fit_viewport

        if self._batch is None:
            raise RuntimeError("call reset() before render()")
        b = self._batch
        canvas = PygameCanvas(size)
        viewport = fit_viewport(self.world, b.geometry, canvas.size)
        values = dict(zip(b.site_names, b.site_values[0].tolist()))
        x, y = b.positions[0]
        draw_world(canvas, viewport, self.world, b.geometry, site_values=values,
                   robot_pose=(float(x), float(y), float(np.degrees(b.angles[0]))), rays=b.ray_points()[0], legend=False)
        return canvas.to_array()

    def close(self) -> None:
        self._batch = None
