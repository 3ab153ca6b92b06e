"""Study files: validation with JSON paths, arms as evolver overrides, whole runs spread over
worker processes, resume, curricula, reports of a study that is still running, goals.

The reference for every run of a study is outside the study machinery: the same run done
alone with ``neurodrome evolve`` (or :class:`~neurodrome.evolve.run.Run`) in this process.
The goals are checked against the published yardsticks of the junction task (the maximum
N r_H of a static junction and the same-arm plateau of a relocating one: Soltoggio et al.
2008, ALife XI; Blynel & Floreano 2003, EvoWorkshops) on the shipped champions.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from neurodrome.cli import main
from neurodrome.errors import ConfigError
from neurodrome.evolve.config import config_from_data
from neurodrome.evolve.goals import check_goal
from neurodrome.evolve.report import make_report
from neurodrome.evolve.run import Run
from neurodrome.evolve.study import Study
from neurodrome.evolve.studyfile import Advance, Goal, load_study, prepare_study_dir, study_from_data

ROOT = Path(__file__).resolve().parents[1]
WORLD = ROOT / "worlds" / "clinic-junction.json"
ASSETS = ROOT / "assets"

STUDY = {"format": "neurodrome-study", "version": 1, "world": str(WORLD), "runs": 2, "seed": 5,
         "budget": {"generations": 3},
         "evolver": {"population": 12, "evaluation": {"trials": 2}, "speciation": {"target_species": 2},
                     "objective": {"behaviour": "end_positions", "k": 4}},
         "arms": [{"name": "mod", "network": "modulated"},
                  {"name": "fixed-novelty", "network": "fixed", "evolver": {"objective": {"kind": "novelty"}}}]}


def _write(tmp_path: Path, data: dict, name: str = "study.json") -> Path:
    path = tmp_path / name
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


def _changed(**changes) -> dict:
    data = json.loads(json.dumps(STUDY))
    data.update(changes)
    return data


def _without_times(run_dir: Path) -> list[dict]:
    lines = [json.loads(line) for line in (run_dir / "log.jsonl").read_text().splitlines()]
    for line in lines:
        line.pop("eval_seconds")
    return lines


# -- the file -----------------------------------------------------------------------------
@pytest.mark.parametrize("change, where", [
    ({"arms": [{"name": "a", "network": "fixed"}, {"name": "a", "network": "plastic"}]}, "each arm name once"),
    ({"arms": [{"name": "a", "network": "fixed", "evolver": {"generations": 5}}]}, "$.arms[0].evolver.generations"),
    ({"evolver": {"seed": 3}}, "$.evolver.seed"),
    ({"budget": {"generations": 3, "evaluations": 100}}, "exactly one of generations and evaluations"),
    ({"budget": {}}, "exactly one of generations and evaluations"),
    ({"arms": [{"name": "a", "network": "hebbian"}]}, "$.arms[0].network"),
    ({"arms": [{"name": "a b", "network": "fixed"}]}, "$.arms[0].name"),
    ({"arms": [{"name": "a", "network": "fixed", "evolver": {"objective": {"kind": "curiosity"}}}]},
     "$.arms[0].evolver"),
    ({"world": None}, "a world"),
    ({"arms": [{"name": "a", "network": "fixed", "stages": [{"world": "w.json"}, {"world": "w.json"}]}]},
     "stage 1 needs an advance rule"),
    ({"budget": {"evaluations": 5}}, "at least one generation"),
    ({"runs": 0}, "$.runs"),
    ({"colour": "blue"}, "$.colour"),
])
def test_bad_study_files_name_the_place(tmp_path, change, where):
    with pytest.raises(ConfigError) as info:
        load_study(_write(tmp_path, _changed(**change)))
    assert where in str(info.value)


def test_arm_overrides_merge_field_by_field(tmp_path):
    """An arm that sets only objective.kind keeps the shared objective settings; the study
    sets treatments, seed, runs and generations (evaluations: budget / (population x repeats))."""
    study = load_study(_write(tmp_path, _changed(budget={"evaluations": 100})))
    novelty = study.configs["fixed-novelty"]
    assert novelty.objective.kind == "novelty" and novelty.objective.behaviour == "end_positions"
    assert novelty.objective.k == 4 and novelty.treatments == ["fixed"] and novelty.seed == 5
    assert study.configs["mod"].objective.kind == "fitness"
    assert novelty.generations == 100 // 12 == 8


def test_the_study_json_schema_is_exported(capsys):
    assert main(["schema", "--of", "study"]) == 0
    schema = json.loads(capsys.readouterr().out)
    assert schema["title"].startswith("neurodrome study file") and "arms" in schema["properties"]


# -- running ------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def alone(tmp_path_factory) -> Path:
    """Every run of STUDY done alone, in this process, from plain evolver configurations."""
    out = tmp_path_factory.mktemp("alone")
    base = {"population": 12, "evaluation": {"trials": 2}, "speciation": {"target_species": 2},
            "objective": {"behaviour": "end_positions", "k": 4}, "generations": 3}
    for arm, network, objective in (("mod", "modulated", "fitness"), ("fixed-novelty", "fixed", "novelty")):
        data = json.loads(json.dumps(base))
        data["objective"]["kind"] = objective
        config = config_from_data(dict(data, treatments=[network], seed=5), "test")
        for seed in (5, 6):
            Run(WORLD, config, out / f"{arm}-{seed}", network, seed).run()
    return out


def test_study_runs_equal_the_same_runs_alone(tmp_path, alone, capsys):
    """Whole runs spread over 2 worker processes: each run's champion, checkpoint and log
    equal the run done alone; the display has one line per finished generation."""
    out = tmp_path / "study"
    assert main(["study", str(_write(tmp_path, STUDY)), "-o", str(out), "--workers", "2"]) == 0
    for name in ("mod-5", "mod-6", "fixed-novelty-5", "fixed-novelty-6"):
        assert _without_times(out / name) == _without_times(alone / name), name
        for f in ("champion.genome.json", "best.net.json", "checkpoint.json"):
            assert (out / name / f).read_bytes() == (alone / name / f).read_bytes(), f"{name}/{f}"
        header = json.loads((out / name / "run.json").read_text())
        assert header["arm"] == name.rsplit("-", 1)[0] and header["study"] == "study"
    lines = [line for line in capsys.readouterr().err.splitlines() if " generation " in line]
    assert len(lines) == 4 * 3


def test_a_stopped_study_resumes_and_reports_what_every_run_reached(tmp_path, alone, capsys):
    """Stopped after five generations in all (progress raises, as Ctrl-C would), the report
    covers the generations every run reached and says the study is still running; --resume
    then finishes it exactly as an undisturbed study."""
    path = _write(tmp_path, STUDY)
    out = tmp_path / "study"
    seen = []

    def stop_after_five(event) -> None:
        seen.append(event)
        if len(seen) == 5:
            raise KeyboardInterrupt

    study = prepare_study_dir(load_study(path), out, resume=False)
    with pytest.raises(KeyboardInterrupt):
        Study.from_file(study, out, workers=1).run(stop_after_five)
    # one after another in this process: mod-5 finished (3), mod-6 has 2 generations, the rest none
    assert [len(_without_times(out / n)) for n in ("mod-5", "mod-6")] == [3, 2]
    with pytest.raises(Exception, match="has none yet"):
        make_report([out], tmp_path / "early")
    assert main(["study", str(path), "-o", str(out)]) == 2
    assert "a study is already there" in capsys.readouterr().err
    assert main(["study", "-o", str(out), "--resume", "--workers", "2", "--quiet"]) == 0
    for name in ("mod-5", "mod-6", "fixed-novelty-5", "fixed-novelty-6"):
        assert _without_times(out / name) == _without_times(alone / name), name
    report = make_report([out], tmp_path / "report")
    assert report.planned is None and list(report.treatments) == ["mod", "fixed-novelty"]


def test_report_of_a_running_study_cuts_to_the_common_generation(tmp_path):
    path = _write(tmp_path, STUDY)
    out = tmp_path / "study"
    study = prepare_study_dir(load_study(path), out, resume=False)
    seen = []

    def stop_after(event) -> None:
        seen.append(event)
        if len(seen) == 3 * 3 + 1:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        Study.from_file(study, out, workers=1).run(stop_after)
    report = make_report([out], tmp_path / "report")
    assert report.generations == 1 and report.planned == 3
    assert "still running or was stopped" in (tmp_path / "report" / "summary.md").read_text()


def test_resume_with_a_changed_study_names_the_field(tmp_path):
    out = tmp_path / "study"
    prepare_study_dir(load_study(_write(tmp_path, STUDY)), out, resume=False)
    changed = load_study(_write(tmp_path, _changed(runs=3), "other.json"))
    with pytest.raises(ConfigError, match=r"\$\.runs: 2 -> 3"):
        prepare_study_dir(changed, out, resume=True)


def test_report_refuses_runs_on_different_worlds(tmp_path):
    """Rank-sum tests across worlds compare tasks, not treatments (issue: a 6-trial against a
    20-trial world was compared without a word)."""
    config = config_from_data({"population": 8, "generations": 1, "evaluation": {"trials": 1}}, "test")
    Run(WORLD, config, tmp_path / "a", "fixed", 1).run()
    Run(ROOT / "worlds" / "clinic-junction-restock.json", config, tmp_path / "b", "fixed", 2).run()
    with pytest.raises(Exception, match="runs evolved on one world"):
        make_report([tmp_path / "a", tmp_path / "b"], tmp_path / "report")


# -- curricula ---------------------------------------------------------------------------
@pytest.mark.parametrize("rule, bests, met", [
    ({"after": 3}, [0, 0], False), ({"after": 3}, [0, 0, 0], True),
    ({"best_at_least": 1.0, "for_generations": 2}, [1.0, 0.5, 1.0], False),
    ({"best_at_least": 1.0, "for_generations": 2}, [0.5, 1.0, 1.2], True),
    ({"best_at_least": 9.0, "for_generations": 2, "after": 4}, [0, 0, 0, 0], True),
])
def test_advance_rules(rule, bests, met):
    assert Advance(**rule).met(bests) is met


def _curriculum(rule: dict) -> dict:
    restock = str(ROOT / "worlds" / "clinic-junction-restock.json")
    return {"format": "neurodrome-study", "version": 1, "runs": 1, "seed": 3, "budget": {"generations": 4},
            "evolver": {"population": 10, "evaluation": {"trials": 2}, "speciation": {"target_species": 2}},
            "arms": [{"name": "staged", "network": "modulated",
                      "stages": [{"world": str(WORLD), "advance": rule},
                                 {"world": restock, "seed": 40, "evolver": {"evaluation": {"trials": 3}}}]}]}


def test_a_curriculum_equals_its_stages_run_one_by_one(tmp_path):
    """Two stages (2 generations, then 2 on another world from stage 1's champion, seed 40):
    the stage directories equal plain runs, and the run's own log spans both stages."""
    out = tmp_path / "staged"
    study = prepare_study_dir(study_from_data(_curriculum({"after": 2}), tmp_path / "c.json"), out, resume=False)
    Study.from_file(study, out, workers=1).run()
    run_dir = out / "staged-3"
    base = {"population": 10, "speciation": {"target_species": 2}, "treatments": ["modulated"]}
    one = config_from_data(dict(base, evaluation={"trials": 2}, generations=2, seed=3), "test")
    Run(WORLD, one, tmp_path / "one", "modulated", 3).run()
    two = config_from_data(dict(base, evaluation={"trials": 3}, generations=2, seed=40,
                                start_genome=str(tmp_path / "one" / "champion.genome.json")), "test")
    Run(ROOT / "worlds" / "clinic-junction-restock.json", two, tmp_path / "two", "modulated", 40).run()
    assert _without_times(run_dir / "stage-1") == _without_times(tmp_path / "one")
    assert _without_times(run_dir / "stage-2") == _without_times(tmp_path / "two")
    assert (run_dir / "stage-2" / "champion.genome.json").read_bytes() == \
        (tmp_path / "two" / "champion.genome.json").read_bytes()
    combined = _without_times(run_dir)
    assert [(r["generation"], r["stage"], r["stage_generation"]) for r in combined] == \
        [(0, 1, 0), (1, 1, 1), (2, 2, 0), (3, 2, 1)]


def test_a_stopped_curriculum_resumes_in_its_stage(tmp_path):
    """A threshold rule that every generation meets ends stage 1 after 1 generation; stopped
    in stage 2, the resumed run equals an undisturbed one."""
    data = _curriculum({"best_at_least": -1e9, "for_generations": 1})
    whole = tmp_path / "whole"
    Study.from_file(prepare_study_dir(study_from_data(data, tmp_path / "c.json"), whole, resume=False),
                    whole, workers=1).run()
    cut = tmp_path / "cut"
    seen = []

    def stop_after_two(event) -> None:
        seen.append(event)
        if len(seen) == 2:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        Study.from_file(prepare_study_dir(study_from_data(data, tmp_path / "c.json"), cut, resume=False),
                        cut, workers=1).run(stop_after_two)
    Study.from_file(prepare_study_dir(None, cut, resume=True), cut, workers=1, resume=True).run()
    for sub in ("staged-3", "staged-3/stage-1", "staged-3/stage-2"):
        assert _without_times(cut / sub) == _without_times(whole / sub), sub
    assert [r["stage"] for r in _without_times(whole / "staged-3")] == [1, 2, 2, 2]


@pytest.mark.slow
def test_the_restock_curriculum_reproduces_the_shipped_learner(tmp_path):
    """assets/restock-curriculum.json, run as the README says, writes the shipped restock
    champion's genome bit for bit (the three stages, with no hand decisions left)."""
    out = tmp_path / "curriculum"
    assert main(["study", str(ASSETS / "restock-curriculum.json"), "-o", str(out), "--workers", "2",
                 "--quiet"]) == 0
    produced = json.loads((out / "learner-31" / "champion.genome.json").read_text())
    shipped = json.loads((ASSETS / "champion-restock.genome.json").read_text())
    assert produced["genome"] == shipped["genome"]
    for k, genome in ((1, "restock-stage1.genome.json"), (2, "restock-stage2.genome.json")):
        stage = json.loads((out / "learner-31" / f"stage-{k}" / "champion.genome.json").read_text())
        assert stage["genome"] == json.loads((ASSETS / genome).read_text())["genome"]


# -- goals -----------------------------------------------------------------------------------
def _fake_run(tmp_path: Path, name: str, network: Path) -> Path:
    run_dir = tmp_path / name
    run_dir.mkdir()
    (run_dir / "best.net.json").write_bytes(network.read_bytes())
    return run_dir


def test_maximum_goal_on_the_shipped_champions(tmp_path):
    """The static champion scores N r_H on the static junction; the restock learner, which
    keeps to the east store there too, also does; a network that always crashes does not."""
    runs = [_fake_run(tmp_path, "static", ASSETS / "champion-static.net.json"),
            _fake_run(tmp_path, "learner", ASSETS / "champion-restock.net.json")]
    goal = Goal(kind="maximum", trials=10)
    results = check_goal(goal, ROOT, runs, [str(WORLD)] * 2)
    assert [r.reached for r in results] == [True, True]
    assert results[0].detail.startswith("10.00 of 10.00")


@pytest.mark.slow
def test_switching_goal_tells_the_learner_from_the_static_champion(tmp_path):
    """Reward-driven switching: the restock learner beats the same-arm plateau on the bundled
    100-trial relocating world and keeps to one arm in the static one; the static champion
    sits on the plateau."""
    runs = [_fake_run(tmp_path, "static", ASSETS / "champion-static.net.json"),
            _fake_run(tmp_path, "learner", ASSETS / "champion-restock.net.json")]
    goal = Goal(kind="switching", world="worlds/clinic-junction-restock.json",
                static_world="worlds/clinic-junction.json", seeds=[1, 2])
    results = check_goal(goal, ROOT, runs, ["", ""])
    assert [r.reached for r in results] == [False, True]
