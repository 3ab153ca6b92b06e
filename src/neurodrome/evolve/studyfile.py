"""The study file: named arms compared over repeated runs, with an optional curriculum.

Format ``neurodrome-study``, version 1 (every path relative to the file's folder)::

    {"format": "neurodrome-study", "version": 1, "description": "...",
     "world": "../../worlds/clinic-junction.json",
     "runs": 10, "seed": 100,
     "budget": {"generations": 40},            # or {"evaluations": 120000}
     "evolver": {...},                          # evolver settings shared by every arm
     "arms": [{"name": "modulated", "network": "modulated", "evolver": {...}},
              {"name": "fixed", "network": "fixed"}],
     "goal": {"kind": "maximum", "trials": 100}}

An arm is a network kind (``modulated``, ``plastic``, ``fixed``) plus the evolver settings
it overrides (any field of the evolver configuration but ``generations``, ``runs``,
``treatments`` and ``seed``, which the study sets); nested sections merge field by field,
so ``{"objective": {"kind": "novelty"}}`` keeps the shared novelty settings. Run ``r`` of
every arm uses seed ``seed + r``, so the arms meet the same evaluation seeds.

The budget is the same for every arm: generations, or evaluations (lifetimes simulated:
population x repeats per generation), whichever the file gives.

A curriculum is an arm with ``stages``: each stage names its world, its own evolver
overrides and optionally its own seed (run ``r`` of the stage uses ``seed + r``), and a
rule that ends it: ``{"after": G}`` (G generations of the stage), ``{"best_at_least": L,
"for_generations": G}`` (the generation's best fitness was at least L in G generations in
a row; ``"after"`` beside them is a cap). Each stage after the first starts from the
champion genome of the stage before (as ``start_genome`` does). The last stage runs until
the budget is spent and needs no rule.

``goal`` says what counts as success, so a report can say how many runs of each arm got
there: ``maximum`` (the run's champion, re-evaluated on ``trials`` trials of ``world``,
default the study's, scores the task's maximum, trials x the highest site value), or
``switching`` (on the relocating ``world`` the champion beats the same-arm plateau for
each of ``seeds``, and in ``static_world`` it never changes arm: reward-driven switching).

Bad values raise :class:`~neurodrome.errors.ConfigError` with the JSON path.
"""

from __future__ import annotations

import copy
import json
from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, StrictInt, model_validator

from ..errors import ConfigError, Problem
from ..jsonio import read_json_file, validate
from .config import EvolveConfig, config_from_data

STUDY_FORMAT = "neurodrome-study"
#: evolver fields that the study sets for every run, never an arm or stage
STUDY_SET = ("generations", "runs", "treatments", "seed", "format", "version")


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


class Budget(_Section):
    generations: StrictInt | None = Field(None, ge=1, description="generations per run")
    evaluations: StrictInt | None = Field(
        None, ge=1, description="lifetimes simulated per run (population x repeats per generation)")

    @model_validator(mode="after")
    def _one(self) -> Budget:
        if (self.generations is None) == (self.evaluations is None):
            raise ValueError("exactly one of generations and evaluations")
        return self


class Advance(_Section):
    after: StrictInt | None = Field(None, ge=1, description="end the stage after this many of its generations "
                                                            "(with best_at_least: at most this many)")
    best_at_least: float | None = Field(None, description="end the stage once the generation's best fitness has "
                                                          "been at least this ...")
    for_generations: StrictInt | None = Field(None, ge=1, description="... in this many generations in a row")

    @model_validator(mode="after")
    def _rule(self) -> Advance:
        if (self.best_at_least is None) != (self.for_generations is None):
            raise ValueError("best_at_least and for_generations go together")
        if self.after is None and self.best_at_least is None:
            raise ValueError("a rule: after, or best_at_least with for_generations")
        return self

    def met(self, bests: list[float]) -> bool:
        """Whether a stage whose generations had these best fitnesses is over."""
        if self.after is not None and len(bests) >= self.after:
            return True
        if self.best_at_least is not None:
            run = self.for_generations
            return len(bests) >= run and all(b >= self.best_at_least for b in bests[-run:])
        return False


class Stage(_Section):
    world: str = Field(description="world file of the stage")
    seed: StrictInt | None = Field(None, ge=0, description="seed of run 0 in this stage (run r: seed + r); "
                                                            "default the study's")
    evolver: dict[str, Any] = Field(default_factory=dict, description="evolver overrides of this stage")
    advance: Advance | None = Field(None, description="when the stage ends; the last stage runs to the budget")


