"""The network file: validation errors name the neuron or connection, round trips, layouts."""

from __future__ import annotations

import copy
import json
import math
from pathlib import Path

import pytest

from neurodrome.control.protocol import Layout
from neurodrome.control.spec import (
    DEFAULT_BOUNDS,
    check_against_layout,
    load_network,
    network_from_data,
    network_json_schema,
    network_to_data,
    save_network,
)
from neurodrome.errors import ControllerFileError

ASSETS = Path(__file__).resolve().parents[1] / "assets"
LAYOUT = Layout(tuple(f"range_{k}" for k in range(8)) + ("home", "junction", "reward", "bias"),
                (-90.0, -45.0, -20.0, 0.0, 20.0, 45.0, 90.0, 180.0))


def base() -> dict:
    return {
        "format": "neurodrome-network",
        "version": 1,
        "rule": {"learning_rate": 1.0, "correlation": 1.0, "presynaptic": 0.0, "postsynaptic": 0.0, "constant": 0.0},
        "neurons": [
            {"id": "eye", "role": "input", "channel": "range_3"},
            {"id": "one", "role": "bias"},
            {"id": "gate", "role": "hidden", "kind": "modulatory"},
            {"id": "L", "role": "output", "wheel": "left"},
            {"id": "R", "role": "output", "wheel": "right", "activation": "logistic"},
        ],
        "connections": [
            {"source": "eye", "target": "L", "weight": 0.5, "plastic": True},
            {"source": "one", "target": "R", "weight": -0.5},
            {"source": "gate", "target": "L", "weight": 1.0},
        ],
    }


def problems_of(data: dict) -> list[str]:
    with pytest.raises(ControllerFileError) as info:
        network_from_data(data)
    return [str(p) for p in info.value.problems]


def test_valid_network_loads_with_defaults():
    """A valid dict loads; bounds default to [-10, 10] (Soltoggio et al. 2008, ALife XI, memory, low confidence)."""
    spec = network_from_data(base())
    assert spec.weight_bounds == DEFAULT_BOUNDS == (-10.0, 10.0)
    assert spec.neurons[3].activation == "tanh_half"
    assert spec.neurons[0].kind == "standard"


def test_duplicate_neuron_id_is_named():
    """Two neurons with one id: the error names the id."""
    data = base()
    data["neurons"].append({"id": "gate", "role": "hidden"})
    (msg,) = problems_of(data)
    assert "'gate'" in msg and "neurons[5]" in msg


def test_unknown_connection_end_is_named():
    """A connection to a neuron that does not exist names the connection and the unknown id."""
    data = base()
    data["connections"].append({"source": "eye", "target": "ghost", "weight": 1.0})
    (msg,) = problems_of(data)
    assert "eye -> ghost" in msg and "unknown neuron 'ghost'" in msg


def test_duplicate_connection_is_named():
    """Two connections with the same source and target: the second is named."""
    data = base()
    data["connections"].append({"source": "one", "target": "R", "weight": 2.0})
    (msg,) = problems_of(data)
    assert "connections[3] (connection one -> R)" in msg and "connections[1]" in msg


@pytest.mark.parametrize("wheel", ["left", "right"])
def test_missing_wheel_output_is_reported(wheel):
    """A network without an output for one wheel names that wheel."""
    data = base()
    data["neurons"] = [n for n in data["neurons"] if n.get("wheel") != wheel]
    data["connections"] = [c for c in data["connections"] if c["target"] in {n["id"] for n in data["neurons"]}]
    (msg,) = problems_of(data)
    assert f"wheel '{wheel}'" in msg


def test_two_outputs_for_one_wheel_are_named():
    """Two output neurons on the left wheel: both ids appear."""
    data = base()
    data["neurons"].append({"id": "L2", "role": "output", "wheel": "left"})
    (msg,) = problems_of(data)
    assert "'L2'" in msg and "'L'" in msg


@pytest.mark.parametrize("target", ["eye", "one"])
def test_connection_into_input_or_bias_is_refused(target):
    """Connections into input and bias neurons are refused, naming the connection."""
    data = base()
    data["connections"].append({"source": "L", "target": target, "weight": 1.0})
    (msg,) = problems_of(data)
    assert f"L -> {target}" in msg


@pytest.mark.parametrize("where", ["weight", "bias"])
def test_non_finite_numbers_are_refused_with_the_item_named(where):
    """NaN in a weight or bias (an evolver's dict) names the connection or neuron."""
    data = base()
    if where == "weight":
        data["connections"][1]["weight"] = math.nan
        expect = "connection one -> R"
    else:
        data["neurons"][2]["bias"] = math.inf
        expect = "neuron 'gate'"
    (msg,) = problems_of(data)
    assert expect in msg and "finite" in msg


