"""Corridor geometry and lint against hand-computed values.

Formulas (elementary plane geometry, worked out by hand for square-capped corridors of
width w, each cap adding w/2 beyond a centre-line end):
- straight corridor of length l: a rectangle (l + w) x w, area (l + w) * w, 4 walls;
- L (one polyline, legs a and b, right angle, mitred corner) = two rectangles
  (a + w) x w and (b + w) x w sharing a w x w corner square:
  area (a + w) w + (b + w) w - w^2, a hexagon: 6 walls;
- T (stem s up to the middle of a crossing of half length c): rectangles (s + w) x w and
  (2c + w) x w sharing a w x w square: area (s + w) w + (2c + w) w - w^2, 8 walls;
- eroding a straight corridor by r leaves a (l + w - 2r) x (w - 2r) rectangle.
"""

from __future__ import annotations

import math

import pytest
import shapely
from shapely.geometry import LineString

from neurodrome.world import build_geometry, world_from_data
from neurodrome.world.lint import CLEARANCE_MARGIN, lint, summarize, value_schedule, widest_robot_diameter


def make_world(corridors, *, home=(0.0, 0.0), sites=None, trials=20, relocations=(), radius=0.1, values=None,
               **extra):
    """A minimal valid world around the given corridors (list of (path, width))."""
    sites = sites if sites is not None else [("a", corridors[-1][0][-1])]
    data = {
        "format": "neurodrome-world",
        "version": 1,
        "name": "test-world",
        "corridors": [{"path": [list(p) for p in path], "width": w} for path, w in corridors],
        "home": {"position": list(home), "radius": 0.1},
        "sites": [{"name": n, "position": list(p), "radius": 0.1} for n, p in sites],
        "robot": {"radius": radius, "wheel_base": 1.8 * radius, "range_finders": {"max_range": 0.5}},
        "task": {"trials": trials, "time_limit_s": 60.0, "site_values": values or {n: 1.0 for n, _ in sites},
                 "relocations": list(relocations)},
    }
    data.update(extra)
    return world_from_data(data)


def codes(findings, level="error"):
    return {f.code for f in findings if f.level == level}


@pytest.mark.parametrize("length,width", [(1.0, 0.5), (2.5, 0.3), (0.4, 1.0)])
def test_straight_corridor_area_and_walls(length, width):
    """Straight corridor: area (l + w) * w and 4 wall segments (formula in module doc)."""
    g = build_geometry(make_world([([(0, 0), (length, 0)], width)], sites=[("a", (length, 0))]))
    assert g.area == pytest.approx((length + width) * width, rel=1e-12)
    assert len(g.walls) == 4


@pytest.mark.parametrize("a,b,w", [(1.0, 1.5, 0.5), (2.0, 0.7, 0.4)])
def test_l_junction_area_and_walls(a, b, w):
    """L of one polyline: (a + w) w + (b + w) w - w^2, a hexagon of 6 walls."""
    g = build_geometry(make_world([([(0, 0), (a, 0), (a, b)], w)], sites=[("a", (a, b))]))
    assert g.area == pytest.approx((a + w) * w + (b + w) * w - w * w, rel=1e-12)
    assert len(g.walls) == 6


def test_l_from_two_corridors_equals_one_polyline():
    """Two square-capped corridors meeting at a corner give the same L as one polyline."""
    one = build_geometry(make_world([([(0, 0), (1, 0), (1, 1)], 0.5)], sites=[("a", (1, 1))]))
    two = build_geometry(make_world([([(0, 0), (1, 0)], 0.5), ([(1, 0), (1, 1)], 0.5)], sites=[("a", (1, 1))]))
    assert two.area == pytest.approx(one.area, rel=1e-12)
    assert shapely.equals_exact(shapely.normalize(one.free), shapely.normalize(two.free), 1e-9)


@pytest.mark.parametrize("s,c,w", [(1.5, 1.0, 0.5), (1.0, 2.0, 0.3)])
def test_t_junction_area_and_walls(s, c, w):
    """T: (s + w) w + (2c + w) w - w^2 and 8 walls."""
    g = build_geometry(make_world([([(0, 0), (0, s)], w), ([(-c, s), (c, s)], w)],
                                  sites=[("a", (-c, s)), ("b", (c, s))]))
    assert g.area == pytest.approx((s + w) * w + (2 * c + w) * w - w * w, rel=1e-12)
    assert len(g.walls) == 8


