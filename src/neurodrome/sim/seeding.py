"""Seed tree and counter-based noise.

Every random draw of an agent comes from ``SeedSequence(evaluation_seed,
spawn_key=(agent_index, stream))``, so it never depends on the batch around the agent.
Noise drawn every control step (sensors, motors) uses a counter-based generator
(SplitMix64 of key, step and channel) evaluated for the whole batch in one numpy pass,
instead of a per-agent Python generator call.
"""

from __future__ import annotations

import numpy as np

TASK_STREAM = 0  #: relocation trials, start jitter
NOISE_STREAM = 1  #: sensor and motor noise keys
CONTROLLER_STREAM = 2  #: seeds handed to controllers


def agent_seed_sequence(seed: int, agent: int, stream: int) -> np.random.SeedSequence:
    return np.random.SeedSequence(int(seed), spawn_key=(int(agent), int(stream)))


def agent_generator(seed: int, agent: int, stream: int = TASK_STREAM) -> np.random.Generator:
    return np.random.Generator(np.random.PCG64(agent_seed_sequence(seed, agent, stream)))


def agent_key(seed: int, agent: int, stream: int = NOISE_STREAM) -> np.uint64:
    return agent_seed_sequence(seed, agent, stream).generate_state(1, dtype=np.uint64)[0]


_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_GOLDEN = np.uint64(0x9E3779B97F4A7C15)


def _mix(z: np.ndarray) -> np.ndarray:
    z = (z ^ (z >> np.uint64(30))) * _M1
    z = (z ^ (z >> np.uint64(27))) * _M2
    return z ^ (z >> np.uint64(31))


def uniforms(keys: np.ndarray, step: np.ndarray | int, channels: int, salt: int = 0) -> np.ndarray:
    """(N, channels) uniforms in (0, 1) from per-agent ``keys`` (N,) uint64 and a step
    counter (scalar or (N,)), via the SplitMix64 finaliser (Steele, Lea & Flood 2014)."""
    with np.errstate(over="ignore"):
        step = np.asarray(step, dtype=np.uint64).reshape(-1, 1)
        ch = np.arange(channels, dtype=np.uint64)[None, :]
        z = keys[:, None] + _GOLDEN * (step * np.uint64(1 << 16) + ch + np.uint64(salt) * np.uint64(1 << 40) + np.uint64(1))
        z = _mix(_mix(z))
    return ((z >> np.uint64(11)).astype(np.float64) + 0.5) / float(1 << 53)


def normals(keys: np.ndarray, step: np.ndarray | int, channels: int, salt: int = 0) -> np.ndarray:
    """(N, channels) standard normal draws (Box-Muller on two counter-based uniforms)."""
    u = uniforms(keys, step, 2 * channels, salt)
    return np.sqrt(-2.0 * np.log(u[:, :channels])) * np.cos(2.0 * np.pi * u[:, channels:])
