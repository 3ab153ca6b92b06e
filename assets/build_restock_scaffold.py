"""Hand-built learning scaffold for the relocating junction, on top of the static champion.

Writes ``assets/restock-scaffold.genome.json`` (run: ``python assets/build_restock_scaffold.py``).
The scaffold keeps every gene of ``champion-static.genome.json`` (a fixed network that
takes the east arm and comes home) and adds, by hand, neurons in the genome's own terms
(tanh(x/2) units, weights and biases within +-10, one plasticity rule for the genome):

- a reward-sign detector: modulatory H1 = tanh(10 r / 2), H2 = tanh((10 r - 6) / 2) and a
  constant K; the modulation reaching P, m = 4 (H2 - H1) + k K, is about 0 without reward,
  negative after the low store value 0.2 and positive after the high value 1.0;
- a preference P = tanh(w / 2) fed by the only plastic connection, bias -> P, with the
  rule dw = tanh(m / 2) * eta * o_bias * o_P (A = 1, eta = 12): while a low reward is
  visible (5 control steps, so 5 modulated steps) every step jumps w across zero, an odd
  number of flips, so the preference ends on the other arm (lose-shift); a high reward
  pushes w further out on its own side (win-stay);
- a latch L (set by any reward, held for the rest of the trial, -1 again after the trial
  reset) and a went-west latch WL;
- gates: west-outbound (junction, P < 0, L off) cancels the champion's junction wiring,
  drives straight on and spins left once the front reading is high until the west arm is
  clear; homeward-from-west (junction, L on, WL on) drives straight on and spins right
  when the right side opens onto the stem until the rear reading is high. With P > 0 all
  gates are off and the network is the static champion unchanged.

A gate neuron saturates at -1 when off; it reaches the wheels through a follower neuron
(tanh(-10) when the gate is off, 0 when on) plus a constant neuron C = tanh(10), whose
pulls cancel exactly while the gate is off and are both 0 right after a trial reset, so
the champion's (sensitive) junction manoeuvres are not disturbed in east mode.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

from neurodrome.evolve.genome import ConnGene, Genome, NodeGene

ASSETS = Path(__file__).resolve().parent
CHANNELS = ("range_0", "range_1", "range_2", "range_3", "range_4", "range_5", "range_6", "range_7",
            "home", "junction", "reward")
FRONT, RIGHT, REAR = 3, 0, 7  # range finders at 0, -90 and 180 degrees
JUNCTION, REWARD, BIAS, LEFT_WHEEL, RIGHT_WHEEL = 9, 10, 11, 12, 13
CHAMPION_HIDDEN = 17  # the static champion's one hidden neuron
# the static champion's junction wiring, cancelled while the west gates are on
JUNCTION_TO_LEFT, JUNCTION_TO_HIDDEN = 3.111665716789534, 1.1424194320153678


def build(w0: float = 6.0, eta: float = 12.0, mod_gain: float = 4.0, front: float = 0.5, clear: float = 0.1,
          spin: float = 6.0, forward: float = 4.0, side_open: float = 0.4, home_spin: float = 6.0,
          home_forward: float = 2.0) -> Genome:
    """The scaffold genome; ``w0 > 0`` starts with the east arm preferred."""
    base = json.loads((ASSETS / "champion-static.genome.json").read_text())
    g = Genome.from_state(base["genome"])
    next_node = [max(g.nodes) + 1]
    next_innovation = [max(g.connections) + 1]

    def node(modulatory: bool = False, bias: float = 0.0) -> int:
        k = next_node[0]
        next_node[0] += 1
        g.nodes[k] = NodeGene(k, "hidden", modulatory, bias)
        return k

    def conn(source: int, target: int, weight: float, plastic: bool = False) -> None:
        k = next_innovation[0]
        next_innovation[0] += 1
        g.connections[k] = ConnGene(k, source, target, weight, True, plastic)

    constant = node(False, 10.0)
    conn(BIAS, constant, 10.0)
    followers: dict[int, int] = {}

    def drive(gate: int, target: int, weight: float) -> None:
        if gate not in followers:
            follower = node()
            conn(gate, follower, 10.0)
            conn(BIAS, follower, -10.0)
            followers[gate] = follower
        conn(followers[gate], target, weight)
        conn(constant, target, weight)

    h1 = node(True)
    conn(REWARD, h1, 10.0)
    h2 = node(True, -2.0)
    conn(REWARD, h2, 10.0)
    conn(BIAS, h2, -4.0)
    k = node(True)
    conn(BIAS, k, 10.0)
    pref = node()
    conn(BIAS, pref, w0, plastic=True)
    conn(h1, pref, -mod_gain)
    conn(h2, pref, mod_gain)
    conn(k, pref, mod_gain * math.tanh(3.0) / math.tanh(5.0))  # zero modulation without reward
    s1 = node(False, -1.0)
    conn(REWARD, s1, 10.0)
    s2 = node()
    conn(s1, s2, 10.0)
    latch = node(False, 6.0)
    for source, weight in ((s2, 5.0), (latch, 10.0), (constant, 10.0), (BIAS, -10.0)):
        conn(source, latch, weight)
    west = node(False, -15.0)
    for source, weight in ((JUNCTION, 10.0), (pref, -10.0), (latch, -10.0), (BIAS, -10.0)):
        conn(source, west, weight)
    hold = 10.0 * (front - clear) / 2.0
    turn_left = node(False, -10.0 - hold - 10.0 * clear)
    for source, weight in ((west, 10.0), (FRONT, 10.0), (turn_left, hold)):
        conn(source, turn_left, weight)
    went_west = node(False, 6.0)
    for source, weight in ((west, 5.0), (went_west, 10.0), (constant, 10.0), (BIAS, -10.0)):
        conn(source, went_west, weight)
    home = node(False, -15.0)
    for source, weight in ((JUNCTION, 10.0), (went_west, 10.0), (latch, 10.0), (BIAS, -10.0)):
        conn(source, home, weight)
    drive(west, LEFT_WHEEL, JUNCTION_TO_LEFT / 2)
    drive(west, CHAMPION_HIDDEN, -JUNCTION_TO_HIDDEN / 2)
    drive(west, LEFT_WHEEL, forward)  # merged below: one connection per source and target
    drive(west, RIGHT_WHEEL, forward)
    drive(turn_left, LEFT_WHEEL, -spin)
    turn_right = node(False, -8.0 + 10.0 * side_open)
    for source, weight in ((home, 10.0), (RIGHT, -10.0), (turn_right, 2.0), (REAR, -10.0)):
        conn(source, turn_right, weight)
    drive(home, LEFT_WHEEL, JUNCTION_TO_LEFT / 2)
    drive(home, CHAMPION_HIDDEN, -JUNCTION_TO_HIDDEN / 2)
    drive(home, LEFT_WHEEL, home_forward)
    drive(home, RIGHT_WHEEL, home_forward)
    drive(turn_right, RIGHT_WHEEL, -home_spin)
    _merge_duplicates(g)
    g.treatment = "modulated"
    g.rule = [eta, 1.0, 0.0, 0.0, 0.0]
    return g


def _merge_duplicates(g: Genome) -> None:
    """Sum connection genes with the same source and target into the first one."""
    first: dict[tuple[int, int], ConnGene] = {}
    for innovation in sorted(g.connections):
        c = g.connections[innovation]
        key = (c.source, c.target)
        if key in first:
            first[key].weight += c.weight
            del g.connections[innovation]
        else:
            first[key] = c


def main() -> None:
    genome = build()
    data = {"format": "neurodrome-genome", "version": 1, "channels": list(CHANNELS), "fitness": None,
            "generation": 0, "genome": genome.state()}
    out = ASSETS / "restock-scaffold.genome.json"
    out.write_text(json.dumps(data, indent=2) + "\n")
    print(f"wrote {out}")


if __name__ == "__main__":
    main()
