"""Batched network execution against a slow per-neuron reference and published check values.

The reference below follows the update order of neurodrome.control.network's module
docstring one neuron and one connection at a time, with math.tanh, dicts and no numpy,
and the plasticity rule of Soltoggio et al. (2008) as restated in Soltoggio et al. 2008, ALife XI.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from neurodrome.control.network import NetworkController, compile_networks, network_factory
from neurodrome.control.protocol import Controller, Layout, combine_runs
from neurodrome.control.spec import NetworkSpec, network_from_data

CHANNELS = tuple(f"range_{k}" for k in range(8)) + ("home", "junction", "reward", "bias")
LAYOUT = Layout(CHANNELS, (-90.0, -45.0, -20.0, 0.0, 20.0, 45.0, 90.0, 180.0))


# -- the slow reference --------------------------------------------------------------
def f_ref(activation: str, x: float) -> float:
    """Neuron output functions as the file format defines them."""
    if activation == "tanh_half":
        return math.tanh(x / 2)
    if activation == "logistic":
        return 1.0 / (1.0 + math.exp(-x)) if x > -700 else 0.0
    return x


def wheel_ref(activation: str, o: float) -> float:
    v = 2 * o - 1 if activation == "logistic" else o
    return v if math.isnan(v) else min(max(v, -1.0), 1.0)


class Reference:
    """One network, one neuron at a time."""

    def __init__(self, spec: NetworkSpec, layout: Layout) -> None:
        self.spec, self.layout = spec, layout
        self.neurons = {n.id: n for n in spec.neurons}
        self.order = [n.id for n in spec.neurons]
        self.conns = [(c.source, c.target) for c in spec.connections]
        self.w0 = {(c.source, c.target): c.weight for c in spec.connections}
        self.plastic = {(c.source, c.target): (spec.rule_of(c), spec.bounds_of(c)) for c in spec.connections if c.plastic}
        self.reset_lifetime()

    def reset_lifetime(self) -> None:
        self.w = dict(self.w0)
        self.reset_trial()

    def reset_trial(self) -> None:
        self.o = {nid: (1.0 if self.neurons[nid].role == "bias" else 0.0) for nid in self.order}

    def act(self, obs: list[float]) -> tuple[float, float]:
        presented = dict(self.o)
        for nid, n in self.neurons.items():
            if n.role == "input":
                presented[nid] = obs[self.layout.index(n.channel)]
            elif n.role == "bias":
                presented[nid] = 1.0
        new, modulation = {}, {}
        for i in self.order:
            if self.neurons[i].role not in ("hidden", "output"):
                continue
            a = m = 0.0
            has_mod = False
            for j in self.order:  # sources in file order
                if (j, i) not in self.w:
                    continue
                if self.neurons[j].kind == "modulatory":
                    m += self.w[(j, i)] * presented[j]
                    has_mod = True
                else:
                    a += self.w[(j, i)] * presented[j]
            new[i] = f_ref(self.neurons[i].activation, a + self.neurons[i].bias)
            modulation[i] = math.tanh(m / 2) if has_mod else 1.0
        for (j, i), ((eta, A, B, C, D), (lo, hi)) in self.plastic.items():
            pre, post = presented[j], new[i]
            dw = modulation[i] * (eta * (A * pre * post + B * pre + C * post + D))
            self.w[(j, i)] = min(max(self.w[(j, i)] + dw, lo), hi)
        presented.update(new)
        self.o = presented
        wheels = {n.wheel: n for n in self.neurons.values() if n.role == "output"}
        return tuple(wheel_ref(wheels[k].activation, self.o[wheels[k].id]) for k in ("left", "right"))


# -- random networks -----------------------------------------------------------------
finite = st.floats(-2.0, 2.0, allow_nan=False, allow_infinity=False)


@st.composite
def networks(draw) -> NetworkSpec:
    n_in = draw(st.integers(1, 4))
    neurons = [{"id": f"i{k}", "role": "input", "channel": draw(st.sampled_from(CHANNELS)),
                "kind": draw(st.sampled_from(["standard", "standard", "modulatory"]))} for k in range(n_in)]
    if draw(st.booleans()):
        neurons.append({"id": "b", "role": "bias"})
    computed = [{"id": f"h{k}", "role": "hidden"} for k in range(draw(st.integers(0, 4)))]
    computed += [{"id": "L", "role": "output", "wheel": "left"}, {"id": "R", "role": "output", "wheel": "right"}]
    for n in computed:
        n["kind"] = draw(st.sampled_from(["standard", "standard", "modulatory"]))
        n["activation"] = draw(st.sampled_from(["tanh_half", "tanh_half", "logistic", "linear"]))
        n["bias"] = draw(finite)
    order = draw(st.permutations(neurons + computed))
    ids = [n["id"] for n in order]
    targets = [n["id"] for n in computed]
    pairs = draw(st.lists(st.tuples(st.sampled_from(ids), st.sampled_from(targets)), max_size=30, unique=True))
    conns = []
    for s, t in pairs:
        c = {"source": s, "target": t, "weight": draw(finite), "plastic": draw(st.booleans())}
        if c["plastic"] and draw(st.booleans()):
            c["rule"] = {"learning_rate": draw(finite), "correlation": draw(finite)}
        if c["plastic"] and draw(st.booleans()):
            c["bounds"] = [-3.0, 3.0]
            c["weight"] = max(-3.0, min(3.0, c["weight"]))
        conns.append(c)
    rule = dict(zip(["learning_rate", "correlation", "presynaptic", "postsynaptic", "constant"],
                    [draw(finite) for _ in range(5)]))
    return network_from_data({"format": "neurodrome-network", "version": 1, "rule": rule,
                              "neurons": order, "connections": conns})


def random_spec(rng: np.random.Generator, name: int) -> NetworkSpec:
    """A mixed-size network drawn with numpy (for the bit-identity and speed checks)."""
    n_in, n_hid = int(rng.integers(1, 9)), int(rng.integers(0, 7))
    neurons = [{"id": f"in{k}", "role": "input", "channel": str(rng.choice(CHANNELS))} for k in range(n_in)]
    neurons += [{"id": "one", "role": "bias"}]
    comp = [{"id": f"h{k}", "role": "hidden"} for k in range(n_hid)]
    comp += [{"id": "L", "role": "output", "wheel": "left"}, {"id": "R", "role": "output", "wheel": "right"}]
    for n in comp:
        n["kind"] = "modulatory" if rng.random() < 0.25 else "standard"
        n["activation"] = str(rng.choice(["tanh_half", "logistic", "linear"], p=[0.7, 0.2, 0.1]))
        n["bias"] = float(rng.normal())
    conns = [{"source": n["id"], "target": t["id"], "weight": float(rng.uniform(-2, 2)), "plastic": bool(rng.random() < 0.6)}
             for n in neurons + comp for t in comp if rng.random() < 0.4]
    rule = dict(zip(["learning_rate", "correlation", "presynaptic", "postsynaptic", "constant"],
                    rng.uniform(-1, 1, 5).tolist()))
    return network_from_data({"format": "neurodrome-network", "version": 1, "name": f"net{name}", "rule": rule,
                              "weight_bounds": [-4.0, 4.0], "neurons": neurons + comp, "connections": conns})


def state_bytes(c: NetworkController, k: int, n: int) -> bytes:
    """Agent k's outputs, modulation and weights over its own n neurons, as raw bytes."""
    s = c.state()
    return s["outputs"][k, :n].tobytes() + s["modulation"][k, :n].tobytes() + s["weights"][k, :n, :n].tobytes()


