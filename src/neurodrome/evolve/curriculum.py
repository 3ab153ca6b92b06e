"""A curriculum run: stages of evolution, each on its own world, advanced by a rule.

A staged run directory holds one plain run directory per stage reached (``stage-1/``,
``stage-2/``, ...; each exactly what ``neurodrome evolve`` writes for that stage's world,
configuration and seed) and, for reports, a ``run.json`` and ``log.jsonl`` of its own over
the whole budget: line g is the g-th generation of the run, whatever its stage, with the
keys ``stage`` (1-based) and ``stage_generation``. Its ``best_so_far`` is the best fitness
of the generations so far in any stage (stage worlds differ, so compare it across runs of
one curriculum, not across stages). ``best.net.json`` and ``champion.genome.json`` are the
champion of the stage the run is in.

Stage k + 1 starts from stage k's ``champion.genome.json`` as its ``start_genome`` (every
genome of its generation 0 a mutated copy, as in incremental evolution), so a curriculum of
``after`` rules gives bit for bit what the same stages run one by one with ``neurodrome
evolve`` give. The rule is checked on the stage's log after every generation; everything
the run needs to continue is on disk, so ``resume`` rebuilds the stage it was in from the
stage directories and continues it.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ..errors import ConfigError
from ..jsonio import read_json_file, write_atomic
from ..world import load_world
from .config import EvolveConfig
from .rundir import HEADER_NAME, LOG_NAME, append_log_line, log_line, write_run_header
from .run import BEST_NAME, CHECKPOINT_NAME, GENOME_NAME, Run
from .studyfile import Advance

STAGE_PREFIX = "stage-"


class StagedRun:
    """Run ``r`` of a curriculum arm: the same interface a study steps (:meth:`start`,
    :meth:`step`, :attr:`done`, :attr:`generation`)."""

    def __init__(self, stages: list[tuple[str, int, EvolveConfig, Advance | None]], run_dir: str | Path,
                 treatment: str, run_index: int, *, budget_generations: int | None,
                 budget_evaluations: int | None, name: str, header_extra: dict[str, Any] | None = None) -> None:
        self.stages = stages
        self.run_dir = Path(run_dir)
        self.treatment = treatment
        self.index = run_index
        self.seed = stages[0][1] + run_index
        self.name = name
        self.header_extra = dict(header_extra or {})
        self.budget_generations = budget_generations
        self.budget_evaluations = budget_evaluations
        self._worlds = [load_world(world) for world, *_ in stages]
        self.stage = 0  #: 0-based index of the stage the run is in
        self.current: Run | None = None
        self.offset = 0  #: run generations before the current stage
        self.spent = 0  #: evaluations before the current stage
        self.best_so_far = float("-inf")
        self._bests: list[float] = []  #: best fitness of each generation of the current stage
        self._finished = False

    # -- what a study reads ---------------------------------------------------------------
    @property
    def config(self) -> EvolveConfig:
        """The current stage's configuration, with ``generations`` the run's whole budget."""
        config = self.stages[self.stage][2]
        return config.model_copy(update={"generations": self.total_generations})

    @property
    def total_generations(self) -> int:
        if self.budget_generations is not None:
            return self.budget_generations
        return self.generation + (0 if self.done else 1)  # unknown ahead with an evaluation budget

    @property
    def generation(self) -> int:
        return self.offset + (self.current.generation if self.current is not None else 0)

    @property
    def done(self) -> bool:
        return self._finished

    @property
    def champion_generation(self) -> int:
        if self.current is None or self.current.champion_generation < 0:
            return -1
        return self.offset + self.current.champion_generation

    @property
    def population(self) -> Any:
        return self.current.population if self.current is not None else None

    # -- set up -------------------------------------------------------------------------------
    def _stage_dir(self, k: int) -> Path:
        return self.run_dir / f"{STAGE_PREFIX}{k + 1}"

    def _stage_run(self, k: int) -> Run:
        world, seed, config, _ = self.stages[k]
        if k > 0:
            config = config.model_copy(update={"start_genome": str(self._stage_dir(k - 1) / GENOME_NAME)})
        config = config.model_copy(update={"generations": self._stage_cap(k, config)})
        return Run(world, config, self._stage_dir(k), self.treatment, seed + self.index, world=self._worlds[k],
                   name=self.name, header_extra={**self.header_extra, "stage": k + 1})

    def _stage_cap(self, k: int, config: EvolveConfig) -> int:
        """Generations stage k may run: to its rule's cap and within the budget."""
        left = self._left_generations(config)
        advance = self.stages[k][3]
        if k < len(self.stages) - 1 and advance is not None and advance.after is not None:
            left = min(left, advance.after)
        return max(left, 1)

    def _left_generations(self, config: EvolveConfig) -> int:
        if self.budget_generations is not None:
            return self.budget_generations - self.offset
        return (self.budget_evaluations - self.spent) // (config.population * config.evaluation.repeats)

    def start(self, resume: bool) -> None:
        """Start at stage 1, or (``resume``) continue the stage the run had reached."""
        reached = 0
        if resume:
            while self._stage_dir(reached + 1).is_dir() and (self._stage_dir(reached + 1) / HEADER_NAME).is_file():
                reached += 1
        self.offset = self.spent = 0
        self.best_so_far = float("-inf")
        lines: list[str] = []
        for k in range(reached):  # the finished stages, as their logs say
            done = self._stage_lines(k)
            lines += self._combined(k, done, len(lines))
            self.offset += len(done)
            self.spent += len(done) * self._cost(k)
        self.stage = reached
        self.current = self._stage_run(reached)
        self.run_dir.mkdir(parents=True, exist_ok=True)
        self.current.start(resume)
        self._bests = []
        if resume and (self.current.run_dir / CHECKPOINT_NAME).is_file():
            done = self._stage_lines(reached)
            lines += self._combined(reached, done, len(lines))
            self._bests = [float(r["best"]) for r in done]
        self._write_header()
        write_atomic(self.run_dir / LOG_NAME, "".join(lines))
        self._finished = False
        self._advance()

    def _cost(self, k: int) -> int:
        config = self.stages[k][2]
        return config.population * config.evaluation.repeats

    def _stage_lines(self, k: int) -> list[dict[str, Any]]:
        """The whole generations of stage k's log (those its checkpoint holds)."""
        import json

        directory = self._stage_dir(k)
        checkpoint = directory / CHECKPOINT_NAME
        if not checkpoint.is_file():
            return []
        done = int(read_json_file(checkpoint, ConfigError)["generations_done"])
        text = (directory / LOG_NAME).read_text(encoding="utf-8").splitlines(keepends=True)
        return [json.loads(line) for line in text[:done] if line.endswith("\n")]

    def _combined(self, k: int, records: list[dict[str, Any]], first: int) -> list[str]:
        out = []
        for g, rec in enumerate(records):
            out.append(self._line(k, first + g, rec))
        return out

    def _line(self, k: int, generation: int, rec: dict[str, Any]) -> str:
        self.best_so_far = max(self.best_so_far, float(rec["best"]))
        extra = {key: value for key, value in rec.items()
                 if key not in ("generation", "best", "median", "mean", "species", "eval_seconds", "best_so_far",
                                "champion_generation")}
        return log_line(generation, best=rec["best"], median=rec["median"], mean=rec["mean"],
                        species=rec["species"], eval_seconds=rec["eval_seconds"], best_so_far=self.best_so_far,
                        stage=k + 1, stage_generation=int(rec["generation"]), **extra)

    def _write_header(self) -> None:
        world, _, config, _ = self.stages[self.stage]
        write_run_header(self.run_dir, treatment=self.treatment, seed=self.seed, world=world,
                         config=self.config.model_dump(mode="json"), world_name=self._worlds[self.stage].name,
                         trials=self.current.trials, stages=[s[0] for s in self.stages], **self.header_extra)

    # -- one generation --------------------------------------------------------------------
    def step(self, executor: Any = None) -> dict[str, Any]:
        """Evaluate and breed one generation of the current stage; advance when its rule says so."""
        k = self.stage
        rec = self.current.step(executor)
        self._bests.append(float(rec["best"]))
        append_log_line(self.run_dir, self._line(k, self.offset + rec["generation"], rec))
        for name in (BEST_NAME, GENOME_NAME):
            write_atomic(self.run_dir / name, (self.current.run_dir / name).read_bytes())
        out = dict(rec, generation=self.offset + rec["generation"], stage=k + 1,
                   stage_generation=rec["generation"], best_so_far=self.best_so_far)
        self._advance()
        return out

    def _advance(self) -> None:
        """Move to the next stage when the current one is over; mark the run done at the budget."""
        run = self.current
        spent = self.spent + run.generation * self._cost(self.stage)
        used = self.offset + run.generation
        over_budget = (used >= self.budget_generations if self.budget_generations is not None
                       else self.budget_evaluations - spent < self._cost(self.stage))
        last = self.stage == len(self.stages) - 1
        rule = self.stages[self.stage][3]
        if not last and rule is not None and rule.met(self._bests) and not over_budget:
            self.offset, self.spent = used, spent
            self.stage += 1
            nxt = self._stage_run(self.stage)
            if self.budget_evaluations is not None and \
                    self.budget_evaluations - self.spent < self._cost(self.stage):
                self._finished = True
                return
            self.current = nxt
            self.current.start(False)
            self._bests = []
            self._write_header()
            return
        self._finished = over_budget or run.done
