"""Faults: a worker process killed mid-evaluation, controllers that raise or emit NaN."""

from __future__ import annotations

import os

import pytest

from eval_helpers import JUNCTION, MARKER_ENV, PARENT_ENV, ResetFails, networks
from neurodrome.evaluate import evaluate
from neurodrome.executors import LocalPool
from neurodrome.world import load_world

TRIALS = 2


@pytest.fixture(scope="module")
def world():
    return load_world(JUNCTION)


def test_killed_worker_costs_no_results(world, tmp_path, monkeypatch):
    """A worker killed by SIGKILL mid-chunk: its chunks are re-run and the results equal
    an undisturbed in-process run exactly."""
    marker = tmp_path / "killed"
    monkeypatch.setenv(MARKER_ENV, str(marker))
    monkeypatch.setenv(PARENT_ENV, str(os.getpid()))
    nets = networks(3, seed=21)
    population = nets[:2] + ["eval_helpers:kill_once"] + nets[2:]
    marker.write_text("undisturbed run")  # the marker present: kill_once never kills
    undisturbed = [r.to_dict() for r in evaluate(world, population, seed=4, trials=TRIALS)]
    marker.unlink()
    with LocalPool(1) as pool:
        got = evaluate(world, population, seed=4, trials=TRIALS, executor=pool, chunk_size=2)
        rebuilds = pool.rebuilds
    assert marker.exists() and marker.read_text() != "undisturbed run"  # a worker really died
    assert rebuilds >= 1
    assert [r.to_dict() for r in got] == undisturbed
    assert all(r.fault is None for r in got)


@pytest.mark.parametrize(
    "source, reason",
    [
        ("eval_helpers:raises_later", "controller raised RuntimeError: sensor table exhausted"),
        ("eval_helpers:nan_later", "non-finite wheel command"),
        ("eval_helpers:broken_factory", "bad controller: KeyError"),
        (ResetFails, "reset_lifetime() raised OSError: calibration file missing"),
    ],
)
def test_faulty_controller_fails_only_its_own(world, source, reason):
    """A controller that raises, emits NaN, cannot be built or fails its reset faults only
    its own result, with the reason recorded; its neighbours are unchanged."""
    good = networks(2, seed=8)
    results = evaluate(world, [good[0], source, good[1]], seed=3, trials=TRIALS)
    assert results[1].fault is not None and reason in results[1].fault
    assert results[0].fault is None and results[2].fault is None
    alone = evaluate(world, good, seed=3, trials=TRIALS, agent_ids=[0, 2])
    assert [results[0].to_dict(), results[2].to_dict()] == [r.to_dict() for r in alone]


def test_nan_fault_stops_at_that_step(world):
    """The NaN controller's result records the steps it lived before the fault (14 good
    steps, the 15th emits NaN) and no later trials."""
    (result,) = evaluate(world, ["eval_helpers:nan_later"], seed=3, trials=TRIALS)
    assert result.steps == 14
    assert len(result.trials) == 0


def test_faulty_controller_on_workers(world):
    """On worker processes a raising controller also fails only its own result."""
    good = networks(2, seed=8)
    population = [good[0], "eval_helpers:raises_later", good[1]]
    here = [r.to_dict() for r in evaluate(world, population, seed=3, trials=TRIALS)]
    with LocalPool(1) as pool:
        there = [r.to_dict() for r in evaluate(world, population, seed=3, trials=TRIALS, executor=pool, chunk_size=1)]
    assert there == here
    assert "RuntimeError" in there[1]["fault"]
