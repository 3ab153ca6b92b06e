"""Random plastic networks for the benchmarks: about 16 neurons, one modulatory.

``random_network(rng, layout)`` builds a network description (a dict, as an evolver
would) for a world's observation layout; ``network_factory(layout)`` gives a zero-arg
callable that makes a :class:`NetworkController` for a new random network each call.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from neurodrome.control.network import NetworkController
from neurodrome.control.protocol import Layout
from neurodrome.control.spec import NETWORK_FORMAT, NETWORK_VERSION, network_from_data

BOUNDS = (-3.0, 3.0)
MAX_INPUTS = 10
HIDDEN = 2


def random_network(rng: np.random.Generator, layout: Layout, name: str = "random") -> dict:
    """A network description: up to 10 inputs (range finders first, then signals other
    than bias), a bias neuron, two hidden neurons, one modulatory neuron and two wheel
    outputs; each feed-forward or recurrent connection present with probability 0.6,
    half of them plastic, weights and rule drawn from ``rng``."""
    channels = [c for c in layout.channels if c != "bias"][:MAX_INPUTS]
    inputs = [{"id": f"in-{c}", "role": "input", "channel": c} for c in channels]
    hidden = [{"id": f"h{k}", "role": "hidden", "bias": float(rng.normal(0, 0.5))} for k in range(HIDDEN)]
    gate = [{"id": "gate", "role": "hidden", "kind": "modulatory", "bias": float(rng.normal(0, 0.5))}]
    outputs = [
        {"id": f"{w}-wheel", "role": "output", "wheel": w, "bias": float(rng.normal(0, 0.5))} for w in ("left", "right")
    ]
    bias = [{"id": "const", "role": "bias"}]
    sources = [n["id"] for n in inputs + bias + hidden + gate]
    targets = [n["id"] for n in hidden + gate + outputs]
    connections = []
    for s in sources:
        for t in targets:
            must = s == "gate" and t.endswith("-wheel")  # the gate always modulates the wheels
            if s == t or not (must or rng.random() < 0.6):
                continue
            conn = {"source": s, "target": t, "weight": float(np.clip(rng.normal(0, 1.0), *BOUNDS))}
            if s != "gate" and rng.random() < 0.5:
                conn["plastic"] = True
            connections.append(conn)
    return {
        "format": NETWORK_FORMAT,
        "version": NETWORK_VERSION,
        "name": name,
        "rule": {
            "learning_rate": float(rng.uniform(0.05, 1.0)),
            "correlation": float(rng.normal(0, 1)),
            "presynaptic": float(rng.normal(0, 0.3)),
            "postsynaptic": float(rng.normal(0, 0.3)),
            "constant": float(rng.normal(0, 0.1)),
        },
        "weight_bounds": list(BOUNDS),
        "neurons": inputs + bias + hidden + gate + outputs,
        "connections": connections,
    }


def random_population(n: int, layout: Layout, seed: int = 0) -> list[dict]:
    """``n`` random network descriptions from one seed."""
    rng = np.random.default_rng(seed)
    return [random_network(rng, layout, f"random-{k}") for k in range(n)]


def network_factory(layout: Layout, seed: int = 0) -> Callable[[], NetworkController]:
    """A zero-arg callable: each call compiles a new random network for ``layout``."""
    rng = np.random.default_rng(seed)

    def make() -> NetworkController:
        return NetworkController([network_from_data(random_network(rng, layout))], layout)

    return make
