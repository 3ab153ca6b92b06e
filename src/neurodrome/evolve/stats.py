"""Statistics for comparing treatments across independent evolutionary runs.

Arcuri & Briand (2011, ICSE, "A practical guide for using statistical tests to assess
randomized algorithms in software engineering") recommend the Mann-Whitney U test for two
sets of runs, reported with its p-value and the Vargha-Delaney A12 effect size; the common
practice for curves is the median and inter-quartile range of best-so-far fitness across
runs, per generation. Everything here is plain numpy and :mod:`math`, so the core does not
need scipy (scipy is only the reference in the tests).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from ..errors import NeurodromeError, Problem

Method = Literal["auto", "exact", "asymptotic"]

#: ``method="auto"`` uses the exact distribution when there are no ties and the two samples
#: together hold at most this many values. The exact counts are computed with Python
#: integers in O(n1 * n2 * min(n1, n2)) steps, which stays instant at this size. (scipy's
#: own "auto" switches earlier, at a sample of 8; both are valid choices.)
EXACT_MAX_TOTAL = 60


@dataclass(frozen=True)
class MannWhitney:
    """Result of :func:`mann_whitney_u`.

    ``u`` is the U statistic of the *first* sample (the number of pairs in which it wins,
    ties counting one half), ``p`` the two-sided p-value, ``method`` ``"exact"`` or
    ``"asymptotic"``, ``a12`` the Vargha-Delaney effect size ``u / (n1 * n2)``.
    """

    u: float
    p: float
    method: str
    a12: float
    n1: int
    n2: int


def _sample(values: object, name: str) -> np.ndarray:
    arr = np.asarray(values, dtype=float)
    if arr.ndim != 1:
        raise NeurodromeError(Problem(name, "a one-dimensional sample", f"shape {arr.shape}"))
    if arr.size == 0:
        raise NeurodromeError(Problem(name, "at least one value", "an empty sample"))
    if not np.all(np.isfinite(arr)):
        raise NeurodromeError(Problem(name, "finite numbers", "NaN or infinity"))
    return arr


def rank_with_ties(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mid-ranks (1-based, ties share the mean rank) and the sizes of the tie groups.

    ``values`` (N,) -> ranks (N,), tie group sizes (K,) with K distinct values.
    """
    order = np.argsort(values, kind="mergesort")
    ordered = values[order]
    starts = np.flatnonzero(np.r_[True, ordered[1:] != ordered[:-1]])
    sizes = np.diff(np.r_[starts, ordered.size])
    # a group occupying positions s..s+t-1 (0-based) has mean 1-based rank s + (t + 1) / 2
    group_rank = starts + (sizes + 1) / 2.0
    ranks = np.empty(values.size, dtype=float)
    ranks[order] = np.repeat(group_rank, sizes)
    return ranks, sizes


def exact_u_counts(n1: int, n2: int) -> list[int]:
    """Number of orderings giving each U = 0 .. n1*n2 when there are no ties.

    These are the coefficients of the Gaussian binomial coefficient [n1+n2 choose n1] in q
    (textbook combinatorics: U counts the inversions between the two samples), built as
    prod_{i=1..m} (1 - q^(n+i)) / (1 - q^i) with m = min(n1, n2), exactly, in Python ints.
    """
    m, n = min(n1, n2), max(n1, n2)
    coeffs = [1] + [0] * (m * n + m)
    degree = 0
    for i in range(1, m + 1):
        k = n + i
        for j in range(degree + k, k - 1, -1):
            coeffs[j] -= coeffs[j - k]
        degree += k
        for j in range(i, degree + 1):
            coeffs[j] += coeffs[j - i]
        degree -= i
    return coeffs[: m * n + 1]


def _normal_sf(z: float) -> float:
    return 0.5 * math.erfc(z / math.sqrt(2.0))


