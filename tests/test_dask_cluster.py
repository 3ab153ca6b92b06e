"""Evaluation on Dask: a real local cluster of worker processes on loopback, through a
Client and through the scheduler address; results must equal a local run exactly."""

from __future__ import annotations

import pytest

from eval_helpers import JUNCTION, REFLEX, networks
from neurodrome.evaluate import evaluate
from neurodrome.world import load_world

distributed = pytest.importorskip("distributed")

TRIALS = 2


@pytest.fixture(scope="module")
def world():
    return load_world(JUNCTION)


@pytest.fixture(scope="module")
def population():
    nets = networks(6, seed=13)
    return nets[:3] + ["courier-memory", str(REFLEX)] + nets[3:]


@pytest.fixture(scope="module")
def local(world, population):
    return [r.to_dict() for r in evaluate(world, population, seed=6, trials=TRIALS)]


def test_in_process_dask_client_equals_local(world, population, local):
    """A Dask client on in-process threads runs the same chunks to the same results."""
    with distributed.Client(processes=False, n_workers=1, threads_per_worker=2, dashboard_address=None) as client:
        got = evaluate(world, population, seed=6, trials=TRIALS, executor=client, chunk_size=3)
        assert client.status == "running"  # a caller's client stays open
    assert [r.to_dict() for r in got] == local


@pytest.fixture(scope="module")
def cluster():
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None
    ) as cluster:
        yield cluster


@pytest.mark.slow
def test_cluster_client_equals_local(world, population, local, cluster):
    """Two worker processes behind a scheduler on loopback, reached through a Client."""
    with distributed.Client(cluster) as client:
        got = evaluate(world, population, seed=6, trials=TRIALS, executor=client)
        one_by_one = evaluate(world, population, seed=6, trials=TRIALS, executor=client, chunk_size=1)
    assert [r.to_dict() for r in got] == local
    assert [r.to_dict() for r in one_by_one] == local


@pytest.mark.slow
def test_cluster_address_equals_local(world, population, local, cluster):
    """The same cluster reached by its scheduler address string (as --scheduler does)."""
    got = evaluate(world, population, seed=6, trials=TRIALS, executor=cluster.scheduler_address)
    assert [r.to_dict() for r in got] == local


@pytest.mark.slow
def test_cli_scheduler_equals_local(cluster, capsys):
    """`neurodrome evaluate --scheduler ADDRESS --json` prints what the local run prints."""
    from neurodrome.cli import main

    args = ["evaluate", str(JUNCTION), "courier-memory", str(REFLEX), "--trials", str(TRIALS), "--json"]
    assert main(args) == 0
    here = capsys.readouterr().out
    assert main(args + ["--scheduler", cluster.scheduler_address]) == 0
    assert capsys.readouterr().out == here