class Arm(_Section):
    name: str = Field(pattern=r"^[A-Za-z0-9][A-Za-z0-9_.+-]{0,63}$",
                      description="the arm's name, used in run directories and reports")
    network: Literal["modulated", "plastic", "fixed"] = Field(description="network kind (treatment)")
    evolver: dict[str, Any] = Field(default_factory=dict, description="evolver settings this arm overrides")
    stages: list[Stage] | None = Field(None, min_length=1, description="a curriculum (see the module docs)")


class Goal(_Section):
    kind: Literal["maximum", "switching"]
    world: str | None = Field(None, description="world the champion is re-evaluated on (default the study's)")
    trials: StrictInt | None = Field(None, ge=1, description="trials of that evaluation (default the world's)")
    seeds: list[StrictInt] = Field([1], min_length=1, description="evaluation seeds; every one must pass")
    static_world: str | None = Field(None, description="switching: a static world in which the champion "
                                                       "must keep to one arm")


class StudySpec(_Section):
    """A whole study (format ``neurodrome-study``)."""

    format: Literal["neurodrome-study"] = STUDY_FORMAT
    version: Literal[1] = 1
    description: str = Field("", max_length=8000)
    world: str | None = Field(None, description="world every arm without stages evolves on")
    runs: StrictInt = Field(ge=1, le=1000, description="independent runs per arm")
    seed: StrictInt = Field(1, ge=0, description="seed of run 0 of every arm (run r: seed + r)")
    budget: Budget
    evolver: dict[str, Any] = Field(default_factory=dict, description="evolver settings shared by every arm")
    arms: list[Arm] = Field(min_length=1)
    goal: Goal | None = None

    @model_validator(mode="after")
    def _consistent(self) -> StudySpec:
        names = [a.name for a in self.arms]
        for name in names:
            if names.count(name) > 1:
                raise ValueError(f"each arm name once (found {name!r} twice)")
        for a in self.arms:
            if a.stages is None and self.world is None:
                raise ValueError(f"a world: arm {a.name!r} has no stages")
            if a.stages:
                for k, s in enumerate(a.stages[:-1]):
                    if s.advance is None:
                        raise ValueError(f"arm {a.name!r} stage {k + 1} needs an advance rule (only the last "
                                         "stage runs to the budget)")
        if self.goal is not None and self.goal.kind == "switching" and self.goal.static_world is None:
            raise ValueError("goal.static_world for a switching goal")
        return self


def _merge(base: dict[str, Any], over: dict[str, Any]) -> dict[str, Any]:
    out = copy.deepcopy(base)
    for key, value in over.items():
        if isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = _merge(out[key], value)
        else:
            out[key] = copy.deepcopy(value)
    return out


