"""Genomes: historical markings, crossover alignment, distance, and mutation validity.

The operators follow NEAT (Stanley & Miikkulainen 2002, "Evolving neural networks through
augmenting topologies", Evolutionary Computation 10(2) [memory, high confidence]); the
network each genome becomes is checked by the project's own validator and compiler, which
are themselves tested against Soltoggio et al. 2008, ALife XI.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from neurodrome.control.network import NetworkController
from neurodrome.control.protocol import Layout
from neurodrome.control.spec import network_from_data
from neurodrome.evolve.config import MutationConfig
from neurodrome.evolve.genome import (
    ConnGene, Genome, GenomeLayout, InnovationTracker, NodeGene, _add_connection, _add_node,
    crossover, distance, initial_genome, mutate, to_network_data)
from neurodrome.world import load_world

WORLD = load_world("worlds/clinic-junction.json")
CHANNELS = WORLD.observation_channels()
LAYOUT = GenomeLayout.from_channels(CHANNELS)
RATES = MutationConfig().rates()


def _fresh(treatment: str = "modulated", seed: int = 0) -> tuple[Genome, InnovationTracker, np.random.Generator]:
    rng = np.random.default_rng(seed)
    tracker = InnovationTracker()
    return initial_genome(LAYOUT, tracker, rng, treatment, RATES), tracker, rng


def _validates(genome: Genome) -> None:
    spec = network_from_data(to_network_data(genome, LAYOUT))
    NetworkController([spec], Layout.of(WORLD))


def test_initial_genome_is_fully_connected_minimal():
    """NEAT's start: every input and the bias wired to both outputs, no hidden node (NEAT 2002)."""
    genome, tracker, _ = _fresh()
    assert not genome.hidden
    assert len(genome.connections) == (LAYOUT.n_inputs + 1) * 2
    assert "bias" not in LAYOUT.channels
    _validates(genome)


def test_same_structural_change_gets_same_marking():
    """Two genomes that split the same connection get the same node and innovation numbers (NEAT 2002)."""
    a, tracker, _ = _fresh(seed=1)
    b = a.copy()
    rng_a, rng_b = np.random.default_rng(5), np.random.default_rng(5)
    _add_node(a, tracker, rng_a, modulatory=False)
    _add_node(b, tracker, rng_b, modulatory=False)
    assert set(a.connections) == set(b.connections)
    assert set(a.nodes) == set(b.nodes)
    new = set(a.connections) - set(range((LAYOUT.n_inputs + 1) * 2))
    assert len(new) == 2


def test_split_disables_old_connection_and_keeps_weight():
    """Add-node: a->b is disabled, a->new gets weight 1 and new->b the old weight (NEAT 2002)."""
    genome, tracker, rng = _fresh()
    before = {k: (c.source, c.target, c.weight) for k, c in genome.connections.items()}
    _add_node(genome, tracker, rng, modulatory=False)
    (node,) = genome.hidden
    into = [c for c in genome.connections.values() if c.target == node.id]
    out = [c for c in genome.connections.values() if c.source == node.id]
    old = [k for k, c in genome.connections.items() if k in before and not c.enabled]
    assert len(into) == len(out) == len(old) == 1
    assert into[0].weight == 1.0
    assert out[0].weight == before[old[0]][2]
    assert (into[0].source, out[0].target) == before[old[0]][:2]


def test_modulatory_neuron_only_in_modulated_treatment():
    """Only the 'modulated' treatment grows modulatory neurons; 'fixed' has no plastic connection."""
    rates = MutationConfig(add_modulatory=1.0, add_neuron=1.0, toggle_plastic=1.0).rates()
    for treatment in ("modulated", "plastic", "fixed"):
        genome, tracker, rng = _fresh(treatment)
        for _ in range(30):
            mutate(genome, tracker, rng, rates)
        mods = [n for n in genome.hidden if n.modulatory]
        assert bool(mods) == (treatment == "modulated")
        data = to_network_data(genome, LAYOUT)
        plastic = [c for c in data["connections"] if c["plastic"]]
        if treatment == "fixed":
            assert not plastic and "rule" not in data
        _validates(genome)


