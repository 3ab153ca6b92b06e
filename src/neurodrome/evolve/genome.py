"""NEAT-style genomes of plastic networks: genes with historical markings, mutation, crossover.

A genome is a list of node genes and connection genes (Stanley & Miikkulainen 2002,
"Evolving neural networks through augmenting topologies", Evolutionary Computation 10(2)
[memory, high confidence]). Every connection gene carries an *innovation number* (its
historical marking): the same structural change (a connection between the same two nodes,
or the split of the same connection) gets the same number in every genome of a run, so
crossover can line genes up by marking instead of by topology. The
:class:`InnovationTracker` hands the numbers out and is saved with the run.

Nodes: inputs (one per observation channel, the world's ``bias`` channel excepted), one
bias node, two outputs (left and right wheel), then hidden nodes added by mutation;
hidden nodes are *standard* or *modulatory* (Soltoggio et al. 2008, ALife XI). Each genome
carries one plasticity rule (eta, A, B, C, D) for all its plastic
connections, as in the published single-rule setting [memory, medium confidence].

Treatments restrict what may evolve: ``modulated`` (plastic connections and modulatory
neurons), ``plastic`` (plastic connections, no modulatory neurons: the plain Hebbian case),
``fixed`` (no plasticity at all).

Every random draw takes an explicit ``numpy.random.Generator`` so a run is reproducible.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any, Literal, Sequence

import numpy as np

from ..control.spec import NETWORK_FORMAT, NETWORK_VERSION

Treatment = Literal["modulated", "plastic", "fixed"]
TREATMENTS: tuple[str, ...] = ("modulated", "plastic", "fixed")
RULE_NAMES = ("learning_rate", "correlation", "presynaptic", "postsynaptic", "constant")

INPUT, BIAS, OUTPUT, HIDDEN = "input", "bias", "output", "hidden"


@dataclass(frozen=True)
class GenomeLayout:
    """Which input channels a genome reads; built from a world's observation channels."""

    channels: tuple[str, ...]

    @classmethod
    def from_channels(cls, channels: Sequence[str]) -> GenomeLayout:
        # the world's own bias channel duplicates the genome's bias node
        return cls(tuple(c for c in channels if c != "bias"))

    @property
    def n_inputs(self) -> int:
        return len(self.channels)

    @property
    def bias_id(self) -> int:
        return self.n_inputs

    @property
    def output_ids(self) -> tuple[int, int]:
        return (self.n_inputs + 1, self.n_inputs + 2)

    @property
    def first_hidden_id(self) -> int:
        return self.n_inputs + 3


@dataclass
class NodeGene:
    id: int
    role: str  # input, bias, output, hidden
    modulatory: bool = False
    bias: float = 0.0


@dataclass
class ConnGene:
    innovation: int
    source: int
    target: int
    weight: float
    enabled: bool = True
    plastic: bool = False


@dataclass
class MutationRates:
    """Per-offspring probabilities and step sizes of the mutation operators.

    The values and their defaults come from :class:`~neurodrome.evolve.config.MutationConfig`
    (``MutationConfig(...).rates()``), the one place they are defined.
    """

    add_neuron: float
    add_modulatory: float
    add_connection: float
    toggle_plastic: float
    toggle_enabled: float
    weight: float  # probability that the weights are perturbed at all
    weight_per_gene: float  # then each weight with this probability
    weight_sigma: float
    weight_replace: float  # a perturbed weight is drawn afresh with this probability
    weight_range: float
    bias: float
    bias_sigma: float
    rule: float
    rule_sigma: float
    eta_sigma: float
    eta_range: float
    rule_range: float


