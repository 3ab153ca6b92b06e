"""A study's runs side by side on shared workers: each run must equal the same run done
alone (every file of its run directory, the wall-time field eval_seconds aside), also after
an interruption and a resume.

The reference is outside the side-by-side machinery: every run done alone, one after
another, evaluated in this process (no workers, no threads, chunking of one).
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
from neurodrome.evolve.config import config_from_data
from neurodrome.evolve.run import Run, run_dirs
from neurodrome.evolve.study import GenerationDone, evolve

ROOT = Path(__file__).resolve().parents[1]
WORLD = str(ROOT / "worlds" / "clinic-junction.json")
#: 2 runs x 2 treatments; 16 genomes make two chunks per generation on 2 workers
STUDY = {"format": "neurodrome-evolve-config", "version": 1, "generations": 3, "population": 16, "seed": 7,
         "runs": 2, "treatments": ["modulated", "fixed"], "evaluation": {"trials": 2},
         "speciation": {"target_species": 2}}


def _config_file(tmp_path: Path, **changes) -> str:
    data = json.loads(json.dumps(STUDY))
    data.update(changes)
    path = tmp_path / "study.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return str(path)


def _log_without_times(run_dir: Path) -> list[dict]:
    lines = [json.loads(line) for line in (run_dir / "log.jsonl").read_text().splitlines()]
    for line in lines:
        line.pop("eval_seconds")
    return lines


def assert_same_runs(got: Path, expected: Path) -> None:
    """Every run directory under ``got`` holds what the same run under ``expected`` holds."""
    names = sorted(p.name for p in expected.iterdir())
    assert sorted(p.name for p in got.iterdir()) == names
    for name in names:
        files = sorted(p.name for p in (expected / name).iterdir())
        assert sorted(p.name for p in (got / name).iterdir()) == files, name
        assert _log_without_times(got / name) == _log_without_times(expected / name), name
        for f in files:
            if f != "log.jsonl":
                assert (got / name / f).read_bytes() == (expected / name / f).read_bytes(), f"{name}/{f}"


@pytest.fixture(scope="module")
def alone(tmp_path_factory) -> Path:
    """The study's four runs, each done alone in this process, one after another."""
    out = tmp_path_factory.mktemp("alone")
    config = config_from_data(STUDY, "test")
    for treatment, seed, run_dir in run_dirs(out, config):
        Run(WORLD, config, run_dir, treatment, seed).run()
    return out


def test_side_by_side_study_equals_runs_alone(tmp_path, alone, capsys):
    """2 runs x 2 treatments side by side on 2 workers: every run directory equals the run
    done alone; the display has one line per finished generation naming its run."""
    out = tmp_path / "study"
    assert main(["evolve", WORLD, "--config", _config_file(tmp_path), "-o", str(out), "--workers", "2"]) == 0
    assert_same_runs(out, alone)
    lines = [line for line in capsys.readouterr().err.splitlines() if " generation " in line]
    runs = {p.name for p in alone.iterdir()}
    assert len(lines) == 4 * 3
    assert sorted(line.split()[0] for line in lines) == sorted(runs) * 3 or \
        sorted(line.split()[0] for line in lines) == sorted(sorted(runs) * 3)
    assert lines[-1].split("runs done ")[1].startswith("4/4")
    # side by side: every run finished its first generation before any run finished its last
    first = max(k for run in runs for k, line in enumerate(lines) if line.startswith(run + " ") and "1/3" in line)
    last = min(k for run in runs for k, line in enumerate(lines) if line.startswith(run + " ") and "3/3" in line)
    assert first < last


