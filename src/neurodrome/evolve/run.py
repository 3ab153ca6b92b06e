"""The run loop: evaluate, log, save the champion, checkpoint; resume; repeated runs.

A run directory (format in :mod:`neurodrome.evolve.rundir`) holds, after every generation:

- ``log.jsonl``: one line per generation (best, median, mean, species, eval_seconds,
  best_so_far, and extras: threshold, archive size, mean network size, evaluation seed);
- ``best.net.json``: the best genome so far as a network file that ``neurodrome evaluate``,
  ``watch`` and ``record`` accept;
- ``champion.genome.json``: the same champion as a genome (format ``neurodrome-genome``),
  which a later run can start from (configuration field ``start_genome``);
- ``checkpoint.json``: the whole population with the random generator's state, written
  atomically after the log line. ``--resume`` drops log lines past the checkpoint (a kill
  between the two writes) and continues; the rest of the run is bit-identical to an
  undisturbed one (``eval_seconds`` aside, which is wall time).

Each generation every genome becomes a network description and goes through
:func:`neurodrome.evaluate.evaluate` with the run's executor (in-process, a
:class:`~neurodrome.executors.LocalPool` kept warm for the whole study, or a Dask
scheduler). The runs of a study go side by side on one executor, one thread each
(:mod:`neurodrome.evolve.study`); a run touches only its own population, generator and
directory, so :meth:`Run.step` may run in any thread.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

import numpy as np

from ..errors import ConfigError, Problem
from ..evaluate import evaluate
from ..jsonio import dump_json, read_json_file, write_atomic
from ..world import WorldSpec, load_world
from .config import EvolveConfig, config_from_data
from .genome import Genome, GenomeLayout, to_network_data
from .neat import Population
from .rundir import HEADER_NAME, LOG_NAME, append_log_line, log_line, write_run_header

CHECKPOINT_NAME = "checkpoint.json"
BEST_NAME = "best.net.json"
GENOME_NAME = "champion.genome.json"
GENOME_FORMAT = "neurodrome-genome"
CHECKPOINT_FORMAT = "neurodrome-evolve-checkpoint"

#: progress(treatment, seed, generation, generations, best, median, best_so_far)
Progress = Callable[[str, int, int, int, float, float, float], None]


@dataclass
class RunSummary:
    run_dir: Path
    treatment: str
    seed: int
    generations: int
    best_so_far: float
    champion_generation: int
    seconds: float


def load_genome(path: str | Path, layout: GenomeLayout) -> Genome:
    """Read a ``champion.genome.json``; its input channels must be the world's."""
    data = read_json_file(path, ConfigError)
    if not isinstance(data, dict) or data.get("format") != GENOME_FORMAT:
        raise ConfigError(Problem(f"{path} $.format", repr(GENOME_FORMAT), repr(data.get("format") if isinstance(data, dict)
                                                                             else type(data).__name__)))
    if tuple(data.get("channels", ())) != layout.channels:
        raise ConfigError(Problem(f"{path} $.channels", f"the world's input channels {list(layout.channels)}",
                                  repr(data.get("channels"))))
    try:
        return Genome.from_state(data["genome"])
    except (KeyError, TypeError, ValueError) as exc:
        raise ConfigError(Problem(f"{path} $.genome", "a genome written by neurodrome evolve", str(exc))) from None


def evaluation_seed(config: EvolveConfig, seed: int, generation: int) -> int:
    """The evaluation seed of a generation: fixed, or drawn from (run seed, generation)."""
    if isinstance(config.evaluation.seed, int):
        return config.evaluation.seed
    return int(np.random.SeedSequence([seed, generation]).generate_state(1, dtype=np.uint32)[0])


def behaviours_of(results: list, kind: str, trials: int) -> np.ndarray:
    """Behaviour descriptors (N, T) outcome codes or (N, T, 2) end positions; a faulted
    result's missing trials count as crashed at the origin."""
    if kind == "outcomes":
        out = np.full((len(results), trials), -2, dtype=np.int64)
        for k, r in enumerate(results):
            codes = r.outcomes[:trials]
            out[k, :len(codes)] = codes
        return out
    pos = np.zeros((len(results), trials, 2))
    for k, r in enumerate(results):
        ends = [t.end_position for t in r.trials][:trials]
        if ends:
            pos[k, :len(ends)] = ends
    return pos


def _config_key(config: EvolveConfig) -> dict[str, Any]:
    # what must match to resume: everything but how long the run goes on
    data = config.model_dump(mode="json")
    data.pop("generations")
    data.pop("description")
    return data


