"""Malformed world files: each gives its own specific error, exit status 2, no traceback.

The corpus in tests/corpus/worlds was made by damaging a bundled world one way at a time.
Each file is run through the command line in-process (``main(["check", ...])``); we
check the exit status, that no traceback is printed, and the structured fields of the
error (its JSON path, line, or lint code) rather than the wording.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from neurodrome.cli import main
from neurodrome.errors import WorldFileError
from neurodrome.world import load_world

CORPUS = Path(__file__).parent / "corpus" / "worlds"

# file -> what its first matching error must carry: "path" (JSON path), "code"
# ("syntax" = JSON syntax with a line, "invalid" = schema, otherwise a lint code),
# "expected" / "found" (substrings of those Problem fields).
EXPECTED: dict[str, dict] = {
    "truncated.json": {"code": "syntax", "line": True},
    "empty-file.json": {"code": "syntax", "line": True},
    "trailing-comma.json": {"code": "syntax", "line": True},
    "nan-width.json": {"code": "syntax", "line": True, "found": "NaN"},
    "infinity-coordinate.json": {"code": "syntax", "line": True, "found": "Infinity"},
    "duplicate-key.json": {"code": "syntax", "line": True, "found": "'name'"},
    "overflow-number.json": {"path": "$.corridors[0].width", "found": "Infinity"},
    "huge-integer.json": {"expected": "valid JSON", "found": "digits"},
    "deep-nesting.json": {"expected": "valid JSON", "found": "nesting"},
    "not-utf8.json": {"expected": "UTF-8"},
    "not-an-object.json": {"path": "$", "expected": "object"},
    "wrong-format.json": {"path": "$.format", "found": "maze-file"},
    "missing-format.json": {"path": "$.format"},
    "wrong-version.json": {"path": "$.version", "found": "2"},
    "version-as-string.json": {"path": "$.version", "found": "'1'"},
    "unknown-field.json": {"path": "$.corridor", "found": "corridor"},
    "unknown-nested-field.json": {"path": "$.robot.radiu"},
    "negative-width.json": {"path": "$.corridors[0].width", "found": "-0.5"},
    "zero-width.json": {"path": "$.corridors[1].width", "found": "0"},
    "width-as-string.json": {"path": "$.corridors[0].width", "found": "'0.5'"},
    "width-as-bool.json": {"path": "$.corridors[0].width", "found": "true"},
    "empty-corridors.json": {"path": "$.corridors"},
    "corridors-not-a-list.json": {"path": "$.corridors"},
    "corridor-one-point.json": {"path": "$.corridors[0].path"},
    "corridor-repeated-point.json": {"path": "$.corridors[0].path"},
    "path-as-string.json": {"path": "$.corridors[0].path"},
    "point-three-numbers.json": {"path": "$.corridors[0].path[0]"},
    "huge-coordinate.json": {"path": "$.corridors[0].path[0][0]"},
    "missing-home.json": {"path": "$.home"},
    "home-as-number.json": {"path": "$.home", "found": "5"},
    "no-sites.json": {"path": "$.sites"},
    "duplicate-site-name.json": {"path": "$.sites[1].name", "found": "west-store"},
    "site-value-missing.json": {"path": "$.task.site_values", "expected": "east-store"},
    "unknown-site-in-relocation.json": {"path": "$.task.relocations[0].sites[1]", "found": "north-store"},
    "swap-one-site.json": {"path": "$.task.relocations[0]"},
    "window-reversed.json": {"path": "$.task.relocations[0]"},
    "window-and-after-trial.json": {"path": "$.task.relocations[0]"},
    "after-trial-zero.json": {"path": "$.task.relocations[0].after_trial", "found": "0"},
    "negative-trials.json": {"path": "$.task.trials", "found": "-5"},
    "fractional-trials.json": {"path": "$.task.trials", "found": "2.5"},
    "control-period-not-multiple.json": {"path": "$.physics"},
    "unknown-signal.json": {"path": "$.robot.signals[1]", "found": "smell"},
    "ray-angle-out-of-range.json": {"path": "$.robot.range_finders.angles_deg[1]", "found": "270"},
    "noise-too-large.json": {"path": "$.robot.range_finders.noise"},
    "marker-two-shapes.json": {"path": "$.markers[0]"},
    "bad-name.json": {"path": "$.name"},
    "bool-as-string.json": {"path": "$.task.scoring.crash_ends_trial", "found": "yes"},
    # Valid to the schema but refused by lint.
    "site-in-wall.json": {"path": "$.sites[0].position", "code": "site-outside"},
    "home-outside.json": {"path": "$.home.position", "code": "home-outside"},
    "corridor-too-narrow.json": {"path": "$.sites[0]", "code": "site-unreachable"},
    "relocation-after-last-trial.json": {"path": "$.task.relocations[0].window", "code": "relocation-late"},
    "centimetres.json": {"path": "$.corridors[0].width", "code": "units-width"},
    "world-too-large.json": {"path": "$", "code": "extent"},
    "sites-overlap.json": {"path": "$.sites[1]", "code": "site-overlap"},
}


def _matches(err: dict, want: dict) -> bool:
    if "path" in want and err["path"] != want["path"]:
        return False
    if "code" in want and err["code"] != want["code"]:
        return False
    if want.get("line") and not (err.get("line") and err["line"] >= 1):
        return False
    if "expected" in want and want["expected"] not in err.get("expected", ""):
        return False
    return "found" not in want or want["found"] in err.get("found", "")


def test_corpus_is_large_and_fully_described():
    """At least 30 malformed files, each with an expectation (and no stale ones)."""
    files = {p.name for p in CORPUS.glob("*.json")}
    assert len(files) >= 30
    assert files == set(EXPECTED)


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_malformed_world_gives_its_error(name, capsys):
    """check --json exits 2, prints no traceback, and reports the specific error."""
    path = str(CORPUS / name)
    code = main(["check", "--json", path])
    out, err = capsys.readouterr()
    assert code == 2
    assert "Traceback" not in out + err
    report = json.loads(out)["files"][0]
    assert report["file"] == path and not report["ok"]
    want = EXPECTED[name]
    assert any(_matches(e, want) for e in report["errors"]), report["errors"]


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_malformed_world_text_report_names_the_file(name, capsys):
    """The human report names the file and the error's JSON path, with no traceback."""
    path = str(CORPUS / name)
    assert main(["check", path]) == 2
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    assert path in out
    if "path" in EXPECTED[name]:
        assert EXPECTED[name]["path"] in out


