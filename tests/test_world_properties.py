"""Property-based checks on random corridor graphs (hypothesis).

Invariants are facts of plane geometry and of shapely's own validity test: the union of
corridors is a valid polygon whose area lies between the largest single corridor and the
sum of all; its boundary rings are closed, so every wall end point starts exactly one
wall; and ``check`` answers every file, however damaged, with exit 0 or 2.
"""

from __future__ import annotations

import copy
import json
import tempfile
from collections import Counter
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from neurodrome.cli import main
from neurodrome.world import build_geometry, world_from_data
from neurodrome.world.geometry import corridor_polygon
from neurodrome.world.lint import lint, summarize

coord = st.floats(min_value=-5.0, max_value=5.0, allow_nan=False).map(lambda v: round(v, 3))
point = st.tuples(coord, coord)
width = st.floats(min_value=0.15, max_value=1.0, allow_nan=False).map(lambda v: round(v, 3))


@st.composite
def corridor_graph(draw):
    """A few nodes joined by corridors (polylines through 2-4 nodes)."""
    nodes = draw(st.lists(point, min_size=2, max_size=6, unique=True))
    corridors = []
    for _ in range(draw(st.integers(1, 5))):
        idx = draw(st.lists(st.integers(0, len(nodes) - 1), min_size=2, max_size=4))
        path = [nodes[i] for i in idx]
        path = [p for k, p in enumerate(path) if k == 0 or p != path[k - 1]]
        if len(path) >= 2:
            corridors.append({"path": [list(p) for p in path], "width": draw(width)})
    if not corridors:
        corridors.append({"path": [list(nodes[0]), list(nodes[1])], "width": draw(width)})
    return corridors


def world_data(corridors):
    first, last = corridors[0]["path"][0], corridors[-1]["path"][-1]
    return {
        "format": "neurodrome-world", "version": 1, "name": "random",
        "corridors": corridors,
        "home": {"position": first, "radius": 0.05},
        "sites": [{"name": "s", "position": last, "radius": 0.05}],
        "task": {"trials": 10, "site_values": {"s": 1.0}},
    }


SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@SETTINGS
@given(corridor_graph())
def test_free_space_is_a_valid_polygon(corridors):
    """The free space is valid, non-empty, and between max and sum of corridor areas."""
    spec = world_from_data(world_data(corridors))
    g = build_geometry(spec)
    assert g.free.is_valid and not g.free.is_empty
    areas = [corridor_polygon(c.path, c.width).area for c in spec.corridors]
    assert max(areas) - 1e-9 <= g.area <= sum(areas) + 1e-9


@SETTINGS
@given(corridor_graph())
def test_walls_are_closed_rings(corridors):
    """Every wall end point is the start of exactly one wall: the rings close."""
    g = build_geometry(world_from_data(world_data(corridors)))
    walls = g.walls[: g.boundary_walls]
    starts = Counter(map(tuple, walls[:, :2].round(9)))
    ends = Counter(map(tuple, walls[:, 2:].round(9)))
    assert len(walls) >= 3 and starts == ends  # a thick closed loop can fill in to a triangle


@SETTINGS
@given(corridor_graph())
def test_lint_and_summary_never_raise(corridors):
    """lint and summarize return findings and facts for any random maze."""
    spec = world_from_data(world_data(corridors))
    g = build_geometry(spec)
    findings = lint(spec, g)
    assert all(f.level in ("error", "warning") and f.where.startswith("$") for f in findings)
    assert summarize(spec, g)["corridors"] == len(corridors)


_json = st.recursive(
    st.none() | st.booleans() | st.integers(-10**6, 10**6) | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(max_size=8),
    lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=6), inner, max_size=3),
    max_leaves=6,
)


def _paths(obj, prefix=()):
    yield prefix
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(obj, list):
        for k, v in enumerate(obj):
            yield from _paths(v, prefix + (k,))


BASE = json.loads((Path(__file__).resolve().parents[1] / "worlds" / "clinic-junction-restock.json").read_text())
PATHS = [p for p in _paths(BASE) if p]


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.sampled_from(PATHS), _json)
def test_check_never_raises_on_damaged_files(path, value):
    """Replacing any field of a valid world with any JSON value gives exit 0 or 2, never a crash."""
    data = copy.deepcopy(BASE)
    node = data
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = value
    with tempfile.TemporaryDirectory() as tmp:
        file = Path(tmp) / "w.json"
        file.write_text(json.dumps(data))
        code = main(["check", "--json", str(file)])
    assert code in (0, 2)


@SETTINGS
@given(corridor_graph())
def test_check_command_on_random_mazes(corridors):
    """check on a random maze file exits 0 or 2 with a JSON report."""
    with tempfile.TemporaryDirectory() as tmp:
        file = Path(tmp) / "w.json"
        file.write_text(json.dumps(world_data(corridors)))
        assert main(["check", "--json", str(file)]) in (0, 2)


@pytest.mark.parametrize("text", ["", "{", "[]", "null", '{"format": 1}', "\"\\ud800\""])
def test_check_tiny_inputs(text, tmp_path):
    """Degenerate JSON documents give exit 2."""
    file = tmp_path / "w.json"
    file.write_text(text)
    assert main(["check", str(file)]) == 2
