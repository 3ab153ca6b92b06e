"""The NEAT population: objectives, speciation, fitness sharing, elitism, reproduction.

One generation (:meth:`Population.tell`), after the current genomes were evaluated:

1. **Objective scores** from fitness, novelty (sparseness of the behaviour descriptors
   against the population and an archive, :mod:`neurodrome.evolve.novelty`), or a weighted
   mix of both as ranks scaled to [0, 1] (ranks, so neither scale dominates).
2. **Speciation** (Stanley & Miikkulainen 2002 [memory, high confidence]): each genome joins
   the first species whose representative lies within the compatibility threshold, else
   founds a new one; representatives are then redrawn from the members. The threshold
   moves by a fixed step toward a target number of species (common practice).
3. **Fitness sharing**: a genome's adjusted score is its score, shifted so the worst is 0,
   divided by its species' size; each species gets offspring in proportion to the sum of
   its adjusted scores (largest-remainder rounding). Species that have not improved for
   ``stagnation`` generations get none, unless they hold the best genome.
4. **Reproduction**: the population's ``elitism`` best genomes are copied unchanged (and the
   genome of highest fitness, when selection runs on novelty or a mix); so is
   the champion of every species of at least ``species_elitism_min_size``; the other
   offspring come from parents chosen by tournament or truncation inside the species,
   with crossover at a given probability, then mutation.

All randomness comes from one ``numpy.random.Generator``; :meth:`Population.state`
captures it (``bit_generator.state``) with everything else, so a run restored with
:meth:`Population.from_state` continues bit-identically.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from .config import EvolveConfig
from .genome import Genome, GenomeLayout, InnovationTracker, crossover, distance, initial_genome, mutate
from .novelty import NoveltyArchive


@dataclass
class Species:
    id: int
    representative: Genome
    members: list[int]
    best: float = -np.inf
    last_improved: int = 0

    def state(self) -> dict[str, Any]:
        return {"id": self.id, "representative": self.representative.state(), "members": list(self.members),
                "best": self.best if np.isfinite(self.best) else None, "last_improved": self.last_improved}

    @classmethod
    def from_state(cls, d: dict[str, Any]) -> Species:
        return cls(int(d["id"]), Genome.from_state(d["representative"]), [int(m) for m in d["members"]],
                   -np.inf if d["best"] is None else float(d["best"]), int(d["last_improved"]))


def ranks01(values: np.ndarray) -> np.ndarray:
    """Average ranks scaled to [0, 1] (N,): the lowest value 0, the highest 1, ties share."""
    n = values.size
    if n <= 1:
        return np.zeros(n)
    order = np.argsort(values, kind="stable")
    sorted_vals = values[order]
    ranks = np.empty(n)
    start = 0
    while start < n:
        end = start
        while end + 1 < n and sorted_vals[end + 1] == sorted_vals[start]:
            end += 1
        ranks[order[start:end + 1]] = (start + end) / 2.0
        start = end + 1
    return ranks / (n - 1)


def largest_remainder(shares: np.ndarray, total: int) -> np.ndarray:
    """Whole numbers (K,) summing to ``total`` in proportion to ``shares`` (K,) >= 0."""
    shares = np.asarray(shares, dtype=float)
    if total <= 0 or shares.size == 0:
        return np.zeros(shares.size, dtype=int)
    if shares.sum() <= 0:
        shares = np.ones_like(shares)
    exact = shares / shares.sum() * total
    counts = np.floor(exact).astype(int)
    rest = total - int(counts.sum())
    if rest:
        # ties go to the earlier species, so the split is deterministic
        order = np.argsort(-(exact - counts), kind="stable")
        counts[order[:rest]] += 1
    return counts


class Population:
    """Genomes of one run and everything needed to breed the next generation."""

    def __init__(self, config: EvolveConfig, layout: GenomeLayout, treatment: str, seed: int,
                 start: Genome | None = None) -> None:
        self.config = config
        self.layout = layout
        self.treatment = treatment
        self.rng = np.random.default_rng(seed)
        self.tracker = InnovationTracker()
        self.rates = config.mutation.rates()
        if start is None:
            self.genomes: list[Genome] = [
                initial_genome(layout, self.tracker, self.rng, treatment, self.rates,
                               config.mutation.initial_weight_sigma)
                for _ in range(config.population)]
        else:
            self.genomes = self._from_start(start)
        self.species: list[Species] = []
        self.threshold = config.speciation.initial_threshold
        self.next_species_id = 0
        self.generation = 0
        obj = config.objective
        self.archive = NoveltyArchive(metric="hamming" if obj.behaviour == "outcomes" else "euclidean",
                                      threshold=obj.archive_threshold) if obj.kind != "fitness" else None

    def _from_start(self, start: Genome) -> list[Genome]:
        """Generation 0 from one genome: an unchanged copy, then mutated copies. The tracker
        learns the genome's markings so later mutations number consistently."""
        seed = start.copy()
        seed.treatment = self.treatment
        if self.treatment == "fixed":
            for c in seed.connections.values():
                c.plastic = False
        if self.treatment != "modulated":
            seed.nodes = {k: n for k, n in seed.nodes.items() if not n.modulatory}
            kept = set(seed.nodes)
            seed.connections = {k: c for k, c in seed.connections.items() if c.source in kept and c.target in kept}
        for c in seed.connections.values():
            self.tracker.connections.setdefault((c.source, c.target), c.innovation)
        self.tracker.next_innovation = max(seed.connections, default=-1) + 1
        self.tracker.next_node = max(max(seed.nodes) + 1, self.layout.first_hidden_id)
        out = [seed]
        for _ in range(self.config.population - 1):
            child = seed.copy()
            mutate(child, self.tracker, self.rng, self.rates)
            out.append(child)
        return out

    # -- objectives ---------------------------------------------------------------------
    def scores(self, fitness: np.ndarray, behaviours: np.ndarray | None) -> np.ndarray:
        """Objective scores (N,) from fitness (N,) and behaviours (N, ...); updates the archive."""
        kind = self.config.objective.kind
        if kind == "fitness":
            return fitness.astype(float)
        if self.archive is None or behaviours is None:
            raise ValueError("novelty objectives need behaviours")
        novelty = self.archive.sparseness(behaviours, k=self.config.objective.k)
        self.archive.update(behaviours, novelty)
        if kind == "novelty":
            return novelty
        w = self.config.objective.novelty_weight
        return (1.0 - w) * ranks01(fitness) + w * ranks01(novelty)

    # -- speciation ---------------------------------------------------------------------
    def _distance(self, a: Genome, b: Genome) -> float:
        s = self.config.speciation
        return distance(a, b, s.c_excess, s.c_disjoint, s.c_weight, s.c_rule)

    def speciate(self) -> None:
        """Assign the current genomes to species, then move the threshold toward the target."""
        for sp in self.species:
            sp.members = []
        for index, genome in enumerate(self.genomes):
            for sp in self.species:
                if self._distance(genome, sp.representative) < self.threshold:
                    sp.members.append(index)
                    break
            else:
                self.species.append(Species(self.next_species_id, genome.copy(), [index],
                                            last_improved=self.generation))
                self.next_species_id += 1
        self.species = [sp for sp in self.species if sp.members]
        for sp in self.species:
            sp.representative = self.genomes[sp.members[int(self.rng.integers(len(sp.members)))]].copy()
        s = self.config.speciation
        if len(self.species) < s.target_species:
            self.threshold = max(s.min_threshold, self.threshold - s.threshold_step)
        elif len(self.species) > s.target_species:
            self.threshold += s.threshold_step

    # -- reproduction -------------------------------------------------------------------
    def _pick(self, ranked: list[int], scores: np.ndarray) -> int:
        sel = self.config.selection
        if sel.method == "truncation":
            pool = ranked[:max(1, int(np.ceil(sel.survival * len(ranked))))]
            return pool[int(self.rng.integers(len(pool)))]
        contestants = [ranked[int(self.rng.integers(len(ranked)))] for _ in range(sel.tournament_size)]
        return max(contestants, key=lambda k: (scores[k], -k))

    def _offspring(self, ranked: list[int], scores: np.ndarray) -> Genome:
        first = self._pick(ranked, scores)
        if len(ranked) > 1 and self.rng.random() < self.config.selection.crossover:
            second = self._pick(ranked, scores)
            fitter, other = (first, second) if (scores[first], -first) >= (scores[second], -second) else (second, first)
            child = crossover(self.genomes[fitter], self.genomes[other], self.rng)
        else:
            child = self.genomes[first].copy()
        mutate(child, self.tracker, self.rng, self.rates)
        return child

    def tell(self, scores: Sequence[float], fitness: Sequence[float] | None = None) -> None:
        """Breed the next generation from objective ``scores`` (N,) of the current genomes.

        With ``fitness`` (N,) given, the genome of highest fitness is kept unchanged as well,
        so a novelty-driven run never loses its best solution."""
        scores = np.asarray(scores, dtype=float)
        if scores.shape != (len(self.genomes),):
            raise ValueError(f"{len(self.genomes)} scores expected, got shape {scores.shape}")
        scores = np.where(np.isfinite(scores), scores, np.nanmin(np.where(np.isfinite(scores), scores, np.nan)) - 1.0
                          if np.any(np.isfinite(scores)) else 0.0)
        self.speciate()
        sel = self.config.selection
        order = sorted(range(len(scores)), key=lambda k: (-scores[k], k))
        elites = order[:sel.elitism]
        if fitness is not None and sel.elitism > 0:
            fit = np.asarray(fitness, dtype=float)
            top_fit = min(range(len(fit)), key=lambda k: (-fit[k], k))
            if top_fit not in elites:
                elites.append(top_fit)
        best_index = order[0]
        for sp in self.species:
            top = max(scores[m] for m in sp.members)
            if top > sp.best:
                sp.best, sp.last_improved = float(top), self.generation
        alive = [sp for sp in self.species
                 if self.generation - sp.last_improved < self.config.speciation.stagnation or best_index in sp.members]
        shifted = scores - scores.min()
        shares = np.array([sum(shifted[m] for m in sp.members) / len(sp.members) for sp in alive])
        counts = largest_remainder(shares, self.config.population - len(elites))
        new = [self.genomes[k].copy() for k in elites]
        for sp, count in zip(alive, counts):
            ranked = sorted(sp.members, key=lambda k: (-scores[k], k))
            if count > 0 and len(ranked) >= sel.species_elitism_min_size and ranked[0] not in elites:
                new.append(self.genomes[ranked[0]].copy())
                count -= 1
            new.extend(self._offspring(ranked, scores) for _ in range(count))
        self.genomes = new
        self.generation += 1

    # -- checkpoints --------------------------------------------------------------------
    def state(self) -> dict[str, Any]:
        """Everything that determines the rest of the run, as JSON-ready data."""
        return {"treatment": self.treatment, "generation": self.generation, "threshold": self.threshold,
                "next_species_id": self.next_species_id, "rng": self.rng.bit_generator.state,
                "tracker": self.tracker.state(), "genomes": [g.state() for g in self.genomes],
                "species": [sp.state() for sp in self.species],
                "archive": self.archive.state() if self.archive is not None else None}

    @classmethod
    def from_state(cls, config: EvolveConfig, layout: GenomeLayout, data: dict[str, Any]) -> Population:
        pop = cls.__new__(cls)
        pop.config, pop.layout, pop.treatment = config, layout, str(data["treatment"])
        pop.rates = config.mutation.rates()
        pop.rng = np.random.default_rng()
        pop.rng.bit_generator.state = data["rng"]
        pop.tracker = InnovationTracker.from_state(data["tracker"])
        pop.genomes = [Genome.from_state(g) for g in data["genomes"]]
        pop.species = [Species.from_state(s) for s in data["species"]]
        pop.threshold = float(data["threshold"])
        pop.next_species_id = int(data["next_species_id"])
        pop.generation = int(data["generation"])
        pop.archive = NoveltyArchive.from_state(data["archive"]) if data["archive"] is not None else None
        return pop