def test_obstacle_cuts_a_hole():
    """An obstacle inside a corridor removes its area and adds a ring of 4 walls."""
    obstacle = [[0.9, -0.1], [1.1, -0.1], [1.1, 0.1], [0.9, 0.1]]
    g = build_geometry(make_world([([(0, 0), (2, 0)], 1.0)], sites=[("a", (2, 0))],
                                  obstacles=[{"polygon": obstacle}]))
    assert g.area == pytest.approx(3.0 * 1.0 - 0.2 * 0.2, rel=1e-12)
    assert len(g.walls) == 8


def test_erosion_of_straight_corridor():
    """reachable_space(r) of a straight corridor is the (l + w - 2r) x (w - 2r) rectangle."""
    l, w, r = 2.0, 0.5, 0.1
    g = build_geometry(make_world([([(0, 0), (l, 0)], w)], sites=[("a", (l, 0))]))
    assert g.reachable_space(r).area == pytest.approx((l + w - 2 * r) * (w - 2 * r), rel=1e-9)


def _narrow_world(passage_width, radius=0.1):
    """Wide corridor, a narrow passage, then a wide room holding the site."""
    return make_world(
        [([(0, 0), (1, 0)], 0.6), ([(1, 0), (2, 0)], passage_width), ([(2, 0), (3, 0)], 0.6)],
        sites=[("far", (3, 0))], radius=radius,
    )


def test_corridor_narrower_than_robot_fails_clearance():
    """A passage narrower than the robot's diameter makes the site unreachable."""
    spec = _narrow_world(0.18)
    assert "site-unreachable" in codes(lint(spec, build_geometry(spec)))


def test_clearance_margin_applies():
    """A passage wider than the diameter but within the margin still fails; beyond it passes."""
    d = 0.2
    tight = _narrow_world(d + CLEARANCE_MARGIN)
    roomy = _narrow_world(d + 3 * CLEARANCE_MARGIN)
    assert "site-unreachable" in codes(lint(tight, build_geometry(tight)))
    assert "site-unreachable" not in codes(lint(roomy, build_geometry(roomy)))


def test_widest_robot_is_the_narrowest_passage():
    """Bisection finds the widest disc passing a straight passage: its width (plane geometry)."""
    spec = _narrow_world(0.3)
    assert widest_robot_diameter(build_geometry(spec), spec) == pytest.approx(0.3, abs=3e-4)


def test_site_outside_free_space_is_reported():
    """A site off the corridors is an error at its JSON path."""
    spec = make_world([([(0, 0), (2, 0)], 0.5)], sites=[("in", (2, 0)), ("out", (1, 2))])
    found = [f for f in lint(spec, build_geometry(spec)) if f.code == "site-outside"]
    assert [f.where for f in found] == ["$.sites[1].position"]


def test_home_in_wall_and_overlaps():
    """Home outside the floor, and sites overlapping each other or home, are errors."""
    spec = make_world([([(0, 0), (2, 0)], 0.5)], home=(0, 3), sites=[("a", (2, 0))])
    assert "home-outside" in codes(lint(spec, build_geometry(spec)))
    spec = make_world([([(0, 0), (2, 0)], 0.5)], sites=[("a", (0.15, 0)), ("b", (1.9, 0)), ("c", (2.0, 0))])
    found = codes(lint(spec, build_geometry(spec)))
    assert {"site-home-overlap", "site-overlap"} <= found


def test_relocation_after_last_trial_is_an_error():
    """after_trial must leave a trial to relocate into: after_trial >= trials is refused."""
    spec = make_world([([(0, 0), (2, 0)], 0.5)], sites=[("a", (2, 0))], trials=10,
                      relocations=[{"action": "set", "values": {"a": 0.0}, "after_trial": 10}])
    found = [f for f in lint(spec, build_geometry(spec)) if f.code == "relocation-late"]
    assert [f.where for f in found] == ["$.task.relocations[0].after_trial"]


def test_value_schedule_swap_and_set():
    """A two-site swap exchanges values; a set assigns them; events apply in trial order."""
    spec = make_world([([(0, 0), (2, 0)], 0.5)], sites=[("a", (2, 0)), ("b", (1, 0))], trials=100,
                      values={"a": 1.0, "b": 0.0}, relocations=[{"action": "set", "values": {"a": 0.5}, "after_trial": 60},
                                   {"action": "swap", "sites": ["a", "b"], "window": [20, 40]}])
    tables = value_schedule(spec.task)
    assert tables == [{"a": 1.0, "b": 0.0}, {"a": 0.0, "b": 1.0}, {"a": 0.5, "b": 1.0}]