class LoadedStudy:
    """A validated study with every path made absolute and every arm's (and stage's)
    evolver configuration built and checked."""

    def __init__(self, spec: StudySpec, source: Path, data: dict[str, Any]) -> None:
        self.spec = spec
        self.source = source
        self.data = data  #: the file's JSON, as read
        folder = source.parent
        self.world = str(folder / spec.world) if spec.world else None
        self.configs: dict[str, EvolveConfig] = {}
        self.stages: dict[str, list[tuple[str, int, EvolveConfig, Advance | None]]] = {}
        base = self._checked(spec.evolver, "$.evolver")
        for i, arm in enumerate(spec.arms):
            merged = _merge(base, self._checked(arm.evolver, f"$.arms[{i}].evolver"))
            self.configs[arm.name] = self._config(merged, arm.network, spec.seed, f"$.arms[{i}].evolver")
            if arm.stages:
                plan = []
                for k, stage in enumerate(arm.stages):
                    where = f"$.arms[{i}].stages[{k}].evolver"
                    config = self._config(_merge(merged, self._checked(stage.evolver, where)), arm.network,
                                          spec.seed if stage.seed is None else stage.seed, where)
                    plan.append((str(folder / stage.world), config.seed, config, stage.advance))
                self.stages[arm.name] = plan
        if spec.budget.evaluations is not None:
            for arm in spec.arms:
                cost = self.cost(self.configs[arm.name] if not arm.stages else self.stages[arm.name][0][2])
                if spec.budget.evaluations < cost:
                    raise ConfigError(Problem(f"{source} $.budget.evaluations",
                                              f"at least one generation of arm {arm.name!r} ({cost} evaluations)",
                                              str(spec.budget.evaluations)))

    def _checked(self, over: dict[str, Any], where: str) -> dict[str, Any]:
        for key in over:
            if key in STUDY_SET:
                raise ConfigError(Problem(f"{self.source} {where}.{key}",
                                          "an evolver setting the study does not set itself (generations come "
                                          "from $.budget, runs and seed from the study, treatments from "
                                          "each arm's network)", repr(key)))
        return over

    def _config(self, merged: dict[str, Any], network: str, seed: int, where: str) -> EvolveConfig:
        data = dict(merged, treatments=[network], seed=seed, runs=1, generations=self.generations_cap(merged))
        start = data.get("start_genome")
        if isinstance(start, str) and not Path(start).is_absolute():
            data["start_genome"] = str(self.source.parent / start)
        return config_from_data(data, f"{self.source} {where}")

    def generations_cap(self, merged: dict[str, Any]) -> int:
        """Generations of a run of these settings within the budget."""
        budget = self.spec.budget
        if budget.generations is not None:
            return budget.generations
        population = merged.get("population", EvolveConfig.model_fields["population"].default)
        repeats = (merged.get("evaluation") or {}).get("repeats", 1)
        if not isinstance(population, int) or not isinstance(repeats, int) or population < 1 or repeats < 1:
            return 1  # the configuration check reports the bad value
        return max(1, budget.evaluations // (population * repeats))

    @staticmethod
    def cost(config: EvolveConfig) -> int:
        """Evaluations (lifetimes) one generation of this configuration spends."""
        return config.population * config.evaluation.repeats

    @property
    def name(self) -> str:
        return self.source.stem


def study_from_data(data: Any, source: str | Path) -> LoadedStudy:
    """Validate parsed JSON as a study; relative paths are taken from ``source``'s folder."""
    source = Path(source)
    if not isinstance(data, dict):
        raise ConfigError(Problem(f"{source} $", "a JSON object", type(data).__name__), source=str(source))
    spec = validate(StudySpec, data, str(source), ConfigError)
    return LoadedStudy(spec, source.resolve(), data)


def load_study(path: str | Path) -> LoadedStudy:
    """Read and validate a study file."""
    return study_from_data(read_json_file(path, ConfigError), path)


def study_json_schema() -> dict:
    """JSON Schema of the study file."""
    schema = StudySpec.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "neurodrome study file, version 1"
    return schema


#: the copy of the study file a study directory keeps (what ``--resume`` continues)
STUDY_COPY = "study.json"


def _differences(old: Any, new: Any, path: str = "$") -> list[str]:
    if isinstance(old, dict) and isinstance(new, dict):
        out = []
        for key in sorted(set(old) | set(new), key=str):
            if key not in old:
                out.append(f"{path}.{key} added")
            elif key not in new:
                out.append(f"{path}.{key} removed")
            else:
                out += _differences(old[key], new[key], f"{path}.{key}")
        return out
    if isinstance(old, list) and isinstance(new, list) and len(old) == len(new):
        return [d for k, (a, b) in enumerate(zip(old, new)) for d in _differences(a, b, f"{path}[{k}]")]
    return [] if old == new else [f"{path}: {json.dumps(old)} -> {json.dumps(new)}"]


def prepare_study_dir(study: LoadedStudy | None, out_dir: str | Path, *, resume: bool) -> LoadedStudy:
    """Keep a copy of the study file in ``out_dir`` (a new study), or check it against the
    copy there (``resume``; ``study=None`` resumes with the copy). Paths in the copy stay
    relative to the original file's folder, which the copy records."""
    out = Path(out_dir)
    copy_path = out / STUDY_COPY
    if copy_path.is_file():
        kept = read_json_file(copy_path, ConfigError)
        if not isinstance(kept, dict) or kept.get("format") != "neurodrome-study-copy":
            raise ConfigError(Problem(str(copy_path), "the study copy that `neurodrome study` writes",
                                      "something else"))
        if not resume:
            raise ConfigError(Problem(str(out), "an empty or new study directory (or --resume)",
                                      f"a study is already there ({STUDY_COPY})"))
        stored = study_from_data(kept["study"], kept["source"])
        if study is None:
            return stored
        changed = _differences(stored.data, study.data)
        if changed:
            raise ConfigError(Problem(str(out), "--resume with the study file the study started with "
                                      "(or without a study file, to use the copy)", "; ".join(changed[:8])))
        return study
    if study is None:
        raise ConfigError(Problem(str(out), f"a study directory with {STUDY_COPY} to resume", "no study there"))
    if out.exists() and not out.is_dir():
        raise ConfigError(Problem(str(out), "a study directory", "an existing file"))
    out.mkdir(parents=True, exist_ok=True)
    from ..jsonio import dump_json, write_atomic

    write_atomic(copy_path, dump_json({"format": "neurodrome-study-copy", "version": 1,
                                       "source": str(study.source), "study": study.data}))
    return study
