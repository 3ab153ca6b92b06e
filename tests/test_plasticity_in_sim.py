"""Plasticity acts in the simulator: a plastic weight changes only while its modulatory
neuron is active (after a reward), by the published rule, step by step.

Rule: dw_ji = tanh(m_i / 2) * eta * (A o_j o_i + B o_j + C o_i + D), Soltoggio et al.
(2008), restated in Risi, Hughes & Stanley (2010); Soltoggio et al. 2008, ALife XI
(equations from memory, high confidence).
"""

from __future__ import annotations

import math

import numpy as np

from neurodrome.control.network import NetworkController
from neurodrome.control.protocol import Layout
from neurodrome.control.spec import network_from_data
from neurodrome.sim.batch import Batch
from neurodrome.world import world_from_data

ETA, A, B, C, D = 0.5, 1.0, 0.2, -0.3, 0.0


def corridor_world():
    return world_from_data({
        "format": "neurodrome-world", "version": 1, "name": "dispatch-straight",
        "corridors": [{"path": [[0.0, 0.0], [2.0, 0.0]], "width": 0.5}],
        "home": {"position": [0.0, 0.0], "heading_deg": 0.0, "radius": 0.2},
        "sites": [{"name": "store", "position": [1.2, 0.0], "radius": 0.2}],
        "robot": {"range_finders": {"angles_deg": [0.0], "max_range": 0.5}, "signals": ["reward", "bias"]},
        "task": {"trials": 2, "time_limit_s": 10.0, "site_values": {"store": 0.8},
                 "scoring": {"return_home": False}, "reward_signal_steps": 4},
        "physics": {"time_step_s": 0.05, "control_period_s": 0.1},
    })


def gated_network():
    """Drives straight on; a reward excites the modulatory 'gate', which modulates the
    plastic bias -> 'trace' connection."""
    return network_from_data({
        "format": "neurodrome-network", "version": 1, "name": "reward-gated-trace",
        "rule": {"learning_rate": ETA, "correlation": A, "presynaptic": B, "postsynaptic": C, "constant": D},
        "neurons": [
            {"id": "reward", "role": "input", "channel": "reward"},
            {"id": "one", "role": "bias"},
            {"id": "gate", "role": "hidden", "kind": "modulatory"},
            {"id": "trace", "role": "hidden"},
            {"id": "left", "role": "output", "wheel": "left"},
            {"id": "right", "role": "output", "wheel": "right"},
        ],
        "connections": [
            {"source": "reward", "target": "gate", "weight": 4.0},
            {"source": "gate", "target": "trace", "weight": 1.0},
            {"source": "one", "target": "trace", "weight": 0.1, "plastic": True},
            {"source": "one", "target": "left", "weight": 1.2},
            {"source": "one", "target": "right", "weight": 1.2},
        ],
    })


def test_plastic_weight_changes_only_after_reward_by_the_rule():
    """Before the reward the weight is constant (m = 0 exactly); after it, each step's
    change equals the rule computed from that step's values; it persists across trials."""
    world = corridor_world()
    layout = Layout.of(world)
    net = NetworkController([gated_network()], layout)
    ids = net.neuron_ids[0]
    one, gate, trace = ids.index("one"), ids.index("gate"), ids.index("trace")
    batch = Batch(world, [net], seed=0)
    weights, mods, post, rewards, trials = [], [], [], [], []
    state = net.state()
    weights.append(state["weights"][0, one, trace])
    while not batch.done:
        reward_in = batch.obs[0, layout.index("reward")]
        batch.step()
        state = net.state()
        weights.append(state["weights"][0, one, trace])
        mods.append(state["modulation"][0, trace])
        post.append(state["outputs"][0, trace])
        rewards.append(reward_in)
        trials.append(int(batch.trial[0]))
    w, m = np.array(weights), np.array(mods)
    dw = np.diff(w)
    first_reward = rewards.index(0.8)
    assert first_reward > 5  # the robot drove to the site before any reward
    assert np.all(dw[: first_reward + 1] == 0.0)  # the gate's value reaches m one step later
    assert np.any(dw[first_reward + 1:] != 0.0)
    for t in range(len(dw)):
        if t and trials[t] != trials[t - 1]:
            continue  # the trial ended in this step: reset_trial cleared m and o after the update
        # o_j = 1 (bias neuron); o_i the new output of 'trace'; m_i = w_gate,trace * o_gate
        expected = math.tanh(m[t] / 2) * ETA * (A * 1.0 * post[t] + B * 1.0 + C * post[t] + D)
        assert abs(dw[t] - expected) < 1e-12
        if m[t] != 0.0:
            # the gate is tanh_half of 4 x the reward seen one step earlier
            assert abs(m[t] - math.tanh(4.0 * rewards[t - 1] / 2)) < 1e-12
    # learning persists across the trial boundary: trial 2 starts with the learned weight
    boundary = trials.index(2)  # step index whose update ended trial 1
    assert w[boundary + 1] != w[0]
    assert np.all(dw[boundary + 1: boundary + 5] == 0.0)  # no reward yet in trial 2: weight held
    assert batch.results()[0].fitness == 1.6
