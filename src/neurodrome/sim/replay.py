"""Replay files: what a few agents did at every control step, for viewers and recorders.

A replay is an ``.npz`` archive (read back with ``numpy.load(path, allow_pickle=False)``)
holding, for A recorded agents over T + 1 instants (the start, then after every step):

=================  ====================  ==============================================
key                shape                 meaning
=================  ====================  ==============================================
format, version    ()                    "neurodrome-replay", 1
world              ()                    the world file's JSON text (self-contained)
seed               ()                    evaluation seed
agents, labels     (A,)                  agent indices and controller labels
control_period     ()                    seconds per step
pose               (T+1, A, 3)           x, y (metres, world coordinates), heading (rad)
obs                (T+1, A, C)           observations (the next step's controller input)
rays               (T+1, A, R, 2)        range-finder ray end points
wheels             (T+1, A, 2)           wheel commands of the step that led here
trial, phase       (T+1, A)              current trial (from 1) and Phase code
fitness            (T+1, A)              running fitness
site_values        (T+1, A, S)           each site's current value
zones              (T+1, A, Z)           bool, robot inside each zone (home, sites, markers)
zone_names         (Z,)                  zone names in column order
outputs            (T+1, A, n)           neuron values (network controllers; else n = 0)
modulation         (T+1, A, n)           modulatory sums m_i of the last step
weights            (T+1, A, n, n)        current weights [source j, target i]
neuron_ids         (A, n)                neuron ids in index order ("" for padding)
event_step ...     (E,)                  event_step, event_agent (row in agents),
                                         event_kind, event_detail (JSON text)
=================  ====================  ==============================================

Steps after an agent finished repeat its last state. Files are written atomically.
"""

from __future__ import annotations

import io
import json
from pathlib import Path
from typing import Sequence

import numpy as np

from ..errors import NeurodromeError, Problem
from ..jsonio import write_atomic
from ..world import world_to_data
from .batch import Batch

REPLAY_FORMAT = "neurodrome-replay"
REPLAY_VERSION = 1


class ReplayError(NeurodromeError):
    """A replay file that cannot be read."""


