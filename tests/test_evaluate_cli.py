"""The ``evaluate`` command: table, JSON Lines out and in, stop on error, replay files."""

from __future__ import annotations

import io
import json
import os
import sys

import numpy as np
import pytest

from eval_helpers import JUNCTION, REFLEX, networks
from neurodrome.cli import main
from neurodrome.control.protocol import Layout
from neurodrome.evaluate import evaluate
from neurodrome.world import load_world

TRIALS = "2"


@pytest.fixture(scope="module")
def world():
    return load_world(JUNCTION)


def _json_lines(text: str) -> list[dict]:
    return [json.loads(line) for line in text.splitlines() if line.strip()]


def test_table_output(world, capsys):
    """The default output is a summary table with one row per controller and its fitness."""
    code = main(["evaluate", str(JUNCTION), "courier-memory", str(REFLEX), "--trials", TRIALS])
    out = capsys.readouterr().out
    expected = evaluate(world, ["courier-memory", str(REFLEX)], trials=2)
    assert code == 0
    header = [line for line in out.splitlines() if line.startswith("controller")]
    assert header and "fitness" in header[0]
    for r in expected:
        row = [line for line in out.splitlines() if line.startswith(r.controller + " ")]
        assert row and f"{r.fitness:.2f}" in row[-1]


def test_json_output(world, capsys):
    """--json writes one object per controller with controller, fitness, steps and trials."""
    code = main(["evaluate", str(JUNCTION), "courier-memory", str(REFLEX), "--trials", TRIALS, "--seed", "3", "--json"])
    lines = _json_lines(capsys.readouterr().out)
    expected = [r.to_dict() for r in evaluate(world, ["courier-memory", str(REFLEX)], seed=3, trials=2)]
    assert code == 0
    assert lines == json.loads(json.dumps(expected))
    for line in lines:
        assert {"controller", "fitness", "steps", "trials", "behaviour"} <= set(line)


def _stdin_text(nets: list[dict]) -> str:
    return "\n".join(
        [json.dumps(nets[0]), '{"format": "neurodrome-network", ', '"courier-memory"', "", "[3, 4]", json.dumps(nets[1])]
    ) + "\n"


def test_json_lines_on_stdin(world, capsys, monkeypatch):
    """A malformed line is reported by its number on stderr; every other line is still
    evaluated; one output line per input line, in order."""
    nets = networks(2, seed=6)
    monkeypatch.setattr(sys, "stdin", io.StringIO(_stdin_text(nets)))
    code = main(["evaluate", str(JUNCTION), "-", "--trials", TRIALS, "--seed", "2"])
    captured = capsys.readouterr()
    out = _json_lines(captured.out)
    assert code == 1  # the task ran, some inputs failed
    assert [o["line"] for o in out] == [1, 2, 3, 5, 6]
    assert "line 2" in captured.err and "line 5" in captured.err
    assert out[1]["fitness"] is None and "line 2" in out[1]["fault"]
    assert out[3]["fitness"] is None and "line 5" in out[3]["fault"]
    # positions in the stream seed the agents, bad lines included
    expected = evaluate(world, [nets[0], "courier-memory", nets[1]], seed=2, trials=2, agent_ids=[0, 2, 4])
    got = [out[0], out[2], out[4]]
    for o in got:
        o.pop("line")
    assert got == json.loads(json.dumps([r.to_dict() for r in expected]))


def test_invalid_network_line_reported_by_number(capsys, monkeypatch):
    """A well-formed line holding an invalid network is reported with its line number."""
    net = networks(1)[0]
    net["connections"][0]["target"] = "nowhere"
    monkeypatch.setattr(sys, "stdin", io.StringIO('"courier-memory"\n' + json.dumps(net) + "\n"))
    main(["evaluate", str(JUNCTION), "-", "--trials", "1"])
    captured = capsys.readouterr()
    out = _json_lines(captured.out)
    assert len(out) == 2 and out[0]["fault"] is None
    assert "line 2" in out[1]["fault"] and "nowhere" in out[1]["fault"]


def test_stop_on_error_exits_2(capsys, monkeypatch):
    """--stop-on-error: the first malformed line stops the command with exit status 2."""
    monkeypatch.setattr(sys, "stdin", io.StringIO(_stdin_text(networks(2))))
    code = main(["evaluate", str(JUNCTION), "-", "--trials", TRIALS, "--stop-on-error"])
    captured = capsys.readouterr()
    assert code == 2
    assert "line 2" in captured.err and "Traceback" not in captured.err
    assert captured.out == ""


