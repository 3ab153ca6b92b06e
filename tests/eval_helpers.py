"""Controllers and networks for the evaluation tests, named as ``eval_helpers:NAME``
sources so worker processes can import them."""

from __future__ import annotations

import json
import os
import signal
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
REFLEX = ROOT / "assets" / "courier-reflex.net.json"
JUNCTION = ROOT / "worlds" / "clinic-junction.json"

#: Environment variables read by :func:`kill_once`.
MARKER_ENV = "NEURODROME_TEST_KILL_MARKER"
PARENT_ENV = "NEURODROME_TEST_PARENT_PID"


def networks(count: int, seed: int = 0) -> list[dict]:
    """``count`` network descriptions: the courier-reflex network with its weights
    perturbed by a seeded generator, each with its own name."""
    base = json.loads(REFLEX.read_text())
    rng = np.random.default_rng(seed)
    out = []
    for k in range(count):
        net = json.loads(json.dumps(base))
        net["name"] = f"reflex-{seed}-{k}"
        low, high = net["weight_bounds"]
        for conn in net["connections"]:
            w = conn["weight"] + float(rng.normal(0.0, 0.5))
            conn["weight"] = float(np.clip(w, low, high)) if conn.get("plastic") else w
        out.append(net)
    return out


def _steady_policy(obs: np.ndarray) -> tuple[float, float]:
    """Forward with a bias away from the nearer side wall (ranges 0 and 6 are the sides)."""
    return 0.6 + 0.3 * float(obs[0]), 0.6 + 0.3 * float(obs[6])


def steady(layout):
    """Factory of a plain deterministic policy."""
    return _steady_policy


def kill_once(layout):
    """Like :func:`steady`, but the first act() in a worker process kills that process
    with SIGKILL; a marker file records that it happened, so the retry runs normally.
    Never kills the test process itself."""
    marker = Path(os.environ[MARKER_ENV])
    parent = int(os.environ[PARENT_ENV])

    def policy(obs: np.ndarray) -> tuple[float, float]:
        if os.getpid() != parent and not marker.exists():
            marker.write_text(str(os.getpid()))
            os.kill(os.getpid(), signal.SIGKILL)
        return _steady_policy(obs)

    return policy


def raises_later(layout):
    """A policy that raises on its 20th call."""
    calls = [0]

    def policy(obs: np.ndarray) -> tuple[float, float]:
        calls[0] += 1
        if calls[0] == 20:
            raise RuntimeError("sensor table exhausted")
        return _steady_policy(obs)

    return policy


def nan_later(layout):
    """A policy that emits NaN on its 15th call."""
    calls = [0]

    def policy(obs: np.ndarray) -> tuple[float, float]:
        calls[0] += 1
        return (float("nan"), 0.5) if calls[0] == 15 else _steady_policy(obs)

    return policy


def broken_factory(layout):
    """A factory that cannot build its controller."""
    raise KeyError("no calibration for this rover")


class ResetFails:
    """A one-agent controller whose lifetime reset raises."""

    n_agents = 1

    def __init__(self, layout=None) -> None:
        pass

    def reset_lifetime(self, seeds) -> None:
        raise OSError("calibration file missing")

    def reset_trial(self, mask) -> None:
        pass

    def act(self, obs):
        return np.full((1, 2), 0.5)