def test_interrupted_study_resumes_bit_identically(tmp_path, alone):
    """Stop a side-by-side study after five finished generations (the progress callback
    raises KeyboardInterrupt, as Ctrl-C would): every reported generation is on disk; then
    --resume finishes every run, and every run equals the run done alone."""
    out = tmp_path / "study"
    config = config_from_data(STUDY, "test")
    seen: list[GenerationDone] = []

    def progress(ev: GenerationDone) -> None:
        seen.append(ev)
        if len(seen) == 5:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        evolve(WORLD, config, out, workers=2, progress=progress)
    done = {p.name: json.loads((p / "checkpoint.json").read_text())["generations_done"]
            for p in out.iterdir() if (p / "checkpoint.json").is_file()}
    for ev in seen:  # every finished generation kept
        assert done[ev.name] >= ev.generation + 1
        assert len((ev.run_dir / "log.jsonl").read_text().splitlines()) == done[ev.name]
    assert sum(done.values()) < 4 * 3  # the study really stopped part-way
    assert main(["evolve", WORLD, "--config", _config_file(tmp_path), "-o", str(out), "--workers", "2",
                 "--resume", "--quiet"]) == 0
    assert_same_runs(out, alone)


def test_resume_of_a_finished_study_changes_nothing(tmp_path, alone, capsys):
    """--resume on a study whose runs are all finished evaluates nothing and leaves the files."""
    out = tmp_path / "study"
    config = _config_file(tmp_path)
    assert main(["evolve", WORLD, "--config", config, "-o", str(out), "--quiet"]) == 0
    before = {p: p.read_bytes() for p in out.rglob("*") if p.is_file()}
    assert main(["evolve", WORLD, "--config", config, "-o", str(out), "--resume", "--workers", "2"]) == 0
    assert {p: p.read_bytes() for p in out.rglob("*") if p.is_file()} == before
    assert "4 already finished" in capsys.readouterr().err
    assert_same_runs(out, alone)


def test_one_at_a_time_equals_alone(tmp_path, alone):
    """--side-by-side 1 on 2 workers: the runs go one after another, same files."""
    out = tmp_path / "study"
    assert main(["evolve", WORLD, "--config", _config_file(tmp_path), "-o", str(out), "--workers", "2",
                 "--side-by-side", "1", "--quiet"]) == 0
    assert_same_runs(out, alone)


@pytest.mark.parametrize("option, value", [("--side-by-side", "-1"), ("--workers", "-2")])
def test_bad_study_options_are_clear_errors(tmp_path, capsys, option, value):
    """A negative run or worker count is a one-line error naming the option, exit 2."""
    out = tmp_path / "study"
    assert main(["evolve", WORLD, "--config", _config_file(tmp_path), "-o", str(out), option, value]) == 2
    err = capsys.readouterr().err
    assert option in err and "Traceback" not in err
    assert not out.exists()


@pytest.mark.slow
def test_terminated_study_resumes_bit_identically(tmp_path, alone):
    """SIGTERM to `neurodrome evolve` while four runs go side by side: exit 130 without a
    traceback, then --resume gives every run exactly as done alone."""
    out = tmp_path / "study"
    config = _config_file(tmp_path, generations=3)
    cmd = [sys.executable, "-m", "neurodrome", "evolve", WORLD, "--config", config, "-o", str(out), "--workers", "2"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)

    def generations_done() -> int:
        total = 0
        for p in out.glob("*/checkpoint.json"):
            try:
                total += json.loads(p.read_text())["generations_done"]
            except (ValueError, KeyError):
                pass
        return total

    while proc.poll() is None and generations_done() < 2:
        time.sleep(0.05)
    os.kill(proc.pid, signal.SIGTERM)
    _, err = proc.communicate(timeout=120)
    if proc.returncode == 0:  # pragma: no cover - the study finished before the signal came
        pytest.skip("the study finished before SIGTERM arrived")
    assert proc.returncode == 130, err
    assert "interrupted" in err and "Traceback" not in err
    assert generations_done() < 4 * 3
    assert main(["evolve", WORLD, "--config", config, "-o", str(out), "--workers", "2", "--resume", "--quiet"]) == 0
    assert_same_runs(out, alone)


def test_study_on_dask_equals_runs_alone(tmp_path, alone):
    """The same study side by side on a Dask cluster (in-process threads, reached by its
    address as --scheduler does): every run equals the run done alone."""
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster:
        out = tmp_path / "study"
        assert main(["evolve", WORLD, "--config", _config_file(tmp_path), "-o", str(out),
                     "--scheduler", cluster.scheduler_address, "--quiet"]) == 0
    assert_same_runs(out, alone)
