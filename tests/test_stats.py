"""Rank-sum test, A12 and run curves, checked against scipy and Arcuri & Briand 2011, ICSE; Vargha & Delaney 2000."""

from __future__ import annotations

import itertools
import math
import statistics

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy import stats as sps

from neurodrome.errors import NeurodromeError
from neurodrome.evolve.stats import (
    a12_magnitude,
    best_so_far,
    curve_bands,
    exact_u_counts,
    mann_whitney_u,
    rank_with_ties,
    vargha_delaney_a12,
)

# Arcuri & Briand 2011, ICSE; Vargha & Delaney 2000: check values computed with scipy.stats.mannwhitneyu, exact, two-sided.
SEPARATED = (list(range(1, 6)), list(range(6, 11)))
FITNESS = ([91.2, 88.0, 93.5, 79.9, 95.1, 90.0], [80.1, 85.3, 78.2, 90.5, 76.0, 82.2])


def test_reference_check_values_separated_samples():
    """[1..5] vs [6..10] gives U = 0, p = 0.0079365 (Arcuri & Briand 2011, ICSE; Vargha & Delaney 2000, scipy exact)."""
    result = mann_whitney_u(*SEPARATED, method="exact")
    assert result.u == 0
    assert result.p == pytest.approx(0.0079365, abs=5e-8)
    assert result.p == pytest.approx(sps.mannwhitneyu(*SEPARATED, method="exact").pvalue, rel=1e-12)


def test_reference_check_values_fitness_samples():
    """The fitness samples give U = 30, p = 0.064935, A12 = 0.8333 (Arcuri & Briand 2011, ICSE; Vargha & Delaney 2000, scipy exact)."""
    result = mann_whitney_u(*FITNESS, method="exact")
    assert result.u == 30
    assert result.p == pytest.approx(0.064935, abs=5e-7)
    assert result.a12 == pytest.approx(0.8333, abs=5e-5)
    assert vargha_delaney_a12(*FITNESS) == pytest.approx(0.8333, abs=5e-5)


def test_auto_uses_exact_for_small_samples_without_ties():
    """Without ties and with few values, 'auto' picks the exact test (our documented rule)."""
    assert mann_whitney_u(*FITNESS).method == "exact"
    assert mann_whitney_u([1, 2, 2], [3, 4]).method == "asymptotic"


distinct_floats = st.lists(st.floats(-1e3, 1e3, allow_nan=False), min_size=2, max_size=24, unique=True)


@settings(max_examples=150, deadline=None)
@given(values=distinct_floats, data=st.data())
def test_exact_matches_scipy(values, data):
    """Exact U and p equal scipy.stats.mannwhitneyu(method='exact') on tie-free samples."""
    split = data.draw(st.integers(1, len(values) - 1))
    x, y = values[:split], values[split:]
    ours = mann_whitney_u(x, y, method="exact")
    ref = sps.mannwhitneyu(x, y, method="exact", alternative="two-sided")
    assert ours.u == ref.statistic
    assert ours.p == pytest.approx(ref.pvalue, rel=1e-9, abs=1e-15)


tied_ints = st.lists(st.integers(0, 6), min_size=1, max_size=40)


@settings(max_examples=200, deadline=None)
@given(x=tied_ints, y=tied_ints)
def test_asymptotic_matches_scipy_with_ties(x, y):
    """Normal approximation with tie and continuity corrections equals scipy's asymptotic method."""
    assume(len(set(x + y)) > 1)
    ours = mann_whitney_u(x, y, method="asymptotic")
    ref = sps.mannwhitneyu(x, y, method="asymptotic", use_continuity=True, alternative="two-sided")
    assert ours.u == ref.statistic
    assert ours.p == pytest.approx(ref.pvalue, rel=1e-9, abs=1e-15)


def test_all_values_equal_gives_p_one():
    """Identical values carry no evidence of a difference: p = 1, as scipy's asymptotic test gives."""
    ours = mann_whitney_u([3.0] * 4, [3.0] * 5)
    assert ours.p == sps.mannwhitneyu([3.0] * 4, [3.0] * 5, method="asymptotic").pvalue
    assert ours.a12 == 0.5


@settings(max_examples=100, deadline=None)
@given(x=tied_ints, y=tied_ints)
def test_a12_matches_pairwise_definition(x, y):
    """A12 equals P(X > Y) + P(X = Y) / 2 counted over all pairs (Vargha & Delaney 2000)."""
    wins = sum((a > b) + 0.5 * (a == b) for a in x for b in y)
    assert vargha_delaney_a12(x, y) == pytest.approx(wins / (len(x) * len(y)), abs=1e-12)
    assert vargha_delaney_a12(x, y) + vargha_delaney_a12(y, x) == pytest.approx(1.0, abs=1e-12)


@pytest.mark.parametrize("n1,n2", [(1, 1), (2, 3), (4, 4), (3, 6), (5, 2)])
def test_exact_counts_match_enumeration(n1, n2):
    """The exact U distribution equals a brute-force count over all rank splits (textbook definition)."""
    counts = [0] * (n1 * n2 + 1)
    for chosen in itertools.combinations(range(n1 + n2), n1):
        rank_sum = sum(chosen) + n1  # 1-based ranks
        counts[rank_sum - n1 * (n1 + 1) // 2] += 1
    assert exact_u_counts(n1, n2) == counts
    assert sum(counts) == math.comb(n1 + n2, n1)


@given(values=st.lists(st.integers(-3, 3), min_size=1, max_size=30))
def test_ranks_match_scipy_rankdata(values):
    """Mid-ranks equal scipy.stats.rankdata(method='average')."""
    ranks, sizes = rank_with_ties(np.array(values, dtype=float))
    np.testing.assert_allclose(ranks, sps.rankdata(values, method="average"))
    assert sizes.sum() == len(values)


def test_a12_magnitude_thresholds():
    """Vargha & Delaney's 0.56 / 0.64 / 0.71 thresholds apply to both directions [memory]."""
    assert [a12_magnitude(v) for v in (0.5, 0.6, 0.3, 0.9)] == ["negligible", "small", "medium", "large"]


def test_bad_samples_are_refused():
    """Empty, non-finite or multi-dimensional samples and exact-with-ties raise the project's error."""
    for x, y in (([], [1.0]), ([1.0, float("nan")], [2.0]), ([[1.0, 2.0]], [1.0])):
        with pytest.raises(NeurodromeError):
            mann_whitney_u(x, y)
    with pytest.raises(NeurodromeError):
        mann_whitney_u([1, 2, 2], [3, 4], method="exact")
    with pytest.raises(NeurodromeError):
        mann_whitney_u([1, 2], [3, 4], method="permutation")  # type: ignore[arg-type]


@settings(max_examples=50, deadline=None)
@given(rows=st.lists(st.lists(st.integers(-50, 50), min_size=6, max_size=6), min_size=1, max_size=9))
def test_best_so_far_and_bands(rows):
    """Best-so-far is the running maximum; bands equal statistics.quantiles (inclusive = linear)."""
    curves = best_so_far(rows)
    for row, curve in zip(rows, curves):
        assert list(curve) == [max(row[: g + 1]) for g in range(len(row))]
    bands = curve_bands(curves)
    for g in range(curves.shape[1]):
        column = list(curves[:, g])
        assert bands.median[g] == pytest.approx(statistics.median(column))
        if len(column) > 1:
            q1, _, q3 = statistics.quantiles(column, n=4, method="inclusive")
            assert bands.q1[g] == pytest.approx(q1) and bands.q3[g] == pytest.approx(q3)
    assert np.all(bands.iqr >= 0)