def test_non_finite_in_file_is_refused(tmp_path):
    """A file with NaN is not valid JSON (RFC 8259 has no NaN) and is refused."""
    path = tmp_path / "bad.net.json"
    path.write_text(json.dumps(base()).replace("0.5", "NaN"))
    with pytest.raises(ControllerFileError):
        load_network(path)


def test_input_without_channel_and_hidden_with_wheel_are_named():
    """Role-specific fields: an input needs a channel, a hidden neuron takes no wheel."""
    data = base()
    del data["neurons"][0]["channel"]
    data["neurons"][2]["wheel"] = "left"
    msgs = problems_of(data)
    assert any("'eye'" in m and "channel" in m for m in msgs)
    assert any("'gate'" in m and "wheel" in m for m in msgs)


def test_incomplete_rule_names_connection_and_missing_fields():
    """A plastic connection whose merged rule lacks fields names them."""
    data = base()
    del data["rule"]
    data["connections"][0]["rule"] = {"learning_rate": 0.5}
    (msg,) = problems_of(data)
    assert "eye -> L" in msg and "correlation" in msg and "constant" in msg


def test_per_connection_rule_overrides_network_rule():
    """A connection's rule fields override the network's, field by field."""
    data = base()
    data["connections"][0]["rule"] = {"learning_rate": -3.0}
    spec = network_from_data(data)
    assert spec.rule_of(spec.connections[0]) == (-3.0, 1.0, 0.0, 0.0, 0.0)


def test_rule_on_fixed_connection_is_refused():
    """A rule on a non-plastic connection is a mistake and is named."""
    data = base()
    data["connections"][1]["rule"] = {"learning_rate": 1.0}
    (msg,) = problems_of(data)
    assert "one -> R" in msg


def test_initial_weight_outside_bounds_is_named():
    """A plastic connection starting outside its bounds names the connection."""
    data = base()
    data["connections"][0]["bounds"] = [-0.1, 0.1]
    (msg,) = problems_of(data)
    assert "eye -> L" in msg and "bounds" in msg


def test_inverted_bounds_are_refused():
    """Weight bounds must have low < high."""
    data = base()
    data["weight_bounds"] = [1.0, -1.0]
    (msg,) = problems_of(data)
    assert "weight_bounds" in msg


def test_wrong_format_and_version_are_refused():
    """Another format name or version is refused with a clear message."""
    data = base()
    data["format"] = "something-else"
    assert "format" in problems_of(data)[0]
    data = base()
    data["version"] = 2
    assert "version" in problems_of(data)[0]


def test_unknown_field_is_refused():
    """A misspelt field is refused rather than ignored."""
    data = base()
    data["neurons"][3]["activaton"] = "linear"
    (msg,) = problems_of(data)
    assert "activaton" in msg and "neuron 'L'" in msg


def test_all_problems_reported_at_once():
    """Several independent mistakes are reported together."""
    data = base()
    data["connections"].append({"source": "eye", "target": "ghost", "weight": 1.0})
    data["connections"].append({"source": "one", "target": "R", "weight": 2.0})
    assert len(problems_of(data)) == 2


def test_layout_check_names_neuron_and_channel():
    """An input bound to a channel the world lacks names the neuron and the channel."""
    data = base()
    data["neurons"][0]["channel"] = "range_9"
    spec = network_from_data(data)
    with pytest.raises(ControllerFileError) as info:
        check_against_layout(spec, LAYOUT)
    msg = str(info.value)
    assert "neuron 'eye'" in msg and "range_9" in msg
    check_against_layout(network_from_data(base()), LAYOUT)


def test_round_trip_through_file(tmp_path):
    """Dump then load gives the same spec; the dict form round-trips too."""
    spec = network_from_data(base())
    save_network(spec, tmp_path / "n.net.json")
    again = load_network(tmp_path / "n.net.json")
    assert again == spec
    assert network_from_data(copy.deepcopy(network_to_data(spec))) == spec


def test_json_schema_names_the_fields():
    """The exported JSON Schema describes the neuron and connection fields."""
    schema = json.dumps(network_json_schema())
    for field in ("learning_rate", "weight_bounds", "plastic", "wheel", "channel"):
        assert field in schema


def test_bundled_example_validates_against_the_junction_world():
    """assets/courier-reflex.net.json loads and matches the bundled junction world's channels."""
    from neurodrome.world.load import world_from_data
    from neurodrome.world.templates import junction

    spec = load_network(ASSETS / "courier-reflex.net.json")
    check_against_layout(spec, Layout.of(world_from_data(junction())))
    assert any(n.kind == "modulatory" for n in spec.neurons)
    assert any(c.plastic for c in spec.connections)
