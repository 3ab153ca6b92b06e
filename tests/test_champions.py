"""The shipped champions: re-evaluate them on the bundled worlds and check the configs that made them.

Yardsticks from ../shared/REFERENCES.md section 3 [practice]: in a static junction a fixed
controller can score the maximum, N r_H (every trial at the high-reward site); on the
relocating junction a controller that always turns the same way is stuck near a plateau,
here measured by the bundled courier-same-arm agent under the same seed.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from neurodrome.control.spec import load_network
from neurodrome.evaluate import evaluate
from neurodrome.evolve.config import load_config
from neurodrome.evolve.genome import GenomeLayout, to_network_data
from neurodrome.evolve.run import load_genome
from neurodrome.world import load_world

ROOT = Path(__file__).resolve().parents[1]
ASSETS = ROOT / "assets"
STATIC = ROOT / "worlds" / "clinic-junction.json"
RESTOCK = ROOT / "worlds" / "clinic-junction-restock.json"


def _maximum(world_path: Path, trials: int) -> float:
    """N r_H with r_H read from the world file (REFERENCES.md section 3)."""
    return trials * max(load_world(world_path).task.site_values.values())


def test_static_champion_scores_the_maximum_on_ten_trials():
    """The static champion reaches the high-reward store in each of 10 trials: fitness N r_H."""
    (result,) = evaluate(STATIC, [str(ASSETS / "champion-static.net.json")], seed=1, trials=10)
    assert result.fault is None
    assert result.fitness == pytest.approx(_maximum(STATIC, 10))
    assert all(t.site == "east-store" and not t.crashed for t in result.trials)


@pytest.mark.slow
def test_static_champion_scores_the_maximum_on_all_trials():
    """All 100 trials of the bundled static junction: fitness N r_H (REFERENCES.md section 3)."""
    (result,) = evaluate(STATIC, [str(ASSETS / "champion-static.net.json")], seed=1)
    assert result.fitness == pytest.approx(_maximum(STATIC, load_world(STATIC).task.trials))


def _same_arm_plateau(result, world_path: Path) -> float:
    """Best score of always choosing one arm, from the relocation this evaluation drew:
    sum over trials of that arm's value (REFERENCES.md section 3: the same-arm plateau)."""
    world = load_world(world_path)
    values = dict(world.task.site_values)
    totals = dict.fromkeys(values, 0.0)
    changes = {r.after_trial: r.after for r in result.relocations}
    for trial in range(1, len(result.trials) + 1):
        for site in totals:
            totals[site] += values[site]
        values.update(changes.get(trial, {}))
    return max(totals.values())


@pytest.mark.slow
@pytest.mark.xfail(strict=True, reason="open: the shipped restock champion sits on the always-east plateau; "
                                       "no evolved learner yet (see assets/evolve-restock.json)")
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_restock_champion_beats_the_same_arm_plateau(seed):
    """On the bundled 100-trial relocating junction the champion beats always-west and always-east alike."""
    champion, same_arm = evaluate(RESTOCK, [str(ASSETS / "champion-restock.net.json"), "courier-same-arm"],
                                  seed=seed, agent_ids=[0, 0])
    assert champion.fault is None
    plateau = _same_arm_plateau(champion, RESTOCK)
    assert same_arm.fitness <= plateau + 1e-9  # the bundled always-left agent is on the plateau or below
    assert champion.fitness > plateau


@pytest.mark.parametrize("name, world", [("static", "worlds/clinic-junction.json"),
                                         ("restock", "assets/clinic-junction-restock-short.json")])
def test_shipped_configs_and_genomes_match_the_champions(name, world):
    """Each shipped config validates, and the champion's genome converts to the shipped network's wiring."""
    config = load_config(ASSETS / f"evolve-{name}.json")
    assert config.seed >= 0 and config.generations >= 1
    layout = GenomeLayout.from_channels(load_world(ROOT / world).observation_channels())
    genome = load_genome(ASSETS / f"champion-{name}.genome.json", layout)
    shipped = load_network(ASSETS / f"champion-{name}.net.json")
    rebuilt = to_network_data(genome, layout)
    assert [c.model_dump() for c in shipped.connections] == [
        c.model_dump() for c in load_network_data(rebuilt).connections]


def load_network_data(data: dict):
    """Validate a network description in memory (the evaluator's own entry point)."""
    from neurodrome.control.spec import network_from_data

    return network_from_data(data)