@pytest.mark.parametrize("name", sorted(n for n, w in EXPECTED.items() if w.get("code") in (None, "syntax", "invalid")))
def test_loader_raises_world_file_error(name):
    """Files refused at load time raise WorldFileError (a ValueError) with Problems."""
    with pytest.raises(WorldFileError) as info:
        load_world(CORPUS / name)
    assert isinstance(info.value, ValueError)
    assert info.value.problems and all(p.where and p.expected for p in info.value.problems)


def test_missing_file_and_directory(tmp_path, capsys):
    """A missing path or a directory is a clean error, exit 2."""
    assert main(["check", str(tmp_path / "nope.json"), str(tmp_path)]) == 2
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    assert "no such file" in out and "a directory" in out


def test_duplicate_key_and_nan_point_at_their_line(capsys):
    """Duplicate keys and NaN are located at the offending line (found by a plain text search)."""
    for name, needle, nth in [("duplicate-key.json", '"name"', 2), ("nan-width.json", "NaN", 1)]:
        path = CORPUS / name
        lines = path.read_text().splitlines()
        want = [k + 1 for k, line in enumerate(lines) if needle in line][nth - 1]
        main(["check", "--json", str(path)])
        err = json.loads(capsys.readouterr().out)["files"][0]["errors"][0]
        assert err["line"] == want