# -- agreement with the reference ----------------------------------------------------
@settings(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(specs=st.lists(networks(), min_size=1, max_size=3), data=st.data())
def test_batched_executor_agrees_with_reference(specs, data):
    """Batched steps match the per-neuron reference (outputs, wheel commands, weights) over random inputs."""
    steps = data.draw(st.integers(1, 12))
    obs = np.array(data.draw(st.lists(st.lists(st.floats(-1, 1), min_size=len(CHANNELS), max_size=len(CHANNELS)),
                                      min_size=steps * len(specs), max_size=steps * len(specs))))
    obs = obs.reshape(steps, len(specs), len(CHANNELS))
    ctrl = NetworkController(specs, LAYOUT)
    refs = [Reference(s, LAYOUT) for s in specs]
    for t in range(steps):
        cmd = ctrl.act(obs[t])
        want = np.array([r.act(list(obs[t, k])) for k, r in enumerate(refs)])
        np.testing.assert_allclose(cmd, want, rtol=1e-9, atol=1e-9)
    st_ = ctrl.state()
    for k, r in enumerate(refs):
        index = {nid: x for x, nid in enumerate(ctrl.neuron_ids[k])}
        for nid, value in r.o.items():
            assert st_["outputs"][k, index[nid]] == pytest.approx(value, rel=1e-9, abs=1e-9)
        for (j, i), w in r.w.items():
            assert st_["weights"][k, index[j], index[i]] == pytest.approx(w, rel=1e-9, abs=1e-9)


# -- published check values ----------------------------------------------------------
def check_net(o_j: float, o_i: float, m: float, eta: float, A: float, B: float, C: float, D: float) -> tuple:
    """A network where input j presents o_j, output i computes o_i (linear, bias o_i, zero
    weight from j) and a modulatory input presents m through a unit weight."""
    spec = network_from_data({
        "format": "neurodrome-network", "version": 1,
        "rule": {"learning_rate": eta, "correlation": A, "presynaptic": B, "postsynaptic": C, "constant": D},
        "neurons": [
            {"id": "j", "role": "input", "channel": "range_0"},
            {"id": "mod", "role": "input", "channel": "reward", "kind": "modulatory"},
            {"id": "i", "role": "output", "wheel": "left", "activation": "linear", "bias": o_i},
            {"id": "R", "role": "output", "wheel": "right"},
        ],
        "connections": [
            {"source": "j", "target": "i", "weight": 0.0, "plastic": True},
            {"source": "mod", "target": "i", "weight": 1.0},
        ],
    })
    ctrl = NetworkController([spec], LAYOUT)
    obs = np.zeros((1, LAYOUT.size))
    obs[0, LAYOUT.index("range_0")] = o_j
    obs[0, LAYOUT.index("reward")] = m
    ctrl.act(obs)
    return ctrl, ctrl.state()["weights"][0, 0, 2]


def test_check_value_tanh_half():
    """tanh(0.5) = 0.4621172 and tanh(1) = 0.7615942 (Soltoggio et al. 2008, ALife XI, computed)."""
    spec = network_from_data({
        "format": "neurodrome-network", "version": 1,
        "neurons": [{"id": "x", "role": "input", "channel": "range_0"},
                    {"id": "L", "role": "output", "wheel": "left"}, {"id": "R", "role": "output", "wheel": "right"}],
        "connections": [{"source": "x", "target": "L", "weight": 1.0}, {"source": "x", "target": "R", "weight": 2.0}],
    })
    ctrl = NetworkController([spec], LAYOUT)
    obs = np.zeros((1, LAYOUT.size))
    obs[0, 0] = 1.0
    left, right = ctrl.act(obs)[0]
    assert left == pytest.approx(0.4621172, abs=1e-7)
    assert right == pytest.approx(0.7615942, abs=1e-7)


def test_check_value_plain_product():
    """o_j=0.5, o_i=-0.2, m=1, eta=1, A=1 gives dw = -0.0462117 (Soltoggio et al. 2008, ALife XI, computed)."""
    _, w = check_net(0.5, -0.2, 1.0, 1.0, 1.0, 0.0, 0.0, 0.0)
    assert w == pytest.approx(-0.0462117, abs=1e-7)


def test_check_value_full_rule():
    """o_j=0.8, o_i=0.6, m=-2, eta=10, (A,B,C,D)=(0.5,-0.2,0.1,0) gives dw = -1.0662318 (Soltoggio et al. 2008, ALife XI)."""
    _, w = check_net(0.8, 0.6, -2.0, 10.0, 0.5, -0.2, 0.1, 0.0)
    assert w == pytest.approx(-1.0662318, abs=1e-7)


def test_check_value_zero_modulation():
    """m = 0 gives dw = 0 whatever the rule (Soltoggio et al. 2008, ALife XI)."""
    _, w = check_net(0.8, 0.6, 0.0, 10.0, 0.5, -0.2, 0.1, 0.3)
    assert w == 0.0


def test_unmodulated_neuron_uses_modulation_one():
    """Without modulatory input the rule is plain Hebbian: dw = eta * A * o_j * o_i (Soltoggio et al. 2008, ALife XI)."""
    spec = network_from_data({
        "format": "neurodrome-network", "version": 1,
        "rule": {"learning_rate": 1.0, "correlation": 1.0, "presynaptic": 0.0, "postsynaptic": 0.0, "constant": 0.0},
        "neurons": [{"id": "j", "role": "input", "channel": "range_0"},
                    {"id": "i", "role": "output", "wheel": "left", "activation": "linear", "bias": -0.2},
                    {"id": "R", "role": "output", "wheel": "right"}],
        "connections": [{"source": "j", "target": "i", "weight": 0.0, "plastic": True}],
    })
    ctrl = NetworkController([spec], LAYOUT)
    obs = np.zeros((1, LAYOUT.size))
    obs[0, 0] = 0.5
    ctrl.act(obs)
    assert ctrl.state()["weights"][0, 0, 1] == pytest.approx(0.5 * -0.2, abs=1e-15)


def test_weights_are_clipped_to_bounds():
    """A rule pushing a weight past its bound leaves it at the bound (Soltoggio et al. 2008, ALife XI: clipped)."""
    _, w = check_net(1.0, 1.0, 0.0, 100.0, 1.0, 0.0, 0.0, 1.0)  # m=0: no change
    assert w == 0.0
    spec = network_from_data({
        "format": "neurodrome-network", "version": 1, "weight_bounds": [-0.5, 0.5],
        "rule": {"learning_rate": 100.0, "correlation": 0.0, "presynaptic": 0.0, "postsynaptic": 0.0, "constant": 1.0},
        "neurons": [{"id": "j", "role": "bias"}, {"id": "L", "role": "output", "wheel": "left"},
                    {"id": "R", "role": "output", "wheel": "right"}],
        "connections": [{"source": "j", "target": "L", "weight": 0.0, "plastic": True},
                        {"source": "j", "target": "R", "weight": 0.0, "plastic": True, "rule": {"learning_rate": -100.0}}],
    })
    ctrl = NetworkController([spec], LAYOUT)
    ctrl.act(np.zeros((1, LAYOUT.size)))
    w = ctrl.state()["weights"][0]
    assert (w[0, 1], w[0, 2]) == (0.5, -0.5)


# -- batching ----------------------------------------------------------------------
def run(ctrl: NetworkController, obs: np.ndarray, trial_every: int = 7) -> list[np.ndarray]:
    out = []
    for t in range(obs.shape[0]):
        if t and t % trial_every == 0:
            ctrl.reset_trial(np.ones(ctrl.n_agents, dtype=bool))
        out.append(ctrl.act(obs[t]))
    return out


def test_bit_identical_alone_and_in_mixed_batch():
    """80 networks of mixed sizes give bit-identical commands and state alone and in one batch (DESIGN.md decision 5)."""
    rng = np.random.default_rng(7)
    specs = [random_spec(rng, k) for k in range(80)]
    steps = 25
    obs = rng.uniform(0, 1, (steps, len(specs), LAYOUT.size))
    batch = NetworkController(specs, LAYOUT)
    assert len({len(s.neurons) for s in specs}) > 5
    batched = np.stack(run(batch, obs))
    perm = rng.permutation(len(specs))
    shuffled = NetworkController([specs[k] for k in perm], LAYOUT)
    shuffled_out = np.stack(run(shuffled, obs[:, perm]))
    for k, spec in enumerate(specs):
        alone = NetworkController([spec], LAYOUT)
        alone_out = np.stack(run(alone, obs[:, k : k + 1]))
        assert alone_out[:, 0].tobytes() == batched[:, k].tobytes()
        pk = int(np.flatnonzero(perm == k)[0])
        assert shuffled_out[:, pk].tobytes() == batched[:, k].tobytes()
        n = len(spec.neurons)
        assert state_bytes(alone, 0, n) == state_bytes(batch, k, n)


def test_combine_keeps_each_agent_state():
    """combine() of controllers mid-run continues exactly as the separate controllers would."""
    rng = np.random.default_rng(3)
    specs = [random_spec(rng, k) for k in range(6)]
    obs = rng.uniform(0, 1, (10, 6, LAYOUT.size))
    parts = [NetworkController(specs[:2], LAYOUT), NetworkController(specs[2:3], LAYOUT), NetworkController(specs[3:], LAYOUT)]
    for t in range(5):
        for p, sl in zip(parts, (slice(0, 2), slice(2, 3), slice(3, 6))):
            p.act(obs[t, sl])
    (fused,) = combine_runs(parts)
    assert isinstance(fused, NetworkController) and fused.n_agents == 6
    for t in range(5, 10):
        want = np.concatenate([p.act(obs[t, sl]) for p, sl in zip(parts, (slice(0, 2), slice(2, 3), slice(3, 6)))])
        assert fused.act(obs[t]).tobytes() == want.tobytes()


def test_trial_reset_keeps_weights_lifetime_reset_restores_them():
    """Trial reset clears activations of masked agents only and keeps learned weights; lifetime reset restores initial weights."""
    rng = np.random.default_rng(11)
    specs = [random_spec(rng, k) for k in range(4)]
    ctrl = NetworkController(specs, LAYOUT)
    initial = ctrl.state()
    obs = rng.uniform(0, 1, (15, 4, LAYOUT.size))
    for t in range(15):
        ctrl.act(obs[t])
    learned = ctrl.state()
    assert not np.array_equal(learned["weights"], initial["weights"])
    ctrl.reset_trial(np.array([True, False, True, False]))
    after = ctrl.state()
    np.testing.assert_array_equal(after["weights"], learned["weights"])
    for k in (1, 3):
        np.testing.assert_array_equal(after["outputs"][k], learned["outputs"][k])
    for k in (0, 2):
        comp = compile_networks([specs[k]], LAYOUT)
        np.testing.assert_array_equal(after["outputs"][k, : comp.size], comp.is_bias[0].astype(float))
    # after a trial reset the agent behaves as a fresh network carrying the learned weights
    ctrl.reset_lifetime(np.arange(4, dtype=np.uint64))
    again = ctrl.state()
    np.testing.assert_array_equal(again["weights"], initial["weights"])
    np.testing.assert_array_equal(again["outputs"], initial["outputs"])
    np.testing.assert_array_equal(np.stack(run(ctrl, obs)), np.stack(run(NetworkController(specs, LAYOUT), obs)))


def test_fixed_connections_never_change():
    """Only plastic connections change; fixed ones keep their file weight over a long run."""
    rng = np.random.default_rng(5)
    specs = [random_spec(rng, k) for k in range(10)]
    ctrl = NetworkController(specs, LAYOUT)
    for t in range(60):
        ctrl.act(rng.uniform(0, 1, (10, LAYOUT.size)))
    w = ctrl.state()["weights"]
    changed = 0
    for k, spec in enumerate(specs):
        index = {nid: x for x, nid in enumerate(ctrl.neuron_ids[k])}
        for c in spec.connections:
            now = w[k, index[c.source], index[c.target]]
            if c.plastic:
                changed += now != c.weight
            else:
                assert now == c.weight
    assert changed > 0


def test_plastic_weight_changes_only_while_modulated():
    """With a reward-gated modulatory neuron, a plastic weight moves only in steps after a reward, by the formula."""
    spec = network_from_data({
        "format": "neurodrome-network", "version": 1,
        "rule": {"learning_rate": 1.0, "correlation": 1.0, "presynaptic": 0.0, "postsynaptic": 0.0, "constant": 0.0},
        "neurons": [{"id": "x", "role": "input", "channel": "range_3"},
                    {"id": "reward", "role": "input", "channel": "reward"},
                    {"id": "gate", "role": "hidden", "kind": "modulatory"},
                    {"id": "L", "role": "output", "wheel": "left"}, {"id": "R", "role": "output", "wheel": "right"}],
        "connections": [{"source": "x", "target": "L", "weight": 0.3, "plastic": True},
                        {"source": "reward", "target": "gate", "weight": 2.0},
                        {"source": "gate", "target": "L", "weight": 1.5}],
    })
    ctrl = NetworkController([spec], LAYOUT)
    ref = Reference(spec, LAYOUT)
    rewards = [0, 0, 0, 1, 1, 0, 0, 0, 0]
    weights = [0.3]
    for r in rewards:
        obs = np.zeros((1, LAYOUT.size))
        obs[0, LAYOUT.index("range_3")] = 0.7
        obs[0, LAYOUT.index("reward")] = r
        ctrl.act(obs)
        ref.act(list(obs[0]))
        weights.append(ctrl.state()["weights"][0, 0, 3])
        assert weights[-1] == pytest.approx(ref.w[("x", "L")], abs=1e-12)
    moved = [a != b for a, b in zip(weights, weights[1:])]
    # the gate reads the reward in the step it arrives and modulates L one step later
    # (one step of delay on every connection out of a computed neuron)
    assert moved == [False, False, False, False, True, True, False, False, False]


def test_non_finite_output_is_returned_not_raised():
    """A network that overflows returns NaN/inf commands without raising, and faulted() names the agent."""
    spec = network_from_data({
        "format": "neurodrome-network", "version": 1,
        "neurons": [{"id": "one", "role": "bias"},
                    {"id": "L", "role": "output", "wheel": "left", "activation": "linear"},
                    {"id": "R", "role": "output", "wheel": "right", "activation": "linear"}],
        "connections": [{"source": "one", "target": "L", "weight": 1e300}, {"source": "L", "target": "L", "weight": 1e300},
                        {"source": "L", "target": "R", "weight": -1e300}, {"source": "R", "target": "R", "weight": 1e300}],
    })
    healthy = random_spec(np.random.default_rng(1), 0)
    ctrl = NetworkController([healthy, spec], LAYOUT)
    alone = NetworkController([healthy], LAYOUT)
    obs = np.full((2, LAYOUT.size), 0.5)
    for _ in range(5):
        cmd = ctrl.act(obs)
        assert cmd[0].tobytes() == alone.act(obs[:1])[0].tobytes()
    assert not np.isfinite(cmd[1]).all()
    np.testing.assert_array_equal(ctrl.faulted(), [False, True])


def test_protocol_and_factory():
    """NetworkController satisfies the Controller protocol; the factory builds one per layout."""
    spec = random_spec(np.random.default_rng(2), 0)
    ctrl = network_factory(spec)(LAYOUT)
    assert isinstance(ctrl, Controller) and ctrl.n_agents == 1
    out = ctrl.act(np.zeros((1, LAYOUT.size)))
    assert out.shape == (1, 2) and out.dtype == np.float64
    assert np.all(np.abs(out) <= 1.0)
    with pytest.raises(ValueError):
        ctrl.act(np.zeros((2, LAYOUT.size)))


def test_logistic_output_maps_to_full_wheel_range():
    """A logistic output at 0.5 (zero input) is a stopped wheel; linear outputs are clipped to [-1, 1]."""
    spec = network_from_data({
        "format": "neurodrome-network", "version": 1,
        "neurons": [{"id": "one", "role": "bias"},
                    {"id": "L", "role": "output", "wheel": "left", "activation": "logistic"},
                    {"id": "R", "role": "output", "wheel": "right", "activation": "linear", "bias": 5.0}],
        "connections": [],
    })
    ctrl = NetworkController([spec], LAYOUT)
    np.testing.assert_array_equal(ctrl.act(np.zeros((1, LAYOUT.size))), [[0.0, 1.0]])


def test_courier_reflex_steers_away_from_walls():
    """The bundled courier-reflex drives straight when centred and turns away from a near wall (push-pull steering, common practice)."""
    from pathlib import Path

    from neurodrome.control.spec import load_network

    spec = load_network(Path(__file__).resolve().parents[1] / "assets" / "courier-reflex.net.json")
    ctrl = NetworkController([spec], LAYOUT)
    # Proximity 1 - d/range of a robot (radius 0.1) centred in a 0.5 m corridor, range 1 m,
    # rays at [-90, -45, -20, 0, 20, 45, 90, 180] deg: d = 0.25 / sin(angle) - 0.1.
    centred = np.zeros((1, LAYOUT.size))
    for k, a in enumerate([-90, -45, -20, 20, 45, 90]):
        d = 0.25 / abs(math.sin(math.radians(a))) - 0.1
        centred[0, [0, 1, 2, 4, 5, 6][k]] = max(0.0, 1 - d)
    left, right = ctrl.act(centred)[0]
    assert left == pytest.approx(right, abs=1e-12) and left > 0.3
    near_left = centred.copy()
    near_left[0, [4, 5, 6]] += 0.1  # closer to the wall on the left (positive angles)
    ctrl.reset_trial(np.ones(1, dtype=bool))
    left, right = ctrl.act(near_left)[0]
    assert left > right  # turns right, away from it
    near_right = centred.copy()
    near_right[0, [0, 1, 2]] += 0.1
    ctrl.reset_trial(np.ones(1, dtype=bool))
    left, right = ctrl.act(near_right)[0]
    assert right > left
