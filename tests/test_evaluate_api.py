"""The evaluation API: order, bit-identity across executors and chunkings, sources."""

from __future__ import annotations

import concurrent.futures as cf
import json
import multiprocessing
import subprocess
import sys

import pytest

from eval_helpers import JUNCTION, REFLEX, networks, steady
from neurodrome.control.protocol import PerAgentAdapter
from neurodrome.errors import NeurodromeError
from neurodrome.evaluate import NotPortableError, evaluate, plan_chunks
from neurodrome.executors import LocalPool
from neurodrome.sim.arena import MAX_AGENTS
from neurodrome.sim.task import CRASHED, NO_SITE
from neurodrome.world import load_world

TRIALS = 2


@pytest.fixture(scope="module")
def world():
    return load_world(JUNCTION)


@pytest.fixture(scope="module")
def population():
    """Mixed sources: network dicts, a bundled agent, a network file, module:attribute."""
    nets = networks(5, seed=3)
    return nets[:2] + ["courier-memory"] + nets[2:4] + [str(REFLEX), "eval_helpers:steady"] + nets[4:]


@pytest.fixture(scope="module")
def reference(world, population):
    return [r.to_dict() for r in evaluate(world, population, seed=7, trials=TRIALS)]


@pytest.fixture(scope="module")
def pool2():
    with LocalPool(2) as pool:
        yield pool


def test_results_in_input_order(world, population, reference):
    """One result per controller, in input order, carrying its label and agent index."""
    expected = [p["name"] if isinstance(p, dict) else p for p in population]
    assert [r["controller"] for r in reference] == expected
    assert [r["agent"] for r in reference] == list(range(len(population)))


@pytest.mark.parametrize("chunk_size", [1, 3, 100])
def test_chunking_in_process_is_invisible(world, population, reference, chunk_size):
    """Results are bit-identical whatever the chunk size (reproducibility: common practice)."""
    got = evaluate(world, population, seed=7, trials=TRIALS, chunk_size=chunk_size)
    assert [r.to_dict() for r in got] == reference


def test_local_pool_two_workers_bit_identical(world, population, reference, pool2):
    """A 2-worker LocalPool, default and 1-agent chunks, gives the in-process results exactly."""
    for chunk_size in (None, 1):
        got = evaluate(world, population, seed=7, trials=TRIALS, executor=pool2, chunk_size=chunk_size)
        assert [r.to_dict() for r in got] == reference


def test_one_worker_pool_and_plain_executor_bit_identical(world, population, reference):
    """A 1-worker LocalPool and a plain concurrent.futures.ProcessPoolExecutor agree exactly."""
    with LocalPool(1) as pool:
        got = evaluate(world, population, seed=7, trials=TRIALS, executor=pool)
    assert [r.to_dict() for r in got] == reference
    with cf.ProcessPoolExecutor(2, mp_context=multiprocessing.get_context("fork")) as ex:
        got = evaluate(world, population, seed=7, trials=TRIALS, executor=ex, chunk_size=2)
    assert [r.to_dict() for r in got] == reference


def test_dict_equals_file(world, tmp_path):
    """An in-memory network description evaluates exactly like the same network in a file."""
    net = networks(1, seed=11)[0]
    path = tmp_path / "net.json"
    path.write_text(json.dumps(net))
    a, b = evaluate(world, [net, str(path)], seed=2, trials=TRIALS, agent_ids=[4, 4])
    assert a.controller == net["name"]
    assert (a.fitness, a.trials, a.steps) == (b.fitness, b.trials, b.steps)


def test_python_objects_run_in_process(world):
    """A factory function, a policy object and 'module:attribute' naming that factory agree."""
    by_name, by_factory, by_object = evaluate(
        world, ["eval_helpers:steady", steady, PerAgentAdapter(steady(None), "steady")], seed=5, trials=TRIALS, agent_ids=[1, 1, 1]
    )
    assert by_name.fault is None
    assert by_factory.to_dict()["trials"] == by_name.to_dict()["trials"] == by_object.to_dict()["trials"]


def test_python_objects_refused_for_workers(world, pool2):
    """Python objects sent to worker processes give a clear error naming the position."""
    with pytest.raises(NotPortableError) as info:
        evaluate(world, ["courier-memory", steady], executor=pool2)
    assert isinstance(info.value, NeurodromeError)
    assert "controllers[1]" in info.value.render() and "workers=1" in info.value.render()


def test_bad_source_fails_only_its_own(world):
    """An invalid network and an unknown name fail their own results; others are unchanged."""
    good = networks(2, seed=5)
    broken = json.loads(json.dumps(good[0]))
    broken["neurons"] = [n for n in broken["neurons"] if n.get("wheel") != "left"]
    results = evaluate(world, [good[0], broken, "no-such-rover", good[1]], seed=9, trials=TRIALS)
    assert results[1].fitness is None and "wheel 'left'" in results[1].fault
    assert results[2].fitness is None and "no-such-rover" in results[2].fault
    alone = evaluate(world, [good[0], good[1]], seed=9, trials=TRIALS, agent_ids=[0, 3])
    assert [results[0].to_dict(), results[3].to_dict()] == [r.to_dict() for r in alone]


def test_behaviour_descriptors(world, reference):
    """Every result has per-trial outcomes and end positions, coded as sim/task.py defines."""
    sites = [s.name for s in world.sites]
    for r in reference:
        beh = r["behaviour"]
        assert len(beh["outcomes"]) == len(beh["end_positions"]) == len(r["trials"]) == TRIALS
        for code, end, trial in zip(beh["outcomes"], beh["end_positions"], r["trials"]):
            if trial["site"] is not None:
                assert code == sites.index(trial["site"])
            else:
                assert code == (CRASHED if trial["crashed"] else NO_SITE)
            assert end == list(trial["end_position"]) and len(end) == 2


def test_plan_chunks_covers_population():
    """Chunks are contiguous, cover 0..n-1 once, respect MAX_AGENTS and a floor size."""
    for n, workers in [(1, 4), (300, 2), (5000, 2), (40, 8)]:
        chunks = plan_chunks(n, workers)
        assert [k for c in chunks for k in c] == list(range(n))
        assert all(len(c) <= MAX_AGENTS for c in chunks)
        assert all(len(c) >= min(n, 8) for c in chunks[:-1])


def test_bad_arguments_raise_project_errors(world):
    """Zero trials or a negative seed raise the project's error family."""
    with pytest.raises(NeurodromeError):
        evaluate(world, ["courier-memory"], trials=0)
    with pytest.raises(NeurodromeError):
        evaluate(world, ["courier-memory"], seed=-1)


def test_core_does_not_import_dask():
    """Importing the evaluation API leaves Dask unloaded (project rule: optional dependency)."""
    code = "import sys, neurodrome.evaluate, neurodrome.executors; print('distributed' in sys.modules or 'dask' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
