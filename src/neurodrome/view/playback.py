"""One agent's run as a sequence of states, from a live simulation or a replay file.

The viewer and the recorder draw whatever a :class:`Playback` shows. Both kinds answer
the same questions about the *current instant* (pose, rays, trial, phase, score, site
values, network state) and move the same way: :meth:`step` one control step forward,
:meth:`restart`, :meth:`goto_trial`. A :class:`LivePlayback` runs a one-agent
:class:`~neurodrome.sim.batch.Batch`, so with the same seed and agent index it is the same
run as ``evaluate``; going back re-simulates from the start (same seed, same run). A
:class:`ReplayPlayback` walks the stored instants of a replay file.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ..control.protocol import Layout
from ..control.sources import label, load_spec, resolve
from ..control.spec import NetworkSpec
from ..errors import NeurodromeError, Problem
from ..sim.batch import Batch
from ..sim.replay import load_replay
from ..sim.task import Phase
from ..world import WorldSpec, build_geometry, world_from_data

PHASE_NAMES = {Phase.OUTBOUND: "outbound", Phase.HOMING: "homing", Phase.SETTLING: "at store", Phase.FINISHED: "finished"}


@dataclass
class NetState:
    """One agent's network at one instant: outputs (n,), modulation sums m_i (n,),
    weights (n, n) indexed [source j, target i]."""

    outputs: np.ndarray
    modulation: np.ndarray
    weights: np.ndarray


class Playback:
    """Shared bookkeeping; subclasses fill the state fields after every move."""

    spec: WorldSpec
    label: str
    seed: int
    n_trials: int
    control_period: float
    step_limit: int
    net_spec: NetworkSpec | None
    neuron_ids: list[str]
    # the current instant
    pose: tuple[float, float, float]  #: x, y (metres), heading (radians)
    rays: np.ndarray  #: (R, 2) ray end points, metres
    trial: int
    phase: int
    fitness: float
    trial_score: float
    steps_in_trial: int
    step_index: int  #: control steps since the start of the evaluation
    site_values: np.ndarray  #: (S,)
    relocations: int
    net: NetState | None
    finished: bool

    def __init__(self, spec: WorldSpec) -> None:
        self.spec = spec
        self.geometry = build_geometry(spec)
        self.site_names = [s.name for s in spec.sites]

    @property
    def phase_name(self) -> str:
        return PHASE_NAMES.get(Phase(int(self.phase)), str(self.phase))

    def site_value_map(self) -> dict[str, float]:
        return {n: float(v) for n, v in zip(self.site_names, self.site_values)}

    def step(self) -> list[tuple[str, dict]]:
        """One control step; returns this agent's events (kind, detail)."""
        raise NotImplementedError

    def restart(self) -> None:
        raise NotImplementedError

    def goto_trial(self, k: int) -> None:
        """Move to the first instant of trial ``k`` (clipped to 1..n_trials)."""
        raise NotImplementedError

    def run_to_end(self, limit: int | None = None) -> None:
        count = 0
        while not self.finished and (limit is None or count < limit):
            self.step()
            count += 1


class LivePlayback(Playback):
    """A live one-agent simulation of ``source`` in ``spec``."""

    def __init__(self, spec: WorldSpec, source: Any, *, seed: int = 0, trials: int | None = None,
                 agent_id: int = 0) -> None:
        super().__init__(spec)
        self.source = source
        self.label = label(source)
        self.seed = int(seed)
        ctrl = resolve(source, Layout.of(spec))
        if ctrl.n_agents != 1:
            raise NeurodromeError(Problem(self.label, "a controller driving one agent", f"{ctrl.n_agents} agents"))
        self.controller = ctrl
        self.batch = Batch(spec, [ctrl], seed=seed, agent_ids=[agent_id], trials=trials,
                           labels=[self.label], geometry=self.geometry)
        self.n_trials = self.batch.n_trials
        self.control_period = self.batch.control_period
        self.step_limit = self.batch.step_limit
        specs = getattr(ctrl, "specs", None)
        self.net_spec = specs[0] if specs else None
        ids = getattr(ctrl, "neuron_ids", None)
        self.neuron_ids = list(ids[0]) if ids else []
        self._read()

    def _read(self) -> None:
        b = self.batch
        x, y = b.positions[0]
        self.pose = (float(x), float(y), float(b.angles[0]))
        self.rays = b.ray_points()[0]
        self.trial = int(b.trial[0])
        self.phase = int(b.phase[0])
        self.fitness = float(b.fitness[0])
        self.trial_score = float(b.trial_score[0])
        self.steps_in_trial = int(b.steps_in_trial[0])
        self.step_index = int(b.steps_taken)
        self.site_values = b.site_values[0].copy()
        self.relocations = len(b.relocation_log[0])
        self.finished = b.done
        state = self.controller.state() if hasattr(self.controller, "state") else None
        self.net = None if state is None else NetState(state["outputs"][0], state["modulation"][0], state["weights"][0])

    def step(self) -> list[tuple[str, dict]]:
        events = self.batch.step()
        self._read()
        return [(e.kind, dict(e.detail, trial=e.trial)) for e in events]

    def restart(self) -> None:
        self.batch.reset()
        self._read()

    def goto_trial(self, k: int) -> None:
        k = min(max(1, int(k)), self.n_trials)
        if k < self.trial or (k == self.trial and self.steps_in_trial > 0):
            self.restart()
        while self.trial < k and not self.finished:
            self.step()


