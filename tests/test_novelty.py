"""Behaviour distances, sparseness and the novelty archive (Lehman & Stanley 2011)."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial import distance

from neurodrome.errors import NeurodromeError
from neurodrome.evolve.novelty import NoveltyArchive, behaviour_distances, sparseness


def _outcomes(rng: np.random.Generator, n: int, trials: int) -> np.ndarray:
    # site indices 0..2, or -1 for a crash / no site
    return rng.integers(-1, 3, size=(n, trials))


def _brute_sparseness(pop: np.ndarray, archive: np.ndarray, metric: str, k: int) -> np.ndarray:
    """Reference: scipy cdist, then for each row sort the others and average the k smallest."""
    width = int(np.prod(pop.shape[1:]))
    flat_pop = pop.reshape(len(pop), width).astype(float)
    flat_arch = archive.reshape(len(archive), width).astype(float)
    scale = flat_pop.shape[1] if metric == "hamming" else 1.0  # scipy's hamming is a fraction
    out = []
    for i in range(len(pop)):
        others = np.delete(flat_pop, i, axis=0)
        pool = np.vstack([others, flat_arch]) if len(flat_arch) else others
        if len(pool) == 0:
            out.append(0.0)
            continue
        d = np.sort(distance.cdist(flat_pop[i : i + 1], pool, metric=metric)[0] * scale)
        out.append(d[:k].mean())
    return np.array(out)


def test_hamming_matches_scipy():
    """Hamming distance counts differing trials: scipy's hamming fraction times T."""
    rng = np.random.default_rng(3)
    a, b = _outcomes(rng, 9, 7), _outcomes(rng, 5, 7)
    np.testing.assert_allclose(behaviour_distances(a, b, "hamming"), distance.cdist(a, b, "hamming") * 7)


def test_euclidean_matches_scipy():
    """Euclidean distance over flattened (T, 2) end positions equals scipy cdist on the flat vectors."""
    rng = np.random.default_rng(4)
    a, b = rng.normal(size=(300, 4, 2)), rng.normal(size=(11, 4, 2))  # 300 > one chunk of rows
    expected = distance.cdist(a.reshape(300, -1), b.reshape(11, -1), "euclidean")
    np.testing.assert_allclose(behaviour_distances(a, b, "euclidean"), expected, rtol=1e-12, atol=1e-12)


@settings(max_examples=60, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(1, 30), archive=st.integers(0, 25),
       trials=st.integers(1, 8), k=st.integers(1, 20), metric=st.sampled_from(["hamming", "euclidean"]))
def test_sparseness_matches_brute_force(seed, n, archive, trials, k, metric):
    """Sparseness equals the mean of the k nearest (scipy distances, self excluded, twins kept)."""
    rng = np.random.default_rng(seed)
    if metric == "hamming":
        pop, arch = _outcomes(rng, n, trials), _outcomes(rng, archive, trials)
    else:
        pop, arch = rng.normal(size=(n, trials, 2)), rng.normal(size=(archive, trials, 2))
    ours = sparseness(pop, arch, metric=metric, k=k)
    np.testing.assert_allclose(ours, _brute_sparseness(pop, arch, metric, k), rtol=1e-10, atol=1e-12)


def test_identical_twins_are_not_novel():
    """Two identical behaviours are each other's nearest neighbour at distance 0 (k = 1)."""
    pop = np.array([[0, 1, 1], [0, 1, 1], [2, 2, 2]])
    assert list(sparseness(pop, None, metric="hamming", k=1)[:2]) == [0.0, 0.0]


def test_archive_adds_above_threshold_and_raises_it():
    """Behaviours above the threshold join; more than four in a generation raise it by 20 % [memory]."""
    archive = NoveltyArchive("hamming", threshold=1.0)
    pop = np.arange(24).reshape(6, 4)
    added = archive.update(pop, np.array([0.5, 2, 3, 4, 5, 6]))
    assert list(added) == [1, 2, 3, 4, 5]
    assert len(archive) == 5
    np.testing.assert_array_equal(archive.behaviours, pop[1:])
    assert archive.threshold == pytest.approx(1.0 * archive.raise_factor)


def test_archive_lowers_threshold_after_stalled_generations():
    """After lower_after generations with no addition the threshold drops by 5 % [memory]."""
    archive = NoveltyArchive("euclidean", threshold=10.0, lower_after=3)
    pop = np.zeros((4, 2, 2))
    for _ in range(2):
        archive.update(pop, np.zeros(4))
    assert archive.threshold == 10.0
    archive.update(pop, np.zeros(4))
    assert archive.threshold == pytest.approx(10.0 * archive.lower_factor)
    assert archive.history == [0, 0, 0] and len(archive) == 0


def test_archive_state_round_trips_through_json():
    """state() -> JSON -> from_state() gives the same archive and the same future sparseness."""
    rng = np.random.default_rng(5)
    archive = NoveltyArchive("euclidean", threshold=0.3)
    pop = rng.normal(size=(20, 3, 2))
    archive.update(pop, archive.sparseness(pop))
    copy = NoveltyArchive.from_state(json.loads(json.dumps(archive.state())))
    assert copy.threshold == archive.threshold and copy.history == archive.history
    probe = rng.normal(size=(8, 3, 2))
    np.testing.assert_array_equal(copy.sparseness(probe), archive.sparseness(probe))


def test_bad_behaviours_are_refused():
    """Mismatched trial counts, float outcome codes, NaN positions and k < 1 raise the project's error."""
    with pytest.raises(NeurodromeError):
        behaviour_distances(np.zeros((2, 3), int), np.zeros((2, 4), int), "hamming")
    with pytest.raises(NeurodromeError):
        behaviour_distances(np.zeros((2, 3)) + 0.5, np.zeros((2, 3), int), "hamming")
    with pytest.raises(NeurodromeError):
        sparseness(np.full((2, 1, 2), np.nan), None, metric="euclidean")
    with pytest.raises(NeurodromeError):
        sparseness(np.zeros((2, 3), int), None, metric="hamming", k=0)
    with pytest.raises(NeurodromeError):
        NoveltyArchive("hamming", threshold=-1.0)
