"""The NEAT population: adaptive speciation threshold, elitism, sharing, a toy objective, checkpoints.

Method: Stanley & Miikkulainen 2002 (speciation, explicit fitness sharing, champion copies)
[memory, high confidence]; the threshold moving toward a target species count is common
practice in NEAT implementations.
"""

from __future__ import annotations

import json

import numpy as np

from neurodrome.evolve.config import EvolveConfig, MutationConfig
from neurodrome.evolve.genome import GenomeLayout
from neurodrome.evolve.neat import Population, largest_remainder, ranks01

LAYOUT = GenomeLayout(("a", "b", "c"))


def _config(**kw) -> EvolveConfig:
    base = {"population": 40, "speciation": {"target_species": 4, "initial_threshold": 0.05, "threshold_step": 0.2}}
    base.update(kw)
    return EvolveConfig.model_validate(base)


def _toy_scores(pop: Population) -> np.ndarray:
    """Toy objective: closeness of the three input->left weights to (1, -2, 3)."""
    target = np.array([1.0, -2.0, 3.0])
    out = []
    for g in pop.genomes:
        w = np.array([next((c.weight for c in g.connections.values() if c.source == k and c.target == 4 and c.enabled),
                           0.0) for k in range(3)])
        out.append(-float(np.abs(w - target).sum()))
    return np.array(out)


def test_threshold_rises_when_species_exceed_target():
    """A tiny threshold gives too many species; it then rises by the step each generation (common practice)."""
    pop = Population(_config(), LAYOUT, "modulated", seed=1)
    pop.speciate()
    assert len(pop.species) > 4
    assert pop.threshold == 0.05 + 0.2


def test_threshold_falls_when_species_below_target():
    """One big species at a huge threshold: the threshold steps down toward the target (common practice)."""
    cfg = _config(speciation={"target_species": 4, "initial_threshold": 100.0, "threshold_step": 0.5})
    pop = Population(cfg, LAYOUT, "modulated", seed=1)
    pop.speciate()
    assert len(pop.species) == 1
    assert pop.threshold == 99.5


def test_species_count_approaches_target():
    """Over generations the species count settles near the target (adaptive threshold, common practice)."""
    pop = Population(_config(), LAYOUT, "modulated", seed=2)
    counts = []
    for _ in range(25):
        pop.tell(_toy_scores(pop))
        counts.append(len(pop.species))
    assert abs(np.median(counts[-10:]) - 4) <= 2


def test_elitism_keeps_the_best():
    """The best genome is copied unchanged into the next generation (NEAT's champion copy)."""
    pop = Population(_config(), LAYOUT, "modulated", seed=3)
    scores = _toy_scores(pop)
    best = pop.genomes[int(np.argmax(scores))].copy()
    pop.tell(scores)
    assert pop.genomes[0] == best


def test_toy_objective_improves():
    """Selection and mutation improve a toy objective over 30 generations."""
    pop = Population(_config(), LAYOUT, "fixed", seed=4)
    first = _toy_scores(pop).max()
    for _ in range(30):
        scores = _toy_scores(pop)
        pop.tell(scores)
    assert _toy_scores(pop).max() > first + 1.0


def test_truncation_and_novelty_objectives_run():
    """Truncation selection and the novelty objective (sparseness, Lehman & Stanley 2011) breed a full population."""
    cfg = _config(selection={"method": "truncation"}, objective={"kind": "novelty", "k": 5, "archive_threshold": 0.5})
    pop = Population(cfg, LAYOUT, "plastic", seed=5)
    behaviours = np.arange(40 * 3).reshape(40, 3) % 4
    novelty = pop.scores(np.zeros(40), behaviours)
    assert novelty.shape == (40,) and np.all(novelty >= 0)
    pop.tell(novelty)
    assert len(pop.genomes) == 40


def test_state_round_trip_continues_identically():
    """A population restored from JSON state breeds exactly what the original breeds (bit_generator.state)."""
    cfg = _config()
    a = Population(cfg, LAYOUT, "modulated", seed=6)
    for _ in range(3):
        a.tell(_toy_scores(a))
    b = Population.from_state(cfg, LAYOUT, json.loads(json.dumps(a.state())))
    for _ in range(3):
        a.tell(_toy_scores(a))
        b.tell(_toy_scores(b))
    assert json.dumps(a.state()) == json.dumps(b.state())


def test_largest_remainder_and_ranks():
    """Offspring quotas sum to the total in proportion (Hamilton's method); ranks average ties (as scipy rankdata)."""
    from scipy.stats import rankdata

    counts = largest_remainder(np.array([1.0, 1.0, 2.0]), 10)
    assert counts.sum() == 10 and list(counts) == [3, 2, 5]
    values = np.array([3.0, 1.0, 3.0, 2.0])
    assert np.allclose(ranks01(values), (rankdata(values) - 1) / 3)


def test_highest_fitness_survives_novelty_selection():
    """Under a novelty objective the genome of highest fitness is still copied unchanged (our elitism rule)."""
    pop = Population(_config(objective={"kind": "mix", "k": 3}), LAYOUT, "modulated", seed=7)
    fitness = _toy_scores(pop)
    scores = -fitness  # the objective ranks the fittest last
    best = pop.genomes[int(np.argmax(fitness))].copy()
    pop.tell(scores, fitness)
    assert best in pop.genomes[:2]


def test_start_genome_seeds_generation_zero():
    """Incremental start: an unchanged copy first; under 'fixed' no plastic gene and no modulatory node survive."""
    from neurodrome.evolve.genome import InnovationTracker, _add_node, initial_genome

    rng = np.random.default_rng(8)
    tracker = InnovationTracker()
    start = initial_genome(LAYOUT, tracker, rng, "modulated", MutationConfig().rates())
    _add_node(start, tracker, rng, modulatory=True)
    for c in start.connections.values():
        c.plastic = True
    pop = Population(_config(), LAYOUT, "modulated", seed=9, start=start)
    assert pop.genomes[0] == start and len(pop.genomes) == 40
    assert pop.tracker.next_innovation > max(start.connections)
    fixed = Population(_config(), LAYOUT, "fixed", seed=9, start=start)
    assert not any(n.modulatory for g in fixed.genomes for n in g.nodes.values())
    assert not any(c.plastic for g in fixed.genomes for c in g.connections.values())
