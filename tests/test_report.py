"""Experiment reports from run directories: files, hand-computed values, bad input.

All run data here is invented demo data: courier-rover runs in a clinic's service
corridors, with made-up fitness numbers chosen so results can be computed by hand.
"""

from __future__ import annotations

import csv
import json
import sys
from pathlib import Path

import pytest

from neurodrome.cli import main
from neurodrome.errors import MissingExtraError, RunFileError
from neurodrome.evolve.report import make_report
from neurodrome.evolve.rundir import append_log_line, log_line, read_run, write_run_header

WORLD = "clinic-corridors-relocating.json"


def _run(root: Path, treatment: str, seed: int, best: list[float]) -> Path:
    """Write one invented run whose per-generation best is ``best``."""
    run_dir = root / f"{treatment}-{seed}"
    run_dir.mkdir(parents=True)
    write_run_header(run_dir, treatment=treatment, seed=seed, world=WORLD, config={"population": 20})
    so_far = float("-inf")
    for g, value in enumerate(best):
        so_far = max(so_far, value)
        append_log_line(run_dir, log_line(g, best=value, median=value / 2, mean=value / 2, species=3,
                                          eval_seconds=0.5, best_so_far=so_far))
    return run_dir


@pytest.fixture
def demo(tmp_path: Path) -> list[Path]:
    """Two treatments of three runs, four generations; final best-so-far 5, 7, 9 vs 1, 2, 3."""
    root = tmp_path / "runs"
    return [
        _run(root, "plastic", 1, [1, 3, 2, 5]),
        _run(root, "plastic", 2, [2, 7, 4, 6]),
        _run(root, "plastic", 3, [0, 4, 9, 8]),
        _run(root, "fixed", 1, [0, 1, 1, 1]),
        _run(root, "fixed", 2, [2, 1, 0, 1]),
        _run(root, "fixed", 3, [1, 3, 2, 0]),
    ]


def _rows(path: Path) -> list[dict[str, str]]:
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def test_report_files_and_final_table(demo, tmp_path):
    """Final medians/quartiles match hand computation (linear quartiles: [5, 7, 9] -> 6, 7, 8)."""
    report = make_report(demo, tmp_path / "out")
    for name in ("plot", "final_values", "runs", "comparisons", "summary"):
        assert report.files[name].is_file()
    rows = {r["treatment"]: r for r in _rows(tmp_path / "out" / "final_values.csv")}
    assert list(rows) == ["plastic", "fixed"]  # order of first appearance
    plastic, fixed = rows["plastic"], rows["fixed"]
    assert [float(plastic[k]) for k in ("median", "q1", "q3", "min", "max", "mean")] == [7, 6, 8, 5, 9, 7]
    # fixed best-so-far finals: max of each run = 1, 2, 3
    assert [float(fixed[k]) for k in ("median", "q1", "q3", "min", "max", "mean")] == [2, 1.5, 2.5, 1, 3, 2]
    assert [float(r["final_best_so_far"]) for r in _rows(tmp_path / "out" / "runs.csv")] == [5, 7, 9, 1, 2, 3]


def test_report_comparisons_by_hand(demo, tmp_path):
    """Plastic beats fixed in all 9 pairs: U = 9, A12 = 1, exact p = 2 / C(6, 3) = 0.1 (textbook)."""
    make_report(demo, tmp_path / "out", checkpoints=[1])
    rows = _rows(tmp_path / "out" / "comparisons.csv")
    assert [int(r["generation"]) for r in rows] == [1, 3]
    final = rows[1]
    assert (final["first"], final["second"], final["method"]) == ("plastic", "fixed", "exact")
    assert float(final["u"]) == 9 and float(final["a12"]) == 1.0
    assert float(final["p"]) == pytest.approx(0.1, rel=1e-12)
    # generation 1 best-so-far: plastic 3, 7, 4; fixed 1, 2, 3 -> tie at 3, so the tie-corrected test
    early = rows[0]
    assert early["method"] == "asymptotic" and float(early["u"]) == 8.5


