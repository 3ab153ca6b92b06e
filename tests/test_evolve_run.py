"""The run loop and the ``evolve`` command: files per generation, exact resume, config errors, reports.

What counts as correct comes from outside the run loop: the run-directory reader
(:mod:`neurodrome.evolve.rundir`), the network validator, and the evaluator itself; resuming
must reproduce an undisturbed run bit for bit (common practice for checkpointed evolvers).
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from neurodrome.cli import main
from neurodrome.control.spec import load_network
from neurodrome.evaluate import evaluate
from neurodrome.evolve.report import make_report
from neurodrome.evolve.rundir import read_run

ROOT = Path(__file__).resolve().parents[1]
WORLD = str(ROOT / "worlds" / "clinic-junction.json")
TINY = {"format": "neurodrome-evolve-config", "version": 1, "generations": 4, "population": 6,
        "evaluation": {"trials": 2}, "speciation": {"target_species": 2}}


def _config(tmp_path: Path, **changes) -> str:
    data = json.loads(json.dumps(TINY))
    data.update(changes)
    path = tmp_path / "config.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return str(path)


def _log_without_times(run_dir: Path) -> list[dict]:
    """Log lines minus eval_seconds, the one field that is wall time."""
    lines = [json.loads(line) for line in (run_dir / "log.jsonl").read_text().splitlines()]
    for line in lines:
        line.pop("eval_seconds")
    return lines


def test_tiny_run_writes_log_best_and_checkpoint(tmp_path, capsys):
    """A 4-generation run leaves a readable log, a valid champion network and a checkpoint."""
    out = tmp_path / "run"
    assert main(["evolve", WORLD, "--config", _config(tmp_path), "-o", str(out), "--seed", "3"]) == 0
    err = capsys.readouterr().err
    assert "generation 4/4" in err and "median" in err
    run = read_run(out)
    assert run.generations == 4 and run.header.seed == 3 and run.header.treatment == "modulated"
    assert all(run.best_so_far[k] == max(run.best[:k + 1]) for k in range(4))
    spec = load_network(out / "best.net.json")
    (result,) = evaluate(WORLD, [str(out / "best.net.json")], trials=2, seed=0)
    assert result.fault is None and spec.name
    checkpoint = json.loads((out / "checkpoint.json").read_text())
    assert checkpoint["generations_done"] == 4
    assert json.loads((out / "champion.genome.json").read_text())["fitness"] == run.best_so_far[-1]


def test_resume_continues_bit_identically(tmp_path):
    """Run 4 generations at once vs 2, stop, a cut-off log line, resume to 4: same log, champion, checkpoint."""
    config = _config(tmp_path, evaluation={"trials": 2, "seed": "per-generation"})
    whole, split = tmp_path / "whole", tmp_path / "split"
    assert main(["evolve", WORLD, "--config", config, "-o", str(whole), "--quiet"]) == 0
    assert main(["evolve", WORLD, "--config", config, "-o", str(split), "--generations", "2", "--quiet"]) == 0
    with open(split / "log.jsonl", "a") as fh:  # a kill while writing the next generation's line
        fh.write('{"generation": 2, "be')
    assert main(["evolve", WORLD, "--config", config, "-o", str(split), "--resume", "--quiet"]) == 0
    assert _log_without_times(split) == _log_without_times(whole)
    for name in ("best.net.json", "checkpoint.json", "champion.genome.json"):
        assert (split / name).read_bytes() == (whole / name).read_bytes(), name
    assert read_run(split).generations == 4


@pytest.mark.slow
def test_killed_process_resumes_bit_identically(tmp_path):
    """SIGKILL a running `neurodrome evolve` after a checkpoint, resume: identical to an undisturbed run."""
    config = _config(tmp_path, generations=6)
    whole, killed = tmp_path / "whole", tmp_path / "killed"
    assert main(["evolve", WORLD, "--config", config, "-o", str(whole), "--quiet"]) == 0
    cmd = [sys.executable, "-m", "neurodrome", "evolve", WORLD, "--config", config, "-o", str(killed), "--quiet"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    checkpoint = killed / "checkpoint.json"
    while proc.poll() is None:
        if checkpoint.is_file() and json.loads(checkpoint.read_text() or "{}").get("generations_done", 0) >= 2:
            os.kill(proc.pid, signal.SIGKILL)
            break
        time.sleep(0.05)
    proc.wait()
    assert main(["evolve", WORLD, "--config", config, "-o", str(killed), "--resume", "--quiet"]) == 0
    assert _log_without_times(killed) == _log_without_times(whole)
    assert (killed / "best.net.json").read_bytes() == (whole / "best.net.json").read_bytes()


@pytest.mark.parametrize("change, field", [
    ({"population": 1}, "$.population"),
    ({"selection": {"method": "roulette"}}, "$.selection.method"),
    ({"mutation": {"add_neuron": 1.5}}, "$.mutation.add_neuron"),
    ({"treatments": ["modulated", "modulated"]}, "treatment"),
    ({"objective": {"kind": "novelty", "k": 0}}, "$.objective.k"),
    ({"speciation": {"target": 3}}, "$.speciation.target"),
    ({"generations": 2.5}, "$.generations"),
    ({"evaluation": {"repeats": 0}}, "$.evaluation.repeats"),
])
def test_bad_config_is_a_clear_error(tmp_path, capsys, change, field):
    """A bad configuration value names its field and exits with status 2, no traceback (project rule)."""
    code = main(["evolve", WORLD, "--config", _config(tmp_path, **change), "-o", str(tmp_path / "r")])
    err = capsys.readouterr().err
    assert code == 2
    assert field in err and "Traceback" not in err
    assert not (tmp_path / "r" / "log.jsonl").exists()


def test_command_line_misuse_is_a_clear_error(tmp_path, capsys):
    """Unknown treatment, malformed JSON, an occupied run directory, a changed config on resume: exit 2."""
    config = _config(tmp_path)
    out = str(tmp_path / "r")
    assert main(["evolve", WORLD, "--config", config, "-o", out, "--treatments", "hebbian"]) == 2
    bad = tmp_path / "bad.json"
    bad.write_text('{"generations": 3,}')
    assert main(["evolve", WORLD, "--config", str(bad), "-o", out]) == 2
    assert "bad.json:1:" in capsys.readouterr().err
    assert main(["evolve", WORLD, "--config", config, "-o", out, "--generations", "1", "--quiet"]) == 0
    assert main(["evolve", WORLD, "--config", config, "-o", out, "--generations", "1", "--quiet"]) == 2
    assert main(["evolve", WORLD, "--config", config, "-o", out, "--population", "8", "--resume"]) == 2
    err = capsys.readouterr().err
    assert "--resume" in err and "Traceback" not in err


def test_repeated_runs_feed_the_report(tmp_path):
    """--runs 2 over two treatments writes four run directories that make_report compares."""
    out = tmp_path / "study"
    assert main(["evolve", WORLD, "--config", _config(tmp_path, generations=2), "-o", str(out), "--runs", "2",
                 "--treatments", "modulated,fixed", "--seed", "10", "--quiet"]) == 0
    assert sorted(p.name for p in out.iterdir()) == ["fixed-10", "fixed-11", "modulated-10", "modulated-11"]
    report = make_report([out], tmp_path / "report")
    assert set(report.treatments) == {"modulated", "fixed"}
    assert report.generations == 2 and len(report.comparisons) >= 1
    assert (tmp_path / "report" / "summary.md").is_file()


def test_repeats_average_lifetimes_with_their_own_draws(tmp_path):
    """With evaluation.repeats = 2 a genome's fitness is the mean of two lifetimes, agent
    ids 0 and 1 of the generation's seed; checked against the evaluator run directly."""
    world = str(ROOT / "assets" / "clinic-junction-restock-wider.json")
    config = _config(tmp_path, generations=1, evaluation={"trials": 8, "repeats": 2})
    out = tmp_path / "run"
    assert main(["evolve", world, "--config", config, "-o", str(out), "--quiet"]) == 0
    (line,) = [json.loads(x) for x in (out / "log.jsonl").read_text().splitlines()]
    champion = str(out / "best.net.json")
    lives = evaluate(world, [champion, champion], trials=8, seed=line["eval_seed"], agent_ids=[0, 1])
    assert line["best"] == pytest.approx((lives[0].fitness + lives[1].fitness) / 2, abs=1e-12)
