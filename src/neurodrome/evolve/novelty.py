"""Novelty search: behaviour distances, sparseness and an archive with an adaptive threshold.

Lehman & Stanley (2011), "Abandoning objectives: evolution through the search for novelty
alone", Evolutionary Computation 19(2): the novelty (sparseness) of a behaviour is the mean
distance to its k nearest neighbours among the current population and the archive (k about
15), and behaviours whose sparseness exceeds a threshold enter the archive; the threshold
adapts so the archive grows at a steady pace.

Two behaviour descriptors come out of an evaluation:

- outcome codes (N, T) int: per trial, the index of the reward site reached, or -1 for a
  crash or no site; compared with the Hamming distance (number of trials that differ).
  For junction mazes this is the per-trial outcome sequence [Lehman & Stanley 2011, Evolutionary Computation 19(2),
  memory, medium confidence].
- end positions (N, T, 2) float: where the robot was at the end of each trial; compared
  with the Euclidean distance between the flattened (T * 2) vectors, which for T = 1 is
  the final-position distance of open mazes [Lehman & Stanley 2011, Evolutionary Computation 19(2), memory].
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from ..errors import NeurodromeError, Problem

Metric = Literal["hamming", "euclidean"]

#: Rows of the first operand handled at once, to bound the (rows, M, D) difference array.
_CHUNK = 256

# Archive constants. Lehman & Stanley adjusted the threshold per 2,500 evaluations: raised
# by 20 % when more than four behaviours were added, lowered by 5 % when none were
# [memory, medium confidence]. Per generation, as here, this is common practice in
# re-implementations; the stall length is our choice. All are constructor arguments.
DEFAULT_K = 15
RAISE_WHEN_ADDED_MORE_THAN = 4
RAISE_FACTOR = 1.20
LOWER_AFTER_STALLED_GENERATIONS = 5
LOWER_FACTOR = 0.95


def _as_behaviours(values: object, metric: Metric, name: str) -> np.ndarray:
    """Validate a batch of behaviours and flatten it to (N, D)."""
    if metric == "hamming":
        arr = np.asarray(values)
        if arr.ndim != 2 or not (np.issubdtype(arr.dtype, np.integer) or arr.size == 0):
            raise NeurodromeError(Problem(name, "outcome codes as an (N, T) integer array", f"shape {arr.shape}, dtype {arr.dtype}"))
        return arr.astype(np.int64, copy=False)
    if metric == "euclidean":
        arr = np.asarray(values, dtype=float)
        if arr.ndim not in (2, 3) or (arr.ndim == 3 and arr.shape[2] != 2):
            raise NeurodromeError(Problem(name, "end positions as an (N, T, 2) or (N, D) array", f"shape {arr.shape}"))
        if not np.all(np.isfinite(arr)):
            raise NeurodromeError(Problem(name, "finite end positions", "NaN or infinity"))
        return arr.reshape(arr.shape[0], int(np.prod(arr.shape[1:])))  # -1 fails for 0 rows
    raise NeurodromeError(Problem("behaviour metric", "'hamming' or 'euclidean'", repr(metric)))


def behaviour_distances(a: object, b: object, metric: Metric) -> np.ndarray:
    """All pairwise distances between behaviours ``a`` (N, ...) and ``b`` (M, ...) -> (N, M).

    ``hamming``: number of trials whose outcome code differs (a: (N, T), b: (M, T) ints).
    ``euclidean``: distance between flattened end positions (a: (N, T, 2), b: (M, T, 2)).
    """
    left = _as_behaviours(a, metric, "behaviours")
    right = _as_behaviours(b, metric, "other behaviours")
    if left.shape[1] != right.shape[1]:
        raise NeurodromeError(Problem("behaviours", f"{left.shape[1]} values per behaviour in both batches",
                                      f"{right.shape[1]}"))
    out = np.empty((left.shape[0], right.shape[0]), dtype=float)
    for start in range(0, left.shape[0], _CHUNK):
        block = left[start:start + _CHUNK, None, :]
        if metric == "hamming":
            out[start:start + _CHUNK] = np.count_nonzero(block != right[None, :, :], axis=2)
        else:
            # the difference form, not |a|^2 + |b|^2 - 2ab, so that twins are exactly 0 apart
            diff = block - right[None, :, :]
            out[start:start + _CHUNK] = np.sqrt(np.einsum("nmd,nmd->nm", diff, diff))
    return out


def sparseness(population: object, archive: object | None = None, *, metric: Metric,
               k: int = DEFAULT_K) -> np.ndarray:
    """Novelty of each member of ``population`` (N, ...) -> (N,).

    The mean distance to the ``k`` nearest of the other N - 1 members and the archive
    (A, ...). An individual never counts as its own neighbour, but an identical twin does
    (at distance 0). With fewer than ``k`` neighbours the mean is over all of them; with
    none at all the sparseness is 0.
    """
    if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
        raise NeurodromeError(Problem("novelty k", "a whole number >= 1", repr(k)))
    pop = _as_behaviours(population, metric, "population behaviours")
    n = pop.shape[0]
    dist = behaviour_distances(pop, pop, metric)
    dist[np.arange(n), np.arange(n)] = np.inf
    if archive is not None:
        arch = _as_behaviours(archive, metric, "archive behaviours")
        if arch.shape[0]:
            dist = np.concatenate([dist, behaviour_distances(pop, arch, metric)], axis=1)
    kk = min(int(k), dist.shape[1] - 1)  # every column but the individual's own
    if kk <= 0:
        return np.zeros(n)
    nearest = np.partition(dist, kk - 1, axis=1)[:, :kk]
    return nearest.mean(axis=1)


@dataclass
class NoveltyArchive:
    """Behaviours judged novel, with a threshold that adapts to the rate of additions.

    Each generation, :meth:`update` adds every behaviour whose sparseness exceeds the
    threshold, then raises the threshold by ``raise_factor`` if more than
    ``raise_when_added_more_than`` were added, or lowers it by ``lower_factor`` once
    ``lower_after`` generations in a row added none. :meth:`state` / :meth:`from_state`
    round-trip through JSON exactly, for checkpoints.
    """

    metric: Metric
    threshold: float
    raise_when_added_more_than: int = RAISE_WHEN_ADDED_MORE_THAN
    raise_factor: float = RAISE_FACTOR
    lower_after: int = LOWER_AFTER_STALLED_GENERATIONS
    lower_factor: float = LOWER_FACTOR
    behaviours: np.ndarray | None = None
    stalled: int = 0
    history: list[int] = field(default_factory=list)

    def __post_init__(self) -> None:
        if not (np.isfinite(self.threshold) and self.threshold > 0):
            raise NeurodromeError(Problem("novelty threshold", "a finite number > 0", repr(self.threshold)))
        if not (self.raise_factor > 1.0 and 0.0 < self.lower_factor < 1.0 and self.lower_after >= 1):
            raise NeurodromeError(Problem("novelty archive", "raise_factor > 1, 0 < lower_factor < 1, lower_after >= 1",
                                          f"{self.raise_factor}, {self.lower_factor}, {self.lower_after}"))
        if self.behaviours is not None:
            self.behaviours = _as_behaviours(self.behaviours, self.metric, "archive behaviours")

    def __len__(self) -> int:
        return 0 if self.behaviours is None else int(self.behaviours.shape[0])

    def sparseness(self, population: object, k: int = DEFAULT_K) -> np.ndarray:
        """Sparseness (N,) of ``population`` against itself and this archive."""
        return sparseness(population, self.behaviours, metric=self.metric, k=k)

    def update(self, population: object, scores: object) -> np.ndarray:
        """Add the members of ``population`` (N, ...) whose ``scores`` (N,) exceed the threshold.

        Returns the indices added (K,) and adapts the threshold for the next generation.
        """
        pop = _as_behaviours(population, self.metric, "population behaviours")
        values = np.asarray(scores, dtype=float)
        if values.shape != (pop.shape[0],) or not np.all(np.isfinite(values)):
            raise NeurodromeError(Problem("sparseness scores", f"{pop.shape[0]} finite numbers", f"shape {values.shape}"))
        if self.behaviours is not None and self.behaviours.shape[1] != pop.shape[1]:
            raise NeurodromeError(Problem("population behaviours", f"{self.behaviours.shape[1]} values per behaviour",
                                          f"{pop.shape[1]}"))
        added = np.flatnonzero(values > self.threshold)
        if added.size:
            new = pop[added]
            self.behaviours = new.copy() if self.behaviours is None else np.concatenate([self.behaviours, new])
        if added.size > self.raise_when_added_more_than:
            self.threshold *= self.raise_factor
        if added.size == 0:
            self.stalled += 1
            if self.stalled >= self.lower_after:
                self.threshold *= self.lower_factor
                self.stalled = 0
        else:
            self.stalled = 0
        self.history.append(int(added.size))
        return added

    def state(self) -> dict[str, Any]:
        """JSON-ready state; floats survive the round trip exactly (shortest repr)."""
        return {
            "metric": self.metric,
            "threshold": self.threshold,
            "raise_when_added_more_than": self.raise_when_added_more_than,
            "raise_factor": self.raise_factor,
            "lower_after": self.lower_after,
            "lower_factor": self.lower_factor,
            "behaviours": None if self.behaviours is None else self.behaviours.tolist(),
            "stalled": self.stalled,
            "history": list(self.history),
        }

    @classmethod
    def from_state(cls, state: dict[str, Any]) -> "NoveltyArchive":
        """Rebuild an archive from :meth:`state` output."""
        data = dict(state)
        if data.get("behaviours") is not None:
            dtype = np.int64 if data.get("metric") == "hamming" else float
            data["behaviours"] = np.asarray(data["behaviours"], dtype=dtype)
        try:
            return cls(**data)
        except TypeError as exc:
            raise NeurodromeError(Problem("novelty archive state", "the fields written by state()", str(exc))) from None
