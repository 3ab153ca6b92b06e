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


def _scaffold_builder():
    """assets/build_restock_scaffold.py imported by path (it is a script, not a package module)."""
    import importlib.util

    spec = importlib.util.spec_from_file_location("build_restock_scaffold", ASSETS / "build_restock_scaffold.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_restock_scaffold_genome_is_the_builders_output():
    """The shipped scaffold genome is exactly what assets/build_restock_scaffold.py builds."""
    layout = GenomeLayout.from_channels(load_world(RESTOCK).observation_channels())
    shipped = load_genome(ASSETS / "restock-scaffold.genome.json", layout)
    assert shipped.state() == _scaffold_builder().build().state()


def _plastic_weight_after(rewards: list[float], start_sign: float) -> float:
    """The champion's one plastic weight after feeding ``rewards`` (one a control step) on an
    otherwise empty observation, the weight first set to +-its initial size."""
    import numpy as np

    from neurodrome.control.network import NetworkController
    from neurodrome.control.protocol import Layout
    from neurodrome.control.spec import network_to_data

    spec = load_network(ASSETS / "champion-restock.net.json")
    (plastic,) = [c for c in spec.connections if c.plastic]
    layout = Layout.of(load_world(RESTOCK))
    data = network_to_data(spec)
    for c in data["connections"]:
        if c["plastic"]:
            c["weight"] = start_sign * abs(c["weight"])
    ctrl = NetworkController([load_network_data(data)], layout)
    ids = ctrl.neuron_ids[0]
    j, i = ids.index(plastic.source), ids.index(plastic.target)
    obs = np.zeros((1, layout.size))
    obs[0, layout.index("bias")] = 1.0
    for r in rewards + [0.0] * 3:
        obs[0, layout.index("reward")] = r
        ctrl.act(obs)
    return float(ctrl.state()["weights"][0, j, i])


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_restock_champion_low_reward_flips_and_high_reward_keeps_its_preference(sign):
    """Five steps of the low store value flip the plastic preference weight's sign (lose-shift);
    five of the high value keep it (win-stay): the sequence a collected reward shows (held 5 steps)."""
    assert _plastic_weight_after([0.2] * 5, sign) * sign < -1.0
    assert _plastic_weight_after([1.0] * 5, sign) * sign > 1.0
    assert _plastic_weight_after([0.0] * 5, sign) * sign > 1.0
