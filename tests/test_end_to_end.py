"""End-to-end checks of the bundled junction worlds against the junction-maze protocol
(Soltoggio et al. 2008; Blynel & Floreano 2003): full evaluations with the bundled scripted agents."""

from __future__ import annotations

import pytest

from neurodrome import evaluate, load_world
from sim_support import WORLDS_DIR


def ideal_learner_bound(trials: int, high: float, low: float, exploratory: int) -> float:
    """N r_H - sum_k e_k (r_H - r_L) (Soltoggio et al. 2008; Blynel & Floreano 2003, computed)."""
    return trials * high - exploratory * (high - low)


@pytest.mark.slow
def test_static_junction_memory_courier_scores_the_maximum():
    """clinic-junction (100 trials, fixed stock): the explicit-memory courier scores the
    ideal learner's maximum, one exploratory trial at the start; a fixed controller can
    score the maximum in a static maze (Soltoggio et al. 2008; Blynel & Floreano 2003, common practice)."""
    world = load_world(WORLDS_DIR / "clinic-junction.json")
    values = world.task.site_values
    high, low = max(values.values()), min(values.values())
    (memory,) = evaluate(world, ["courier-memory"], seed=0)
    assert memory.fitness == pytest.approx(ideal_learner_bound(world.task.trials, high, low, 1))
    assert memory.fault is None and not any(t.crashed for t in memory.trials)


@pytest.mark.slow
def test_restock_junction_memory_beats_same_arm_plateau():
    """clinic-junction-restock: the memory courier stays within the ideal-learner bound
    (exploratory trials at the start and after the restock) and beats the same-arm
    courier, which sits on the plateau of a non-learner: low reward on one side of the
    restock, high on the other (Soltoggio et al. 2008; Blynel & Floreano 2003, common practice)."""
    world = load_world(WORLDS_DIR / "clinic-junction-restock.json")
    n = world.task.trials
    values = world.task.site_values
    high, low = max(values.values()), min(values.values())
    memory, same = evaluate(world, ["courier-memory", "courier-same-arm"], seed=4, workers=2)
    bound = ideal_learner_bound(n, high, low, 2)
    assert bound - (high - low) <= memory.fitness <= bound + 1e-9
    (restock,) = same.relocations
    after = restock.after_trial
    a, b = world.task.relocations[0].window
    assert a <= after <= b
    # same-arm takes the first (west) arm: low before the restock, high after it
    assert same.fitness == pytest.approx(after * low + (n - after) * high)
    assert same.fitness < memory.fitness