class Run:
    """One seeded run of one treatment in one run directory."""

    def __init__(self, world_path: str | Path, config: EvolveConfig, run_dir: str | Path, treatment: str,
                 seed: int, *, world: WorldSpec | None = None, name: str | None = None,
                 header_extra: dict[str, Any] | None = None) -> None:
        self.world_path = str(world_path)
        self.name = name or f"{treatment}-{seed}"  #: the run's name in a study's progress and reports
        self.header_extra = dict(header_extra or {})  #: more keys for run.json (a study's arm name)
        self.world = world if world is not None else load_world(world_path)
        self.config = config
        self.run_dir = Path(run_dir)
        self.treatment = treatment
        self.seed = seed
        self.layout = GenomeLayout.from_channels(self.world.observation_channels())
        self.trials = config.evaluation.trials or self.world.task.trials
        self.population: Population | None = None
        self.best_so_far = -np.inf
        self.champion: Genome | None = None
        self.champion_generation = -1

    @property
    def generation(self) -> int:
        """Generations done (0 before :meth:`start`)."""
        return self.population.generation if self.population is not None else 0

    @property
    def done(self) -> bool:
        return self.population is not None and self.population.generation >= self.config.generations

    # -- start or resume ----------------------------------------------------------------
    def start(self, resume: bool) -> None:
        checkpoint = self.run_dir / CHECKPOINT_NAME
        if resume and checkpoint.is_file():
            self._restore(checkpoint)
            return
        if (self.run_dir / LOG_NAME).is_file() and not resume:
            raise ConfigError(Problem(str(self.run_dir), "an empty or new run directory (or --resume)",
                                      f"a run is already there ({LOG_NAME})"))
        self.run_dir.mkdir(parents=True, exist_ok=True)
        (self.run_dir / LOG_NAME).write_text("", encoding="utf-8")
        write_run_header(self.run_dir, treatment=self.treatment, seed=self.seed, world=self.world_path,
                         config=self.config.model_dump(mode="json"), world_name=self.world.name,
                         trials=self.trials, **self.header_extra)
        start = load_genome(self.config.start_genome, self.layout) if self.config.start_genome else None
        self.population = Population(self.config, self.layout, self.treatment, self.seed, start)

    def _restore(self, checkpoint: Path) -> None:
        data = read_json_file(checkpoint, ConfigError)
        if not isinstance(data, dict) or data.get("format") != CHECKPOINT_FORMAT:
            raise ConfigError(Problem(str(checkpoint), f"a {CHECKPOINT_FORMAT} file", "something else"))
        header = read_json_file(self.run_dir / HEADER_NAME, ConfigError)
        saved = config_from_data(header.get("config"), f"{self.run_dir / HEADER_NAME} $.config")
        if _config_key(saved) != _config_key(self.config) or header.get("treatment") != self.treatment \
                or header.get("seed") != self.seed:
            raise ConfigError(Problem(str(self.run_dir), "--resume with the configuration, treatment and seed the run "
                                      "started with (only generations may change)", "a different configuration"))
        done = int(data["generations_done"])
        if done > self.config.generations:
            raise ConfigError(Problem("--generations", f"at least {done} (the run has that many already)",
                                      str(self.config.generations)))
        self.population = Population.from_state(self.config, self.layout, data["population"])
        self.best_so_far = float(data["best_so_far"])
        self.champion = Genome.from_state(data["champion"])
        self.champion_generation = int(data["champion_generation"])
        log = self.run_dir / LOG_NAME
        lines = log.read_text(encoding="utf-8").splitlines(keepends=True) if log.is_file() else []
        write_atomic(log, "".join(line for line in lines[:done] if line.endswith("\n")))
        if self.config.generations != saved.generations:
            write_run_header(self.run_dir, treatment=self.treatment, seed=self.seed, world=self.world_path,
                             config=self.config.model_dump(mode="json"), world_name=self.world.name,
                             trials=self.trials, **self.header_extra)

    # -- one generation -----------------------------------------------------------------
    def step(self, executor: Any = None) -> dict[str, Any]:
        """Evaluate the current generation, breed the next, write log, champion, checkpoint."""
        pop = self.population
        gen = pop.generation
        seed = evaluation_seed(self.config, self.seed, gen)
        nets = [to_network_data(g, self.layout, name=f"{self.treatment}-g{gen}-{k}") for k, g in enumerate(pop.genomes)]
        n, repeats = len(nets), self.config.evaluation.repeats
        # lifetime r of genome k is agent (r, k); its draws come from agent id r when every
        # individual meets the same schedule, else from its own id r * n + k
        if self.config.evaluation.same_schedule:
            ids = [r for r in range(repeats) for _ in range(n)]
        else:
            ids = list(range(repeats * n))
        started = time.perf_counter()
        results = evaluate(self.world, nets * repeats, seed=seed, trials=self.trials, executor=executor,
                           agent_ids=ids)
        seconds = time.perf_counter() - started
        raw = np.array([r.fitness if r.fitness is not None else np.nan for r in results], dtype=float)
        raw = raw.reshape(repeats, n).mean(axis=0)  # a faulted lifetime makes the genome NaN
        fitness = np.where(np.isfinite(raw), raw, np.nanmin(raw) - 1.0 if np.any(np.isfinite(raw)) else -1.0)
        behaviours = None
        if self.config.objective.kind != "fitness":
            per_life = behaviours_of(results, self.config.objective.behaviour, self.trials)
            behaviours = np.concatenate([per_life[r * n:(r + 1) * n] for r in range(repeats)], axis=1)
        scores = pop.scores(fitness, behaviours)
        top = int(np.argmax(fitness))
        if fitness[top] > self.best_so_far:
            self.best_so_far = float(fitness[top])
            self.champion = pop.genomes[top].copy()
            self.champion_generation = gen
        sizes = [len([c for c in g.connections.values() if c.enabled]) for g in pop.genomes]
        hidden = [len(g.hidden) for g in pop.genomes]
        pop.tell(scores, fitness)
        record = dict(best=float(fitness[top]), median=float(np.median(fitness)), mean=float(np.mean(fitness)),
                      species=len(pop.species), eval_seconds=seconds, best_so_far=self.best_so_far,
                      threshold=pop.threshold, archive=len(pop.archive) if pop.archive is not None else 0,
                      mean_connections=float(np.mean(sizes)), mean_hidden=float(np.mean(hidden)),
                      eval_seed=seed, champion_generation=self.champion_generation)
        self._write_champion()
        append_log_line(self.run_dir, log_line(gen, **record))
        self._write_checkpoint()
        return {"generation": gen, **record}

    def _write_champion(self) -> None:
        data = to_network_data(
            self.champion, self.layout, name=f"{self.treatment}-{self.seed}-champion",
            description=(f"Evolved by neurodrome evolve: treatment {self.treatment}, seed {self.seed}, "
                         f"generation {self.champion_generation}, fitness {self.best_so_far!r} over "
                         f"{self.trials} trials in {self.world.name}."))
        write_atomic(self.run_dir / BEST_NAME, dump_json(data))
        genome = {"format": GENOME_FORMAT, "version": 1, "channels": list(self.layout.channels),
                  "fitness": self.best_so_far, "generation": self.champion_generation,
                  "genome": self.champion.state()}
        write_atomic(self.run_dir / GENOME_NAME, dump_json(genome))

    def _write_checkpoint(self) -> None:
        data = {"format": CHECKPOINT_FORMAT, "version": 1, "generations_done": self.population.generation,
                "best_so_far": self.best_so_far, "champion": self.champion.state(),
                "champion_generation": self.champion_generation, "population": self.population.state()}
        write_atomic(self.run_dir / CHECKPOINT_NAME, dump_json(data))

    def run(self, *, executor: Any = None, resume: bool = False, progress: Progress | None = None) -> RunSummary:
        started = time.perf_counter()
        self.start(resume)
        while self.population.generation < self.config.generations:
            rec = self.step(executor)
            if progress:
                progress(self.treatment, self.seed, rec["generation"], self.config.generations, rec["best"],
                         rec["median"], rec["best_so_far"])
        return RunSummary(self.run_dir, self.treatment, self.seed, self.population.generation, self.best_so_far,
                          self.champion_generation, time.perf_counter() - started)


def run_dirs(out_dir: str | Path, config: EvolveConfig) -> list[tuple[str, int, Path]]:
    """(treatment, seed, directory) of every run: ``out_dir`` itself for a single run,
    else ``out_dir/<treatment>-<seed>``."""
    out = Path(out_dir)
    plan = [(t, config.seed + r) for t in config.treatments for r in range(config.runs)]
    if len(plan) == 1:
        return [(plan[0][0], plan[0][1], out)]
    return [(t, s, out / f"{t}-{s}") for t, s in plan]


def evolve(world_path: str | Path, config: EvolveConfig, out_dir: str | Path, **options: Any) -> list[RunSummary]:
    """Run a whole study side by side; see :func:`neurodrome.evolve.study.evolve`."""
    from .study import evolve as evolve_study

    return evolve_study(world_path, config, out_dir, **options)