def test_warnings_for_robot_and_markers():
    """Wide wheel base, duplicate ray directions, far range and a stray marker warn."""
    spec = make_world(
        [([(0, 0), (2, 0)], 0.5)], sites=[("a", (2, 0))],
        robot={"radius": 0.1, "wheel_base": 0.3,
               "range_finders": {"angles_deg": [-180, 0, 180], "max_range": 50.0}},
        markers=[{"name": "nowhere", "position": [10, 10], "radius": 0.2}],
    )
    found = codes(lint(spec, build_geometry(spec)), "warning")
    assert {"wheel-base", "range-duplicate", "range-long", "marker-outside"} <= found


def test_units_errors():
    """A corridor wider than 20 m and a robot wider than the corridor are unit errors."""
    spec = make_world([([(0, 0), (100, 0)], 25.0)], sites=[("a", (100, 0))])
    assert "units-width" in codes(lint(spec, build_geometry(spec)))
    spec = make_world([([(0, 0), (2, 0)], 0.5)], sites=[("a", (2, 0))], radius=0.6)
    assert "units-radius" in codes(lint(spec, build_geometry(spec)))


def test_summary_facts():
    """The summary reports area, corridor count, narrowest width and site values."""
    spec = make_world([([(0, 0), (0, 1.5)], 0.5), ([(-1, 1.5), (1, 1.5)], 0.4)],
                      sites=[("w", (-1, 1.5)), ("e", (1, 1.5))])
    s = summarize(spec, build_geometry(spec))
    assert s["area_m2"] == pytest.approx((1.5 + 0.5) * 0.5 + (2 + 0.4) * 0.4 - 0.5 * 0.4, rel=1e-9)
    assert s["corridors"] == 2 and s["narrowest_corridor_m"] == 0.4
    assert s["widest_robot_diameter_m"] == pytest.approx(0.4, abs=3e-4)
    assert [x["name"] for x in s["sites"]] == ["w", "e"]


def test_rays_in_a_corridor_match_shapely():
    """Preview rays end where shapely finds the first wall along each ray."""
    from neurodrome.view.scene import cast_rays

    spec = make_world([([(0, 0), (3, 0)], 0.6)], sites=[("a", (3, 0))])
    g = build_geometry(spec)
    pose, r, max_range = (0.5, 0.05, 20.0), 0.1, 5.0
    angles = [-90, -45, 0, 30, 90, 180]
    ends = cast_rays(g, pose, r, angles, max_range)
    for a, end in zip(angles, ends):
        h = math.radians(pose[2] + a)
        start = (pose[0] + r * math.cos(h), pose[1] + r * math.sin(h))
        ray = LineString([start, (start[0] + max_range * math.cos(h), start[1] + max_range * math.sin(h))])
        hit = ray.intersection(g.free.boundary)
        want = min(shapely.get_parts(hit), key=lambda p: shapely.distance(p, shapely.Point(start)))
        assert math.dist(end, (want.x, want.y)) < 1e-9


def test_obstacle_warnings():
    """An obstacle with no area, or away from every corridor, warns that it cuts nothing."""
    spec = make_world([([(0, 0), (2, 0)], 0.5)], sites=[("a", (2, 0))],
                      obstacles=[{"polygon": [[0, 0], [1, 0], [2, 0]]},
                                 {"polygon": [[5, 5], [6, 5], [6, 6]]}])
    found = [(f.code, f.where) for f in lint(spec, build_geometry(spec)) if f.level == "warning"]
    assert ("obstacle-empty", "$.obstacles[0].polygon") in found and ("obstacle-outside", "$.obstacles[1]") in found


def test_corridor_doubling_back_keeps_its_floor():
    """A centre line that reverses onto itself covers the straight corridor's floor,
    (l + w) * w with square caps (hand computation), not a degenerate sliver."""
    from neurodrome.world.geometry import corridor_polygon

    assert corridor_polygon([(0.0, 0.0), (0.0, 0.5), (0.0, 1.0), (0.0, 0.0)], 1.0).area == pytest.approx(2.0)
    # a hairpin of two 2 m legs 0.6 m apart, width 0.5: two (2 + 0.5) x 0.5 floors overlapping
    # in a strip; computed by shapely as the union of the two capped legs
    legs = corridor_polygon([(0.0, 0.0), (2.0, 0.0)], 0.5).union(corridor_polygon([(2.0, 0.0), (2.0, 0.6)], 0.5)).union(corridor_polygon([(2.0, 0.6), (0.0, 0.6)], 0.5))
    assert corridor_polygon([(0.0, 0.0), (2.0, 0.0), (2.0, 0.6), (0.0, 0.6)], 0.5).area == pytest.approx(legs.area)