@dataclass
class InnovationTracker:
    """Historical markings of one run: connection (source, target) and split -> numbers."""

    next_innovation: int = 0
    next_node: int = 0
    connections: dict[tuple[int, int], int] = field(default_factory=dict)
    splits: dict[tuple[int, bool], int] = field(default_factory=dict)

    def connection(self, source: int, target: int) -> int:
        key = (source, target)
        if key not in self.connections:
            self.connections[key] = self.next_innovation
            self.next_innovation += 1
        return self.connections[key]

    def split_node(self, innovation: int, modulatory: bool, taken: set[int]) -> int:
        """Node id for splitting connection ``innovation``: the same in every genome, unless
        that genome already holds it (the connection was split before and re-enabled)."""
        key = (innovation, modulatory)
        node = self.splits.get(key)
        if node is None or node in taken:
            node = self.next_node
            self.next_node += 1
            self.splits.setdefault(key, node)
        return node

    def fresh_node(self) -> int:
        node = self.next_node
        self.next_node += 1
        return node

    def state(self) -> dict[str, Any]:
        return {"next_innovation": self.next_innovation, "next_node": self.next_node,
                "connections": [[s, t, i] for (s, t), i in self.connections.items()],
                "splits": [[i, m, n] for (i, m), n in self.splits.items()]}

    @classmethod
    def from_state(cls, data: dict[str, Any]) -> InnovationTracker:
        return cls(next_innovation=int(data["next_innovation"]), next_node=int(data["next_node"]),
                   connections={(int(s), int(t)): int(i) for s, t, i in data["connections"]},
                   splits={(int(i), bool(m)): int(n) for i, m, n in data["splits"]})


@dataclass
class Genome:
    """Node genes by id, connection genes by innovation number, one plasticity rule."""

    nodes: dict[int, NodeGene]
    connections: dict[int, ConnGene]
    rule: list[float]  # eta, A, B, C, D
    treatment: str = "modulated"

    def copy(self) -> Genome:
        return Genome({k: replace(v) for k, v in self.nodes.items()},
                      {k: replace(v) for k, v in self.connections.items()}, list(self.rule), self.treatment)

    @property
    def hidden(self) -> list[NodeGene]:
        return [n for n in self.nodes.values() if n.role == HIDDEN]

    def state(self) -> dict[str, Any]:
        """JSON-ready form; floats survive the round trip exactly."""
        return {"treatment": self.treatment, "rule": list(self.rule),
                "nodes": [[n.id, n.role, n.modulatory, n.bias] for n in self.nodes.values()],
                "connections": [[c.innovation, c.source, c.target, c.weight, c.enabled, c.plastic]
                                for c in self.connections.values()]}

    @classmethod
    def from_state(cls, data: dict[str, Any]) -> Genome:
        nodes = {int(i): NodeGene(int(i), str(r), bool(m), float(b)) for i, r, m, b in data["nodes"]}
        conns = {int(k): ConnGene(int(k), int(s), int(t), float(w), bool(e), bool(p))
                 for k, s, t, w, e, p in data["connections"]}
        return cls(nodes, conns, [float(x) for x in data["rule"]], str(data["treatment"]))


def initial_genome(layout: GenomeLayout, tracker: InnovationTracker, rng: np.random.Generator,
                   treatment: str, rates: MutationRates, initial_weight_sigma: float = 1.0) -> Genome:
    """A minimal genome: every input and the bias node connected to both outputs (NEAT's
    fully connected start), random weights, a random rule; no hidden nodes."""
    nodes: dict[int, NodeGene] = {k: NodeGene(k, INPUT) for k in range(layout.n_inputs)}
    nodes[layout.bias_id] = NodeGene(layout.bias_id, BIAS)
    for out in layout.output_ids:
        nodes[out] = NodeGene(out, OUTPUT)
    tracker.next_node = max(tracker.next_node, layout.first_hidden_id)
    conns: dict[int, ConnGene] = {}
    for src in list(range(layout.n_inputs)) + [layout.bias_id]:
        for dst in layout.output_ids:
            innov = tracker.connection(src, dst)
            weight = float(np.clip(rng.normal(0.0, initial_weight_sigma), -rates.weight_range, rates.weight_range))
            conns[innov] = ConnGene(innov, src, dst, weight, True, False)
    if treatment != "fixed":
        for c in conns.values():
            c.plastic = bool(rng.random() < 0.5)
    rule = [float(rng.uniform(-1.0, 1.0)) for _ in RULE_NAMES]
    return Genome(nodes, conns, rule, treatment)


# -- mutation ------------------------------------------------------------------------------