def test_crossover_aligns_by_marking():
    """Child genes are the fitter parent's markings; matching genes take a value from either parent (NEAT 2002)."""
    a, tracker, rng = _fresh(seed=2)
    b = a.copy()
    for gene in b.connections.values():
        gene.weight += 100.0
    _add_node(a, tracker, rng, modulatory=False)
    _add_connection(b, tracker, rng, RATES)
    child = crossover(a, b, np.random.default_rng(3))
    assert set(child.connections) == set(a.connections)
    took_b = 0
    for innov, gene in child.connections.items():
        if innov in b.connections:
            assert gene.weight in (a.connections[innov].weight, b.connections[innov].weight)
            took_b += gene.weight == b.connections[innov].weight
        else:
            assert gene.weight == a.connections[innov].weight
    matching = len(set(a.connections) & set(b.connections))
    assert 0 < took_b < matching  # both parents contribute (24 coin flips)
    _validates(child)


def _toy(conns: list[tuple[int, float]]) -> Genome:
    nodes = {k: NodeGene(k, "input") for k in range(3)}
    nodes[3] = NodeGene(3, "output")
    return Genome(nodes, {i: ConnGene(i, i % 3, 3, w) for i, w in conns}, [0.0] * 5, "fixed")


def test_compatibility_distance_formula():
    """delta = c1 E / N + c2 D / N + c3 W-bar with N = 1 below 20 genes (NEAT 2002, worked by hand)."""
    a = _toy([(0, 1.0), (1, 2.0), (3, 0.5), (6, 0.0)])
    b = _toy([(0, 1.5), (1, 1.0), (2, 0.0), (4, 0.0)])
    # matching 0, 1 (|dw| 0.5 and 1.0, mean 0.75); limit min(6, 4) = 4: disjoint 2, 3, 4; excess 6
    expected = 1.0 * 1 + 2.0 * 3 + 0.5 * 0.75
    assert distance(a, b, c_excess=1.0, c_disjoint=2.0, c_weight=0.5) == pytest.approx(expected)
    assert distance(a, a) == 0.0


def test_state_round_trip_is_exact():
    """Genome and tracker state survive JSON exactly (floats by shortest repr, Python's json)."""
    import json

    genome, tracker, rng = _fresh()
    for _ in range(20):
        mutate(genome, tracker, rng, MutationConfig(add_neuron=0.5, add_modulatory=0.5, add_connection=0.5).rates())
    again = Genome.from_state(json.loads(json.dumps(genome.state())))
    assert again == genome
    assert InnovationTracker.from_state(json.loads(json.dumps(tracker.state()))) == tracker


@settings(max_examples=40, deadline=None)
@given(treatment=st.sampled_from(["modulated", "plastic", "fixed"]), seed=st.integers(0, 2**32 - 1),
       steps=st.integers(1, 40), mates=st.integers(0, 3))
def test_random_mutation_sequences_stay_valid(treatment, seed, steps, mates):
    """Any sequence of mutations and crossovers gives a network the validator and compiler accept."""
    rng = np.random.default_rng(seed)
    tracker = InnovationTracker()
    rates = MutationConfig(add_neuron=0.3, add_modulatory=0.3, add_connection=0.4, toggle_plastic=0.3,
                          toggle_enabled=0.2, rule=0.8, eta_sigma=50.0, weight_sigma=5.0).rates()
    genomes = [initial_genome(LAYOUT, tracker, rng, treatment, rates) for _ in range(2)]
    for step in range(steps):
        g = genomes[step % 2]
        mutate(g, tracker, rng, rates)
        if mates and step % (mates + 1) == 0:
            genomes[(step + 1) % 2] = crossover(genomes[0], genomes[1], rng)
    for g in genomes:
        _validates(g)
        ids = [c.innovation for c in g.connections.values()]
        assert len(set((c.source, c.target) for c in g.connections.values())) == len(ids)
