"""The authoring commands: new, check, preview, schema; bundled worlds pass check."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from neurodrome.cli import main
from neurodrome.world import load_world, world_json_schema
from neurodrome.world.spec import SCHEMA_FILE
from neurodrome.world.templates import KINDS

WORLDS = Path(__file__).resolve().parents[1] / "worlds"
BUNDLED = sorted(p for p in WORLDS.glob("*.json") if p.name != SCHEMA_FILE)


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return code, out, err


def test_bundled_worlds_exist():
    """The four bundled worlds of issue 2 are there."""
    names = {p.stem for p in BUNDLED}
    assert {"clinic-junction", "clinic-junction-restock", "clinic-double-junction", "clinic-loading-bay"} <= names


@pytest.mark.parametrize("path", BUNDLED, ids=lambda p: p.stem)
def test_bundled_world_passes_check(path, capsys):
    """Every bundled world checks with no errors and no warnings, and points at the schema."""
    code, out, _ = run(capsys, "check", "--strict", "--json", str(path))
    assert code == 0
    report = json.loads(out)["files"][0]
    assert report["errors"] == [] and report["warnings"] == []
    assert json.loads(path.read_text())["$schema"] == SCHEMA_FILE


def test_bundled_relocation_schedules():
    """Restock world: one swap drawn from [35, 65] of 100; double junction: several of 200."""
    restock = load_world(WORLDS / "clinic-junction-restock.json").task
    assert restock.trials == 100 and [e.window for e in restock.relocations] == [(35, 65)]
    double = load_world(WORLDS / "clinic-double-junction.json").task
    assert double.trials == 200 and len(double.relocations) >= 2
    assert load_world(WORLDS / "clinic-junction.json").task.relocations == []


def test_loading_bay_is_curved_with_three_arms():
    """The original layout has a corridor of many points and three or more store arms."""
    spec = load_world(WORLDS / "clinic-loading-bay.json")
    assert max(len(c.path) for c in spec.corridors) >= 10 and len(spec.sites) >= 3


@pytest.mark.parametrize("kind", KINDS)
def test_new_writes_a_world_that_checks(kind, tmp_path, capsys):
    """new KIND writes a world that check accepts."""
    out = tmp_path / f"{kind}.json"
    code, _, _ = run(capsys, "new", kind, "-o", str(out))
    assert code == 0
    assert run(capsys, "check", str(out))[0] == 0


def test_new_options(tmp_path, capsys):
    """Options reach the file: width, angles, trials, relocation kind and count."""
    out = tmp_path / "arms.json"
    code, _, _ = run(capsys, "new", "arms", "-o", str(out), "--width", "0.6", "--angles", "180,135,90,45,0",
                     "--trials", "80", "--relocate", "fixed", "--relocations", "2")
    assert code == 0
    spec = load_world(out)
    assert {c.width for c in spec.corridors} == {0.6}
    assert len(spec.sites) == 5 and spec.task.trials == 80
    assert [e.after_trial is not None for e in spec.task.relocations] == [True, True]


def test_new_refuses_to_overwrite(tmp_path, capsys):
    """An existing file is kept unless --force is given."""
    out = tmp_path / "w.json"
    out.write_text("keep")
    assert run(capsys, "new", "junction", "-o", str(out))[0] == 2
    assert out.read_text() == "keep"
    assert run(capsys, "new", "junction", "-o", str(out), "--force")[0] == 0


@pytest.mark.parametrize("argv", [
    ["--width", "-1"], ["--trials", "0"], ["--angles", "90,abc"], ["--angles", "90"],
])
def test_new_bad_options(argv, tmp_path, capsys):
    """Bad option values exit 2 with a one-line reason naming the option."""
    kind = "arms" if argv[0] == "--angles" and argv[1] != "90" else "junction"
    code, _, err = run(capsys, "new", kind, "-o", str(tmp_path / "w.json"), *argv)
    assert code == 2
    assert argv[0] in err


@pytest.mark.parametrize("flag", ["--stem", "--arm"])
def test_new_refuses_options_the_template_lacks(flag, tmp_path, capsys):
    """The spiral template has no stem or arm: the option is named, exit 2, no traceback."""
    code, _, err = run(capsys, "new", "spiral", "-o", str(tmp_path / "w.json"), flag, "2")
    assert code == 2 and flag in err and "Traceback" not in err
    assert not (tmp_path / "w.json").exists()


def test_spiral_template_has_many_walls(tmp_path, capsys):
    """The spiral corridor of 500 points gives about 1000 walls (two sides of 499 segments)."""
    from neurodrome.world import build_geometry, world_from_data
    from neurodrome.world.templates import make

    walls = build_geometry(world_from_data(make("spiral"))).walls
    assert 900 <= len(walls) <= 1100


def test_new_refuses_unworkable_world(tmp_path, capsys):
    """A relocation that can never happen (one trial) is refused and nothing is written."""
    out = tmp_path / "w.json"
    code, _, err = run(capsys, "new", "junction", "-o", str(out), "--trials", "1", "--relocate", "fixed")
    assert code == 2 and not out.exists()
    assert "relocations[0]" in err


def test_check_strict_turns_warnings_into_errors(tmp_path, capsys):
    """A warning-only world exits 0, or 2 with --strict."""
    data = json.loads((WORLDS / "clinic-junction.json").read_text())
    data["robot"]["wheel_base"] = 0.5
    path = tmp_path / "wide-wheels.json"
    path.write_text(json.dumps(data))
    code, out, _ = run(capsys, "check", str(path))
    assert code == 0 and "warning" in out
    assert run(capsys, "check", "--strict", str(path))[0] == 2


def test_check_many_files_reports_each(tmp_path, capsys):
    """One bad file among good ones gives exit 2 and a report per file."""
    bad = tmp_path / "bad.json"
    bad.write_text("{")
    code, out, _ = run(capsys, "check", "--json", str(WORLDS / "clinic-junction.json"), str(bad))
    assert code == 2
    files = json.loads(out)["files"]
    assert [f["ok"] for f in files] == [True, False]
    assert files[1]["errors"][0]["line"] == 1


def test_schema_prints_json_schema(capsys):
    """schema prints the world JSON Schema."""
    code, out, _ = run(capsys, "schema")
    assert code == 0 and json.loads(out) == world_json_schema()


def test_committed_schema_is_current():
    """worlds/world.schema.json equals what `neurodrome schema` prints (regenerate with -o)."""
    assert json.loads((WORLDS / SCHEMA_FILE).read_text()) == world_json_schema()


def test_preview_writes_png(tmp_path, capsys):
    """preview writes a PNG of the requested size."""
    import pygame

    out = tmp_path / "w.png"
    code, _, _ = run(capsys, "preview", str(WORLDS / "clinic-junction.json"), "-o", str(out), "--size", "400x300")
    assert code == 0
    assert pygame.image.load(str(out)).get_size() == (400, 300)


@pytest.mark.parametrize("size", ["big", "10x10", "400"])
def test_preview_bad_size(size, tmp_path, capsys):
    """A malformed --size exits 2."""
    code, _, err = run(capsys, "preview", str(WORLDS / "clinic-junction.json"), "-o", str(tmp_path / "w.png"),
                       "--size", size)
    assert code == 2 and "--size" in err