def test_replay_file(world, tmp_path, capsys):
    """The replay loads without pickles and holds pose, rays, obs, zones, neuron outputs,
    weights and events consistent with the world, the network file and the results."""
    path = tmp_path / "run.npz"
    code = main(["evaluate", str(JUNCTION), "courier-memory", str(REFLEX), "--trials", TRIALS, "--seed", "5",
                 "--json", "--replay", str(path), "--replay-agents", "0,1"])
    results = _json_lines(capsys.readouterr().out)
    assert code == 0
    with np.load(path, allow_pickle=False) as data:
        arrays = {k: data[k] for k in data.files}
    layout = Layout.of(world)
    net = json.loads(REFLEX.read_text())
    n = len(net["neurons"])
    T = arrays["pose"].shape[0]
    assert str(arrays["format"]) == "neurodrome-replay"
    assert arrays["pose"].shape == (T, 2, 3)
    assert arrays["obs"].shape == (T, 2, layout.size)
    assert arrays["rays"].shape == (T, 2, len(world.robot.range_finders.angles_deg), 2)
    assert arrays["zones"].shape[:2] == (T, 2) and "home" in arrays["zone_names"].tolist()
    assert arrays["outputs"].shape == (T, 2, n) and arrays["weights"].shape == (T, 2, n, n)
    assert arrays["neuron_ids"][1].tolist() == [x["id"] for x in net["neurons"]]
    # fixed connections keep the file's weight at every step ([source j, target i])
    ids = [x["id"] for x in net["neurons"]]
    for conn in net["connections"]:
        if not conn.get("plastic"):
            column = arrays["weights"][:, 1, ids.index(conn["source"]), ids.index(conn["target"])]
            assert (column == np.float32(conn["weight"])).all()
    # the scripted agent has no neurons: its rows are padding
    assert (arrays["outputs"][:, 0] == 0).all()
    assert arrays["fitness"][-1].tolist() == [r["fitness"] for r in results]
    kinds = arrays["event_kind"].tolist()
    for a in range(2):
        ends = [k for k, who in zip(kinds, arrays["event_agent"].tolist()) if who == a and k == "trial-end"]
        assert len(ends) == int(TRIALS)
    assert arrays["agents"].tolist() == [0, 1]


def test_replay_written_atomically(tmp_path, capsys, monkeypatch):
    """A replay whose write fails leaves neither the file nor a temporary behind, and the
    command reports it as an error (exit 2)."""
    path = tmp_path / "run.npz"

    def failing_replace(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr("neurodrome.jsonio.os.replace", failing_replace)
    code = main(["evaluate", str(JUNCTION), "courier-memory", "--trials", "1", "--replay", str(path)])
    captured = capsys.readouterr()
    assert code == 2 and "disk full" in captured.err
    assert os.listdir(tmp_path) == []


def test_workers_equal_in_process(capsys):
    """--workers 2 prints exactly the JSON results of an in-process run."""
    args = ["evaluate", str(JUNCTION), "courier-memory", str(REFLEX), "eval_helpers:steady", "--trials", TRIALS, "--json"]
    assert main(args) == 0
    here = capsys.readouterr().out
    assert main(args + ["--workers", "2"]) == 0
    assert capsys.readouterr().out == here


def test_bad_options_exit_2(capsys):
    """A negative worker count and a bad replay agent list exit 2 with a message."""
    assert main(["evaluate", str(JUNCTION), "courier-memory", "--workers", "-1"]) == 2
    assert "--workers" in capsys.readouterr().err
    assert main(["evaluate", str(JUNCTION), "courier-memory", "--replay", "x.npz", "--replay-agents", "4"]) == 2
    assert "--replay-agents" in capsys.readouterr().err


def test_same_schedule_gives_every_controller_agent_0s_draws(capsys):
    """--same-schedule: each controller meets the restock trial of agent 0, checked against
    the evaluator run for agent 0 alone; without it agent k draws its own."""
    from pathlib import Path

    restock = str(Path(__file__).resolve().parents[1] / "worlds" / "clinic-junction-restock.json")
    args = ["evaluate", restock, *["courier-same-arm"] * 4, "--trials", "70", "--json", "--no-progress"]
    assert main(args + ["--same-schedule"]) == 0
    same = _json_lines(capsys.readouterr().out)
    assert main(args) == 0
    own = _json_lines(capsys.readouterr().out)
    (alone,) = evaluate(restock, ["courier-same-arm"], trials=70, agent_ids=[0])
    expected = [r.after_trial for r in alone.relocations]
    assert all([r["after_trial"] for r in line["relocations"]] == expected for line in same)
    assert len({tuple(r["after_trial"] for r in line["relocations"]) for line in own}) > 1