def _add_node(genome: Genome, tracker: InnovationTracker, rng: np.random.Generator, modulatory: bool) -> None:
    """Split an enabled connection a -> b into a -> new -> b (NEAT's add-node mutation).

    The new node takes weight 1 in and the old weight out, so behaviour changes little. A
    modulatory node's output feeds b's modulation instead of its activation, so the old
    path a -> b is kept enabled rather than broken.
    """
    enabled = [c for c in genome.connections.values() if c.enabled]
    if not enabled:
        return
    old = enabled[int(rng.integers(len(enabled)))]
    node = tracker.split_node(old.innovation, modulatory, set(genome.nodes))
    genome.nodes[node] = NodeGene(node, HIDDEN, modulatory, 0.0)
    into = tracker.connection(old.source, node)
    out = tracker.connection(node, old.target)
    plastic = genome.treatment != "fixed" and old.plastic
    genome.connections[into] = ConnGene(into, old.source, node, 1.0, True, False)
    genome.connections[out] = ConnGene(out, node, old.target, old.weight if not modulatory else
                                       float(rng.normal(0.0, 1.0)), True, plastic and not modulatory)
    if not modulatory:
        old.enabled = False


def _add_connection(genome: Genome, tracker: InnovationTracker, rng: np.random.Generator,
                    rates: MutationRates, attempts: int = 20) -> None:
    """Connect two unconnected nodes (recurrent links allowed; inputs and the bias node are
    never targets)."""
    sources = sorted(genome.nodes)
    targets = [k for k in sources if genome.nodes[k].role in (OUTPUT, HIDDEN)]
    existing = {(c.source, c.target) for c in genome.connections.values()}
    for _ in range(attempts):
        s = sources[int(rng.integers(len(sources)))]
        t = targets[int(rng.integers(len(targets)))]
        if (s, t) in existing:
            continue
        innov = tracker.connection(s, t)
        plastic = genome.treatment != "fixed" and bool(rng.random() < 0.5)
        genome.connections[innov] = ConnGene(innov, s, t, float(rng.normal(0.0, 1.0)), True, plastic)
        return


def mutate(genome: Genome, tracker: InnovationTracker, rng: np.random.Generator, rates: MutationRates) -> None:
    """Apply each operator with its probability, in place; the draw order is fixed."""
    if rng.random() < rates.add_neuron:
        _add_node(genome, tracker, rng, modulatory=False)
    if genome.treatment == "modulated" and rng.random() < rates.add_modulatory:
        _add_node(genome, tracker, rng, modulatory=True)
    if rng.random() < rates.add_connection:
        _add_connection(genome, tracker, rng, rates)
    conns = list(genome.connections.values())
    if genome.treatment != "fixed" and conns and rng.random() < rates.toggle_plastic:
        c = conns[int(rng.integers(len(conns)))]
        c.plastic = not c.plastic
    if conns and rng.random() < rates.toggle_enabled:
        c = conns[int(rng.integers(len(conns)))]
        c.enabled = not c.enabled
    if rng.random() < rates.weight:
        for c in conns:
            if rng.random() < rates.weight_per_gene:
                if rng.random() < rates.weight_replace:
                    c.weight = float(rng.normal(0.0, 1.0))
                else:
                    c.weight += float(rng.normal(0.0, rates.weight_sigma))
                c.weight = float(np.clip(c.weight, -rates.weight_range, rates.weight_range))
    for node in genome.nodes.values():
        if node.role in (OUTPUT, HIDDEN) and rng.random() < rates.bias:
            node.bias = float(np.clip(node.bias + rng.normal(0.0, rates.bias_sigma),
                                      -rates.weight_range, rates.weight_range))
    if genome.treatment != "fixed" and rng.random() < rates.rule:
        k = int(rng.integers(len(RULE_NAMES)))
        if k == 0:
            genome.rule[0] = float(np.clip(genome.rule[0] + rng.normal(0.0, rates.eta_sigma),
                                           -rates.eta_range, rates.eta_range))
        else:
            genome.rule[k] = float(np.clip(genome.rule[k] + rng.normal(0.0, rates.rule_sigma),
                                           -rates.rule_range, rates.rule_range))


# -- crossover and distance ----------------------------------------------------------------

