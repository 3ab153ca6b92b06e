"""The shipped champions: re-evaluate them on the bundled worlds and check the configs that made them.

Yardsticks from Soltoggio et al. 2008; Blynel & Floreano 2003 [practice]: in a static junction a fixed
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
    """N r_H with r_H read from the world file (Soltoggio et al. 2008; Blynel & Floreano 2003)."""
    return trials * max(load_world(world_path).task.site_values.values())


def test_static_champion_scores_the_maximum_on_ten_trials():
    """The static champion reaches the high-reward store in each of 10 trials: fitness N r_H."""
    (result,) = evaluate(STATIC, [str(ASSETS / "champion-static.net.json")], seed=1, trials=10)
    assert result.fault is None
    assert result.fitness == pytest.approx(_maximum(STATIC, 10))
    assert all(t.site == "east-store" and not t.crashed for t in result.trials)


@pytest.mark.slow
def test_static_champion_scores_the_maximum_on_all_trials():
    """All 100 trials of the bundled static junction: fitness N r_H (Soltoggio et al. 2008; Blynel & Floreano 2003)."""
    (result,) = evaluate(STATIC, [str(ASSETS / "champion-static.net.json")], seed=1)
    assert result.fitness == pytest.approx(_maximum(STATIC, load_world(STATIC).task.trials))


def _same_arm_plateau(result, world_path: Path) -> float:
    """Best score of always choosing one arm, from the relocation this evaluation drew:
    sum over trials of that arm's value (Soltoggio et al. 2008; Blynel & Floreano 2003: the same-arm plateau)."""
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
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_restock_champion_beats_the_same_arm_plateau(seed):
    """On the bundled 100-trial relocating junction the champion beats always-west and always-east alike."""
    champion, same_arm = evaluate(RESTOCK, [str(ASSETS / "champion-restock.net.json"), "courier-same-arm"],
                                  seed=seed, agent_ids=[0, 0])
    assert champion.fault is None
    plateau = _same_arm_plateau(champion, RESTOCK)
    assert same_arm.fitness <= plateau + 1e-9  # the bundled always-left agent is on the plateau or below
    assert champion.fitness > plateau


@pytest.mark.parametrize("config, genome, network, world", [
    ("evolve-static.json", "champion-static.genome.json", "champion-static.net.json", "worlds/clinic-junction.json"),
    ("evolve-restock-3.json", "champion-restock.genome.json", "champion-restock.net.json",
     "assets/clinic-junction-restock-wider.json")])
def test_shipped_configs_and_genomes_match_the_champions(config, genome, network, world):
    """Each shipped config validates, and the champion's genome converts to the shipped network's wiring."""
    config = load_config(ASSETS / config)
    assert config.seed >= 0 and config.generations >= 1
    layout = GenomeLayout.from_channels(load_world(ROOT / world).observation_channels())
    shipped = load_network(ASSETS / network)
    rebuilt = to_network_data(load_genome(ASSETS / genome, layout), layout)
    assert [c.model_dump() for c in shipped.connections] == [
        c.model_dump() for c in load_network_data(rebuilt).connections]


def load_network_data(data: dict):
    """Validate a network description in memory (the evaluator's own entry point)."""
    from neurodrome.control.spec import network_from_data

    return network_from_data(data)


#: the restock champion's incremental chain: (config, world it evolves on, genome it writes)
STAGES = [("evolve-restock-1.json", "clinic-junction-restock-early.json", "restock-stage1.genome.json"),
          ("evolve-restock-2.json", "clinic-junction-restock-wide.json", "restock-stage2.genome.json"),
          ("evolve-restock-3.json", "clinic-junction-restock-wider.json", "champion-restock.genome.json")]


def test_restock_stages_chain_from_the_static_champion():
    """Stage 1 starts from the evolved static champion and every later stage from the genome
    the stage before it wrote; the stage worlds are the bundled world's task with only the
    relocation window, the trial count and (stage 1) the time limit changed."""
    bundled = load_world(RESTOCK)
    starts = [load_config(ASSETS / config).start_genome for config, _, _ in STAGES]
    assert Path(starts[0]).name == "champion-static.genome.json"
    assert [Path(s).name for s in starts[1:]] == [genome for _, _, genome in STAGES[:-1]]
    for _, world, genome in STAGES:
        stage = load_world(ASSETS / world)
        assert stage.robot == bundled.robot and stage.corridors == bundled.corridors
        assert stage.task.site_values == bundled.task.site_values and stage.task.trials == 20
        load_genome(ASSETS / genome, GenomeLayout.from_channels(stage.observation_channels()))


def _arms(result) -> str:
    return "".join({"east-store": "E", "west-store": "W"}.get(t.site, ".") for t in result.trials)


@pytest.mark.parametrize("seed", [0, 4])
def test_restock_champion_turns_after_the_restock_and_not_before(seed):
    """The champion's choice follows the rewards it collects (Soltoggio et al. 2008; Blynel & Floreano 2003, practice:
    only a controller that changes its choice after the relocation approaches the maximum):
    east store in every trial up to the restock, west within three trials after it, and west
    in nearly all trials from then on."""
    (result,) = evaluate(RESTOCK, [str(ASSETS / "champion-restock.net.json")], seed=seed, agent_ids=[0])
    (relocation,) = result.relocations
    arms = _arms(result)
    k = relocation.after_trial
    assert set(arms[:k]) == {"E"}
    first_west = arms.index("W")
    assert k <= first_west <= k + 3
    assert arms[first_west:].count("W") >= 0.9 * len(arms[first_west:])


def test_restock_champion_keeps_its_arm_when_nothing_moves():
    """In the static junction (no relocation) the champion never leaves the paying east store:
    its switch in the relocating world is caused by the low rewards, not by a trial count."""
    (result,) = evaluate(STATIC, [str(ASSETS / "champion-restock.net.json")], seed=1, trials=40)
    assert _arms(result) == "E" * 40
    assert result.fitness == pytest.approx(_maximum(STATIC, 40))


@pytest.mark.slow
def test_stage_3_run_reproduces_the_shipped_champion(tmp_path):
    """Running the shipped stage-3 config on its world reproduces the shipped champion genome
    bit for bit (the evolver is deterministic given config, seed and start genome)."""
    import json

    from neurodrome.cli import main

    config, world, genome = STAGES[-1]
    out = tmp_path / "stage3"
    assert main(["evolve", str(ASSETS / world), "--config", str(ASSETS / config), "-o", str(out),
                 "--workers", "2", "--quiet"]) == 0
    produced = json.loads((out / "champion.genome.json").read_text())
    shipped = json.loads((ASSETS / genome).read_text())
    assert produced["genome"] == shipped["genome"] and produced["generation"] == shipped["generation"]