def test_summary_and_plot(demo, tmp_path):
    """summary.md holds the tables and links the plot; the plot is a real PNG."""
    make_report(demo, tmp_path / "out")
    summary = (tmp_path / "out" / "summary.md").read_text()
    assert "![" in summary and "best_so_far.png" in summary
    assert "| plastic | 3 | 7 | 6 | 8 | 5 | 9 | 7 |" in summary
    png = (tmp_path / "out" / "best_so_far.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n" and len(png) > 10_000


def test_folder_of_runs_and_cli(demo, tmp_path, capsys):
    """A folder of run directories stands for its runs; the CLI exits 0 and prints JSON on request."""
    status = main(["report", str(tmp_path / "runs"), "-o", str(tmp_path / "out"), "--checkpoints", "0,2", "--json"])
    assert status == 0
    payload = json.loads(capsys.readouterr().out)
    assert payload["checkpoints"] == [0, 2, 3]
    assert {f["treatment"] for f in payload["finals"]} == {"plastic", "fixed"}


def test_run_files_round_trip(demo):
    """What the writer helpers produce reads back as the same numbers."""
    run = read_run(demo[1])
    assert run.header.seed == 2 and run.generations == 4
    assert list(run.best) == [2, 7, 4, 6] and list(run.best_so_far) == [2, 7, 7, 7]


def _corrupt_line(run_dir: Path, number: int, text: str) -> None:
    lines = (run_dir / "log.jsonl").read_text().splitlines()
    lines[number] = text
    (run_dir / "log.jsonl").write_text("\n".join(lines) + "\n")


def _edited_line(run_dir: Path, number: int, **changes: object) -> str:
    record = json.loads((run_dir / "log.jsonl").read_text().splitlines()[number])
    record.update(changes)
    return json.dumps(record)


BAD_CASES = {
    "missing run.json": lambda d: (d / "run.json").unlink(),
    "missing log": lambda d: (d / "log.jsonl").unlink(),
    "malformed line": lambda d: _corrupt_line(d, 2, '{"generation": 2, "best": '),
    "NaN in log": lambda d: _corrupt_line(d, 1, _edited_line(d, 1, best="NaN").replace('"NaN"', "NaN")),
    "missing field": lambda d: _corrupt_line(d, 1, '{"generation": 1}'),
    "generation gap": lambda d: _corrupt_line(d, 1, _edited_line(d, 1, generation=5)),
    "best_so_far decreases": lambda d: _corrupt_line(d, 3, _edited_line(d, 3, best_so_far=1.0)),
    "empty log": lambda d: (d / "log.jsonl").write_text(""),
    "shorter run": lambda d: _corrupt_line(d, 3, ""),
    "other version": lambda d: (d / "run.json").write_text(
        (d / "run.json").read_text().replace('"version": 1', '"version": 2')),
    "other format": lambda d: (d / "run.json").write_text('{"format": "something-else"}'),
    "seed not an int": lambda d: (d / "run.json").write_text(
        (d / "run.json").read_text().replace('"seed": 2', '"seed": "two"')),
}


@pytest.mark.parametrize("case", sorted(BAD_CASES))
def test_bad_run_directories_raise_run_file_error(demo, tmp_path, case, capsys):
    """Each kind of broken run gives RunFileError, and the CLI prints it with status 2, no traceback."""
    BAD_CASES[case](demo[1])
    with pytest.raises(RunFileError):
        make_report(demo, tmp_path / "out")
    status = main(["report", *map(str, demo), "-o", str(tmp_path / "out2")])
    err = capsys.readouterr().err
    assert status == 2 and "Traceback" not in err and "error" in err


def test_duplicate_runs_and_bad_checkpoints(demo, tmp_path):
    """The same directory twice, a reused seed, a checkpoint out of range: RunFileError each."""
    with pytest.raises(RunFileError):
        make_report([*demo, demo[0]], tmp_path / "out")
    clash = _run(tmp_path / "more", "plastic", 1, [1, 2, 3, 4])
    with pytest.raises(RunFileError):
        make_report([*demo, clash], tmp_path / "out")
    with pytest.raises(RunFileError):
        make_report(demo, tmp_path / "out", checkpoints=[4])
    with pytest.raises(RunFileError):
        make_report([tmp_path / "nowhere"], tmp_path / "out")


def test_bad_checkpoint_text_is_a_usage_error(demo, tmp_path, capsys):
    """--checkpoints takes comma-separated whole numbers; anything else is argparse's status 2."""
    with pytest.raises(SystemExit) as exc:
        main(["report", str(demo[0]), "-o", str(tmp_path / "out"), "--checkpoints", "ten"])
    assert exc.value.code == 2


def test_missing_matplotlib_names_the_plots_extra(demo, tmp_path, monkeypatch):
    """Without matplotlib the report raises MissingExtraError naming the 'plots' extra."""
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    monkeypatch.setitem(sys.modules, "matplotlib.figure", None)
    with pytest.raises(MissingExtraError) as exc:
        make_report(demo, tmp_path / "out")
    assert exc.value.extra == "plots"