class Recorder:
    """Captures the state of chosen agents (rows of ``batch``) after every step."""

    def __init__(self, batch: Batch, rows: Sequence[int] | None = None) -> None:
        self.batch = batch
        self.rows = list(range(batch.n)) if rows is None else [int(r) for r in rows]
        self._frames: dict[str, list[np.ndarray]] = {}
        self._events: list[tuple[int, int, str, str]] = []
        self._groups = []
        for r in self.rows:
            for sl, ctrl in batch.groups:
                if sl.start <= r < sl.stop:
                    self._groups.append((ctrl, r - sl.start))
        self.capture()

    def capture(self) -> None:
        b, rows = self.batch, self.rows
        pos, ang = b.positions[rows], b.angles[rows]
        frame = {
            "pose": np.column_stack([pos, ang]),
            "obs": b.obs[rows].copy(),
            "rays": b.ray_points()[rows],
            "wheels": b.wheels[rows].copy(),
            "trial": b.trial[rows].copy(),
            "phase": b.phase[rows].copy(),
            "fitness": b.fitness[rows].copy(),
            "site_values": b.site_values[rows].copy(),
        }
        zones = b.zone_states()
        self._zone_names = list(zones)
        frame["zones"] = np.column_stack([zones[name][rows] for name in self._zone_names]).astype(bool)
        outs, mods, weights = [], [], []
        for ctrl, k in self._groups:
            state = ctrl.state() if hasattr(ctrl, "state") else None
            if state is None:
                outs.append(np.zeros(0)), mods.append(np.zeros(0)), weights.append(np.zeros((0, 0)))
            else:
                outs.append(state["outputs"][k]), mods.append(state["modulation"][k]), weights.append(state["weights"][k])
        frame["outputs"], frame["modulation"], frame["weights"] = outs, mods, weights
        step = len(self._frames.get("pose", []))
        for key, value in frame.items():
            self._frames.setdefault(key, []).append(value)
        index = {r: a for a, r in enumerate(rows)}
        for ev in b.events if step else []:
            if ev.agent in index:
                self._events.append((step, index[ev.agent], ev.kind, json.dumps(ev.detail)))

    def arrays(self) -> dict[str, np.ndarray]:
        b = self.batch
        out = {key: np.stack(vals) for key, vals in self._frames.items() if key not in ("outputs", "modulation", "weights")}
        n = max([len(o) for o in self._frames["outputs"][0]] + [0])
        T, A = len(self._frames["pose"]), len(self.rows)
        outputs, mods, weights = np.zeros((T, A, n), np.float32), np.zeros((T, A, n), np.float32), np.zeros((T, A, n, n), np.float32)
        for t in range(T):
            for a in range(A):
                m = len(self._frames["outputs"][t][a])
                outputs[t, a, :m] = self._frames["outputs"][t][a]
                mods[t, a, :m] = self._frames["modulation"][t][a]
                weights[t, a, :m, :m] = self._frames["weights"][t][a]
        ids = np.full((A, n), "", dtype=f"<U{max(1, max((len(i) for ids in self._neuron_ids() for i in ids), default=1))}")
        for a, names in enumerate(self._neuron_ids()):
            ids[a, : len(names)] = names
        events = self._events
        out.update(
            format=np.array(REPLAY_FORMAT),
            version=np.array(REPLAY_VERSION),
            world=np.array(json.dumps(world_to_data(b.spec))),
            seed=np.array(b.seed),
            agents=b.agent_ids[self.rows].copy(),
            labels=np.array([b.labels[r] for r in self.rows], dtype=str),
            control_period=np.array(b.control_period),
            zone_names=np.array(self._zone_names, dtype=str),
            outputs=outputs,
            modulation=mods,
            weights=weights,
            neuron_ids=ids,
            event_step=np.array([e[0] for e in events], dtype=np.int64),
            event_agent=np.array([e[1] for e in events], dtype=np.int64),
            event_kind=np.array([e[2] for e in events], dtype=str),
            event_detail=np.array([e[3] for e in events], dtype=str),
        )
        return out

    def _neuron_ids(self) -> list[list[str]]:
        return [list(ctrl.neuron_ids[k]) if hasattr(ctrl, "neuron_ids") else [] for ctrl, k in self._groups]

    def save(self, path: str | Path) -> None:
        buffer = io.BytesIO()
        np.savez_compressed(buffer, **self.arrays())
        write_atomic(path, buffer.getvalue())


def record_replay(batch: Batch, path: str | Path, rows: Sequence[int] | None = None) -> Recorder:
    """Run ``batch`` to the end, capturing ``rows``, and write the replay to ``path``."""
    recorder = Recorder(batch, rows)
    while not batch.done:
        batch.step()
        recorder.capture()
    recorder.save(path)
    return recorder


def load_replay(path: str | Path) -> dict[str, np.ndarray]:
    """Read a replay file (no pickles); raises :class:`ReplayError` with a clear message."""
    try:
        with np.load(path, allow_pickle=False) as data:
            arrays = {k: data[k] for k in data.files}
    except FileNotFoundError:
        raise ReplayError(Problem(str(path), "an existing replay file", "no such file")) from None
    except (OSError, ValueError) as exc:
        raise ReplayError(Problem(str(path), "a replay file (.npz)", str(exc))) from None
    fmt = str(arrays.get("format", ""))
    if fmt != REPLAY_FORMAT:
        raise ReplayError(Problem(str(path), f"format {REPLAY_FORMAT}", fmt or "no format"))
    if int(arrays.get("version", -1)) != REPLAY_VERSION:
        raise ReplayError(Problem(str(path), f"replay version {REPLAY_VERSION}", str(arrays.get("version"))))
    return arrays