def crossover(fitter: Genome, other: Genome, rng: np.random.Generator, disable_prob: float = 0.75) -> Genome:
    """Child of two parents aligned by innovation number (NEAT): matching genes come from
    either parent at random, disjoint and excess genes from the fitter parent; a gene
    disabled in either parent stays disabled with probability ``disable_prob``."""
    child = fitter.copy()
    for innov, gene in child.connections.items():
        mate = other.connections.get(innov)
        if mate is None:
            continue
        if rng.random() < 0.5:
            gene.weight, gene.plastic = mate.weight, mate.plastic
        if not (gene.enabled and mate.enabled):
            gene.enabled = not bool(rng.random() < disable_prob)
    for node_id, node in child.nodes.items():
        mate_node = other.nodes.get(node_id)
        if mate_node is not None and node.role == mate_node.role and node.modulatory == mate_node.modulatory \
                and rng.random() < 0.5:
            node.bias = mate_node.bias
    child.rule = [a if rng.random() < 0.5 else b for a, b in zip(fitter.rule, other.rule)]
    return child


def distance(a: Genome, b: Genome, c_excess: float = 1.0, c_disjoint: float = 1.0, c_weight: float = 0.4,
             c_rule: float = 0.4) -> float:
    """NEAT compatibility distance c1 E / N + c2 D / N + c3 W (Stanley & Miikkulainen 2002
    [memory, high confidence]), plus c_rule times the mean absolute difference of the rule
    parameters (our addition). N is the larger genome's gene count (1 below 20 genes, as in
    the paper)."""
    ka, kb = set(a.connections), set(b.connections)
    if not ka and not kb:
        return 0.0
    limit = min(max(ka, default=-1), max(kb, default=-1))
    unmatched = ka ^ kb
    excess = sum(1 for k in unmatched if k > limit)
    disjoint = len(unmatched) - excess
    matching = ka & kb
    w = float(np.mean([abs(a.connections[k].weight - b.connections[k].weight) for k in matching])) if matching else 0.0
    n = max(len(ka), len(kb))
    n = 1 if n < 20 else n
    rule = float(np.mean(np.abs(np.array(a.rule) - np.array(b.rule)))) if a.treatment != "fixed" else 0.0
    return c_excess * excess / n + c_disjoint * disjoint / n + c_weight * w + c_rule * rule


# -- to a network file ---------------------------------------------------------------------

def _neuron_name(node: NodeGene, layout: GenomeLayout) -> str:
    if node.role == INPUT:
        return f"in-{layout.channels[node.id]}"
    if node.role == BIAS:
        return "bias-unit"
    if node.role == OUTPUT:
        return "left-wheel" if node.id == layout.output_ids[0] else "right-wheel"
    return f"{'mod' if node.modulatory else 'hid'}-{node.id}"


def to_network_data(genome: Genome, layout: GenomeLayout, *, name: str = "evolved", description: str = "",
                    bounds: tuple[float, float] = (-10.0, 10.0)) -> dict[str, Any]:
    """The network description (format ``neurodrome-network`` v1) of a genome.

    Disabled genes are left out. Neurons come in the order inputs, bias, hidden (by id),
    outputs, so the file reads top-down. A ``fixed`` genome has no plastic connection.
    """
    order = sorted(genome.nodes.values(), key=lambda n: ({INPUT: 0, BIAS: 1, HIDDEN: 2, OUTPUT: 3}[n.role], n.id))
    neurons = []
    for node in order:
        item: dict[str, Any] = {"id": _neuron_name(node, layout), "role": node.role}
        if node.role == INPUT:
            item["channel"] = layout.channels[node.id]
        if node.role == OUTPUT:
            item["wheel"] = "left" if node.id == layout.output_ids[0] else "right"
        if node.role in (OUTPUT, HIDDEN):
            item["bias"] = node.bias
            item["kind"] = "modulatory" if node.modulatory else "standard"
        neurons.append(item)
    names = {n.id: _neuron_name(n, layout) for n in order}
    connections = []
    for innov in sorted(genome.connections):
        c = genome.connections[innov]
        if not c.enabled:
            continue
        plastic = c.plastic and genome.treatment != "fixed"
        weight = float(np.clip(c.weight, bounds[0], bounds[1]))
        connections.append({"source": names[c.source], "target": names[c.target], "weight": weight,
                            "plastic": plastic})
    data: dict[str, Any] = {"format": NETWORK_FORMAT, "version": NETWORK_VERSION, "name": name,
                            "description": description, "weight_bounds": list(bounds),
                            "neurons": neurons, "connections": connections}
    if genome.treatment != "fixed":
        data["rule"] = dict(zip(RULE_NAMES, genome.rule))
    return data
