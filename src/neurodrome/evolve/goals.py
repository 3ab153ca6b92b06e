"""Did a run get there? A study's goal, checked on each run's champion (``best.net.json``).

- ``maximum``: re-evaluated on ``trials`` trials of the goal world (default: the run's own
  world and its trial count), the champion scores the task's maximum, trials x the highest
  site value, for every seed (the yardstick of a static junction: Soltoggio et al. 2008,
  ALife XI; Blynel & Floreano 2003, EvoWorkshops; a fixed controller can reach it).
- ``switching``: reward-driven switching. On the relocating goal world the champion scores
  above the same-arm plateau of the relocations drawn (the best score of always taking one
  arm, computed from the evaluation's own relocation record) for every seed, and in the
  static world it reaches the same site in every trial, so a switch there cannot come from
  counting trials. Every champion of one evaluation meets the same draws (agent id 0).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..evaluate import evaluate
from ..world import load_world
from .run import BEST_NAME
from .studyfile import Goal


@dataclass(frozen=True)
class GoalResult:
    reached: bool
    detail: str  #: what was measured, for the report's table


def same_arm_plateau(result: Any, site_values: dict[str, float]) -> float:
    """Best fitness of always choosing one site over ``result``'s trials, with the
    relocations that evaluation drew (reward only; every trial reaches the site)."""
    values = dict(site_values)
    totals = dict.fromkeys(values, 0.0)
    changes = {r.after_trial: r.after for r in result.relocations}
    for trial in range(1, len(result.trials) + 1):
        for site in totals:
            totals[site] += values[site]
        values.update(changes.get(trial, {}))
    return max(totals.values())


def check_goal(goal: Goal, folder: Path, run_dirs: list[Path], run_worlds: list[str]) -> list[GoalResult]:
    """Check ``goal`` (paths relative to ``folder``, the study file's) for each run."""
    nets = [str(Path(d) / BEST_NAME) for d in run_dirs]
    missing = [n for n in nets if not Path(n).is_file()]
    if missing:
        return [GoalResult(False, "no champion yet") if n in missing else GoalResult(False, "not checked")
                for n in nets]
    if goal.kind == "maximum":
        return _maximum(goal, folder, nets, run_worlds)
    return _switching(goal, folder, nets)


def _maximum(goal: Goal, folder: Path, nets: list[str], run_worlds: list[str]) -> list[GoalResult]:
    out: list[GoalResult | None] = [None] * len(nets)
    by_world: dict[str, list[int]] = {}
    for k, world in enumerate(run_worlds):
        by_world.setdefault(str(folder / goal.world) if goal.world else world, []).append(k)
    for world_path, members in by_world.items():
        world = load_world(world_path)
        trials = goal.trials or world.task.trials
        top = trials * max(world.task.site_values.values())
        scores = {k: [] for k in members}
        for seed in goal.seeds:
            results = evaluate(world, [nets[k] for k in members], seed=seed, trials=trials,
                               agent_ids=[0] * len(members))
            for k, r in zip(members, results):
                scores[k].append(r.fitness if r.fitness is not None else float("nan"))
        for k in members:
            low = min(scores[k])
            out[k] = GoalResult(all(s >= top - 1e-9 for s in scores[k]),
                                f"{low:.2f} of {top:.2f} ({trials} trials, worst of {len(goal.seeds)} seeds)")
    return [r for r in out if r is not None]


def _switching(goal: Goal, folder: Path, nets: list[str]) -> list[GoalResult]:
    world = load_world(folder / goal.world) if goal.world else None
    if world is None:
        raise ValueError("a switching goal needs its relocating world")
    static = load_world(folder / goal.static_world)
    margins: list[list[float]] = [[] for _ in nets]
    for seed in goal.seeds:
        results = evaluate(world, nets, seed=seed, trials=goal.trials, agent_ids=[0] * len(nets))
        for k, r in enumerate(results):
            fitness = r.fitness if r.fitness is not None else float("-inf")
            margins[k].append(fitness - same_arm_plateau(r, world.task.site_values))
    arms = evaluate(static, nets, seed=goal.seeds[0], agent_ids=[0] * len(nets))
    out = []
    for k, r in enumerate(arms):
        sites = {t.site for t in r.trials}
        keeps = len(sites) == 1 and None not in sites
        worst = min(margins[k])
        out.append(GoalResult(worst > 1e-9 and keeps,
                              f"{worst:+.2f} against the same-arm plateau (worst of {len(goal.seeds)} seeds); "
                              + ("one arm in the static world" if keeps else
                                 f"static world: sites {sorted(map(str, sites))}")))
    return out
