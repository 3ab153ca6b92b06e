"""The evolver's configuration file: a validated JSON object with documented defaults.

Every field is optional; ``neurodrome evolve`` fills in the defaults below and writes the
complete configuration into ``run.json`` so a run can be repeated. Bad values raise
:class:`~neurodrome.errors.ConfigError` naming the field (``$.selection.method``), what was
expected and what was found. :func:`config_json_schema` exports the schema with every
field's default and description.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, StrictBool, StrictInt, model_validator

from ..errors import ConfigError, Problem
from ..jsonio import read_json_file, validate
from .genome import TREATMENTS, MutationRates

class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)


class EvaluationConfig(_Section):
    trials: StrictInt | None = Field(None, ge=1, description="trials per evaluation; null: the world's own count")
    seed: Literal["per-generation"] | StrictInt = Field(
        "per-generation",
        description="evaluation seed: 'per-generation' draws a new one each generation from the run seed "
                    "(a relocating task then varies its relocation trial), an integer fixes it")
    same_schedule: StrictBool = Field(
        True, description="every individual of a generation meets the same random draws (relocation trial), "
                          "so fitness differences come from the controllers alone")
    repeats: StrictInt = Field(
        1, ge=1, le=100, description="lifetimes per genome, each with its own random draws (relocation trial); "
                                     "fitness is their mean and the behaviour descriptor their concatenation, "
                                     "so one lucky draw does not make a champion")


class ObjectiveConfig(_Section):
    kind: Literal["fitness", "novelty", "mix"] = Field(
        "fitness", description="what selection maximises: fitness, novelty (sparseness of behaviour), or a mix")
    novelty_weight: float = Field(0.5, ge=0.0, le=1.0,
                                  description="weight of novelty in 'mix' (ranks of both, scaled to [0, 1])")
    behaviour: Literal["outcomes", "end_positions"] = Field(
        "outcomes", description="behaviour descriptor: per-trial outcome codes (Hamming distance) or end "
                                "positions (Euclidean), Lehman & Stanley 2011, Evolutionary Computation 19(2)")
    k: StrictInt = Field(15, ge=1, description="nearest neighbours in sparseness (Lehman & Stanley: about 15)")
    archive_threshold: float = Field(3.0, gt=0.0, description="initial archive threshold (adapts)")


class SpeciationConfig(_Section):
    target_species: StrictInt = Field(8, ge=1, description="the threshold adapts toward this many species")
    initial_threshold: float = Field(3.0, gt=0.0, description="compatibility threshold at generation 0")
    threshold_step: float = Field(0.3, gt=0.0, description="threshold change per generation")
    min_threshold: float = Field(0.1, gt=0.0, description="the threshold never drops below this")
    c_excess: float = Field(1.0, ge=0.0, description="distance weight of excess genes (c1)")
    c_disjoint: float = Field(1.0, ge=0.0, description="distance weight of disjoint genes (c2)")
    c_weight: float = Field(0.4, ge=0.0, description="distance weight of mean weight difference (c3)")
    c_rule: float = Field(0.4, ge=0.0, description="distance weight of mean rule-parameter difference")
    stagnation: StrictInt = Field(15, ge=1, description="a species whose best has not improved for this many "
                                                        "generations gets no offspring (the best species is kept)")


class SelectionConfig(_Section):
    method: Literal["tournament", "truncation"] = Field("tournament", description="parent selection within a species")
    tournament_size: StrictInt = Field(3, ge=1, description="contestants per tournament")
    survival: float = Field(0.3, gt=0.0, le=1.0, description="fraction of each species that may parent (truncation)")
    elitism: StrictInt = Field(1, ge=0, description="best genomes of the population copied unchanged")
    species_elitism_min_size: StrictInt = Field(
        5, ge=1, description="species of at least this size also keep their champion unchanged")
    crossover: float = Field(0.5, ge=0.0, le=1.0, description="probability an offspring has two parents")


class MutationConfig(_Section):
    add_neuron: float = Field(0.03, ge=0.0, le=1.0, description="split a connection with a standard neuron")
    add_modulatory: float = Field(0.03, ge=0.0, le=1.0, description="add a modulatory neuron (modulated treatment)")
    add_connection: float = Field(0.08, ge=0.0, le=1.0, description="connect two unconnected neurons")
    toggle_plastic: float = Field(0.05, ge=0.0, le=1.0, description="flip one connection's plasticity")
    toggle_enabled: float = Field(0.01, ge=0.0, le=1.0, description="flip one connection gene on or off")
    weight: float = Field(0.8, ge=0.0, le=1.0, description="perturb weights at all")
    weight_per_gene: float = Field(0.3, ge=0.0, le=1.0, description="then each weight with this probability")
    weight_sigma: float = Field(0.5, gt=0.0, description="standard deviation of a weight perturbation")
    weight_replace: float = Field(0.05, ge=0.0, le=1.0, description="a perturbed weight is redrawn instead")
    weight_range: float = Field(10.0, gt=0.0, description="weights and biases stay within +-this "
                                                          "(Soltoggio et al. 2008, ALife XI: [-10, 10], low confidence)")
    bias: float = Field(0.3, ge=0.0, le=1.0, description="perturb each neuron bias with this probability")
    bias_sigma: float = Field(0.3, gt=0.0, description="standard deviation of a bias perturbation")
    rule: float = Field(0.3, ge=0.0, le=1.0, description="perturb one rule parameter (eta, A, B, C or D)")
    rule_sigma: float = Field(0.2, gt=0.0, description="standard deviation for A..D")
    eta_sigma: float = Field(1.0, gt=0.0, description="standard deviation for eta")
    eta_range: float = Field(100.0, gt=0.0, description="eta within +-this (Soltoggio et al. 2008, ALife XI: [-100, 100])")
    rule_range: float = Field(1.0, gt=0.0, description="A..D within +-this (Soltoggio et al. 2008, ALife XI: [-1, 1])")
    initial_weight_sigma: float = Field(1.0, gt=0.0, description="standard deviation of the starting weights")

    def rates(self) -> MutationRates:
        return MutationRates(**self.model_dump(exclude={"initial_weight_sigma"}))


class EvolveConfig(_Section):
    """The whole configuration (format ``neurodrome-evolve-config``)."""

    format: Literal["neurodrome-evolve-config"] = "neurodrome-evolve-config"
    version: Literal[1] = 1
    description: str = Field("", max_length=4000)
    generations: StrictInt = Field(100, ge=1, description="generations per run")
    population: StrictInt = Field(150, ge=2, le=100_000, description="genomes per generation")
    seed: StrictInt = Field(1, ge=0, description="seed of the first run; run r uses seed + r")
    runs: StrictInt = Field(1, ge=1, description="independent runs per treatment")
    start_genome: str | None = Field(
        None, description="optional genome file (champion.genome.json of an earlier run) that seeds generation 0: "
                          "every genome starts as a mutated copy of it (incremental evolution); a relative path "
                          "is taken from the configuration file's folder")
    treatments: list[Literal["modulated", "plastic", "fixed"]] = Field(
        ["modulated"], min_length=1, description=f"treatments to run, of {', '.join(TREATMENTS)}")
    evaluation: EvaluationConfig = Field(default_factory=EvaluationConfig)
    objective: ObjectiveConfig = Field(default_factory=ObjectiveConfig)
    speciation: SpeciationConfig = Field(default_factory=SpeciationConfig)
    selection: SelectionConfig = Field(default_factory=SelectionConfig)
    mutation: MutationConfig = Field(default_factory=MutationConfig)

    @model_validator(mode="after")
    def _consistent(self) -> EvolveConfig:
        if len(set(self.treatments)) != len(self.treatments):
            raise ValueError("each treatment once in $.treatments")
        if self.selection.elitism >= self.population:
            raise ValueError(f"selection.elitism below the population size {self.population}")
        return self


def config_from_data(data: Any, source: str = "<config>") -> EvolveConfig:
    """Validate parsed JSON (or a dict) as an evolver configuration."""
    if not isinstance(data, dict):
        raise ConfigError(Problem(f"{source} $", "a JSON object", type(data).__name__), source=source)
    return validate(EvolveConfig, data, source, ConfigError)


def load_config(path: str | Path | None) -> EvolveConfig:
    """Read a configuration file; ``None`` gives the defaults."""
    if path is None:
        return EvolveConfig()
    config = config_from_data(read_json_file(path, ConfigError), str(path))
    if config.start_genome is not None and not Path(config.start_genome).is_absolute():
        config = config.model_copy(update={"start_genome": str(Path(path).parent / config.start_genome)})
    return config


def with_overrides(config: EvolveConfig, **overrides: Any) -> EvolveConfig:
    """A copy with top-level fields replaced (command-line options); ``None`` leaves a field."""
    data = config.model_dump(mode="json")
    data.update({k: v for k, v in overrides.items() if v is not None})
    return config_from_data(data, "command line")


def config_json_schema() -> dict:
    """JSON Schema of the configuration, every field with its default and description."""
    schema = EvolveConfig.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "neurodrome evolver configuration, version 1"
    return schema