def mann_whitney_u(x: object, y: object, method: Method = "auto") -> MannWhitney:
    """Two-sided Mann-Whitney U (Wilcoxon rank-sum) test of samples ``x`` (n1,) and ``y`` (n2,).

    ``"exact"`` uses the exact null distribution (only valid without ties; refused when
    there are ties). ``"asymptotic"`` uses the normal approximation with the tie correction
    of the variance and a continuity correction of 0.5, as in the textbook formula
    sigma^2 = n1 n2 / 12 * ((n + 1) - sum(t^3 - t) / (n (n - 1))). ``"auto"`` picks exact
    when there are no ties and n1 + n2 <= :data:`EXACT_MAX_TOTAL`.
    """
    a = _sample(x, "first sample")
    b = _sample(y, "second sample")
    n1, n2 = a.size, b.size
    ranks, ties = rank_with_ties(np.concatenate([a, b]))
    u1 = float(ranks[:n1].sum() - n1 * (n1 + 1) / 2.0)
    u2 = n1 * n2 - u1
    has_ties = bool(np.any(ties > 1))
    if method == "auto":
        method = "exact" if not has_ties and n1 + n2 <= EXACT_MAX_TOTAL else "asymptotic"
    if method == "exact":
        if has_ties:
            raise NeurodromeError(Problem("Mann-Whitney U", "samples without ties for the exact test",
                                          "tied values; use the asymptotic method"))
        counts = exact_u_counts(n1, n2)
        u_big = int(round(max(u1, u2)))
        tail = sum(counts[u_big:])
        p = min(1.0, 2.0 * tail / math.comb(n1 + n2, n1))
    elif method == "asymptotic":
        n = n1 + n2
        tie_term = float(np.sum(ties.astype(float) ** 3 - ties)) / (n * (n - 1)) if n > 1 else 0.0
        variance = n1 * n2 / 12.0 * ((n + 1) - tie_term)
        if variance <= 0.0:
            p = 1.0  # every value equal: no evidence of any difference
        else:
            z = (max(u1, u2) - n1 * n2 / 2.0 - 0.5) / math.sqrt(variance)
            p = min(1.0, 2.0 * _normal_sf(z))
    else:
        raise NeurodromeError(Problem("Mann-Whitney U method", "'auto', 'exact' or 'asymptotic'", repr(method)))
    return MannWhitney(u=u1, p=p, method=method, a12=u1 / (n1 * n2), n1=n1, n2=n2)


def vargha_delaney_a12(x: object, y: object) -> float:
    """Probability that a value drawn from ``x`` beats one from ``y``, ties counting half.

    Vargha & Delaney (2000): A12 = (R1 / n1 - (n1 + 1) / 2) / n2 = U1 / (n1 n2). 0.5 means
    no difference; for maximised fitness, above 0.5 means ``x`` tends to be better.
    """
    return mann_whitney_u(x, y, method="asymptotic").a12


def a12_magnitude(a12: float) -> str:
    """Verbal size of an A12 effect: negligible, small, medium or large.

    Thresholds 0.56 / 0.64 / 0.71 on max(A12, 1 - A12) are those of Vargha & Delaney (2000)
    as quoted by Arcuri & Briand (2011) [memory, high confidence].
    """
    d = max(a12, 1.0 - a12)
    if d < 0.56:
        return "negligible"
    if d < 0.64:
        return "small"
    if d < 0.71:
        return "medium"
    return "large"


def best_so_far(fitness: object) -> np.ndarray:
    """Running maximum along generations: (R, G) per-generation best -> (R, G)."""
    arr = np.asarray(fitness, dtype=float)
    if arr.ndim != 2:
        raise NeurodromeError(Problem("fitness curves", "a (runs, generations) array", f"shape {arr.shape}"))
    return np.maximum.accumulate(arr, axis=1)


@dataclass(frozen=True)
class CurveBands:
    """Median and quartiles across runs, each (G,)."""

    median: np.ndarray
    q1: np.ndarray
    q3: np.ndarray

    @property
    def iqr(self) -> np.ndarray:
        return self.q3 - self.q1


def curve_bands(curves: object) -> CurveBands:
    """Per-generation median and inter-quartile range across runs of ``curves`` (R, G).

    Quartiles use linear interpolation between order statistics (numpy's default, the
    common practice; with R = 1 the band collapses onto the single run).
    """
    arr = np.asarray(curves, dtype=float)
    if arr.ndim != 2 or arr.shape[0] == 0:
        raise NeurodromeError(Problem("curves", "a (runs, generations) array with runs >= 1", f"shape {arr.shape}"))
    q1, med, q3 = np.percentile(arr, [25.0, 50.0, 75.0], axis=0)
    return CurveBands(median=med, q1=q1, q3=q3)