class ReplayPlayback(Playback):
    """The stored instants of one agent (row ``agent``) of a replay file."""

    def __init__(self, path: str | Path, agent: int = 0) -> None:
        data = load_replay(path)
        try:
            spec = world_from_data(json.loads(str(data["world"])))
        except (KeyError, ValueError) as exc:
            raise NeurodromeError(Problem(f"{path}: world", "the world the replay was recorded in", str(exc))) from None
        super().__init__(spec)
        A = int(data["pose"].shape[1])
        if not 0 <= agent < A:
            raise NeurodromeError(Problem("--agent", f"a replay agent row between 0 and {A - 1}", str(agent)))
        self.path = str(path)
        self.row = agent
        self.label = str(data["labels"][agent]) if len(data["labels"]) else f"agent {agent}"
        self.control_period = float(data["control_period"])
        self.seed = int(data["seed"])
        self.step_limit = max(1, math.ceil(spec.task.time_limit_s / self.control_period - 1e-9))
        a = agent
        self._pose = data["pose"][:, a]
        self._rays = data["rays"][:, a]
        self._trial = data["trial"][:, a].astype(np.int64)
        self._phase = data["phase"][:, a].astype(np.int64)
        self._fitness = data["fitness"][:, a].astype(float)
        self._values = data["site_values"][:, a]
        self._outputs = data["outputs"][:, a]
        self._mod = data["modulation"][:, a]
        self._weights = data["weights"][:, a]
        self.neuron_ids = [str(i) for i in data["neuron_ids"][a] if str(i)] if data["neuron_ids"].size else []
        m = len(self.neuron_ids)
        self._net_size = m
        T = len(self._trial)
        self.length = T
        self.n_trials = int(self._trial.max()) if T else 1
        # Per instant: steps since the trial began and the fitness when it began. A new
        # trial shows at the instant the trial number changes.
        starts = np.flatnonzero(np.r_[True, self._trial[1:] != self._trial[:-1]])
        self._trial_start = np.repeat(starts, np.diff(np.r_[starts, T]))
        self._trial_base = self._fitness[self._trial_start]
        done = np.flatnonzero(self._phase == Phase.FINISHED)
        self._end = int(done[0]) if len(done) else T - 1
        kinds, steps = data["event_kind"], data["event_step"]
        rows = data["event_agent"]
        self._events: dict[int, list[tuple[str, dict]]] = {}
        for s, r, kind, detail in zip(steps.tolist(), rows.tolist(), kinds.tolist(), data["event_detail"].tolist()):
            if r == a:
                info = json.loads(str(detail))
                # events of step s belong to the trial before it, except the next trial's start
                info.setdefault("trial", int(self._trial[s] if kind == "trial-start" else self._trial[max(s - 1, 0)]))
                self._events.setdefault(int(s), []).append((str(kind), info))
        self._reloc_steps = np.array(sorted(s for s, evs in self._events.items() for k, _ in evs if k == "relocation"), dtype=np.int64)
        self.net_spec = self._find_spec()
        self.t = 0
        self._read()

    def _find_spec(self) -> NetworkSpec | None:
        """The network file named by the replay's label, if it is still there and matches."""
        try:
            spec = load_spec(self.label)
        except (NeurodromeError, OSError, ValueError):
            return None
        if spec is None or spec.neuron_ids() != self.neuron_ids:
            return None
        return spec

    def _read(self) -> None:
        t = self.t
        x, y, h = self._pose[t]
        self.pose = (float(x), float(y), float(h))
        self.rays = self._rays[t]
        self.trial = int(self._trial[t])
        self.phase = int(self._phase[t])
        self.fitness = float(self._fitness[t])
        self.trial_score = float(self._fitness[t] - self._trial_base[t])
        self.steps_in_trial = int(t - self._trial_start[t])
        self.step_index = t
        self.site_values = self._values[t]
        self.relocations = int(np.searchsorted(self._reloc_steps, t, side="right"))
        self.finished = t >= self._end
        m = self._net_size
        self.net = NetState(self._outputs[t, :m], self._mod[t, :m], self._weights[t, :m, :m]) if m else None

    def step(self) -> list[tuple[str, dict]]:
        if self.finished:
            return []
        self.t += 1
        self._read()
        return self._events.get(self.t, [])

    def restart(self) -> None:
        self.t = 0
        self._read()

    def goto_trial(self, k: int) -> None:
        k = min(max(1, int(k)), self.n_trials)
        hits = np.flatnonzero(self._trial >= k)
        self.t = int(hits[0]) if len(hits) else self._end
        self._read()


def open_playback(world: str | None, controller: str | None, *, replay: str | None = None, seed: int = 0,
                  trials: int | None = None, agent: int = 0) -> Playback:
    """A playback from command-line arguments: a replay file (``--replay`` or a WORLD
    ending in ``.npz``) or a world file and a controller source."""
    from ..world import load_world

    if replay is None and world is not None and str(world).endswith(".npz"):
        replay, world = world, None
    if replay is not None:
        if controller is not None:
            raise NeurodromeError(Problem("CONTROLLER", "no controller with a replay file (it holds the run)", str(controller)))
        return ReplayPlayback(replay, agent)
    if world is None or controller is None:
        raise NeurodromeError(Problem("arguments", "WORLD CONTROLLER, or --replay FILE", "missing"))
    return LivePlayback(load_world(world), controller, seed=seed, trials=trials, agent_id=agent)
