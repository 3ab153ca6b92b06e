"""Range finders against pymunk's own ray query and shapely, zone signals, noise."""

from __future__ import annotations

import math

import numpy as np
import pymunk
import pytest
import shapely
from shapely.geometry import LineString, Point

from neurodrome.control.protocol import Layout
from neurodrome.sim.arena import WALL_CATEGORY
from neurodrome.sim.batch import Batch
from neurodrome.sim.sensors import WallGrid, cast_rays, proximity, ray_directions
from neurodrome.world import build_geometry, load_world
from sim_support import Constant, Jitterbug, bundled_world_paths, template_world

WORLDS = bundled_world_paths()


def random_poses(geometry, n, rng, margin):
    """Uniform random points in the free space eroded by ``margin``, random headings."""
    region = geometry.free.buffer(-margin)
    x0, y0, x1, y1 = region.bounds
    pts = []
    while len(pts) < n:
        x, y = rng.uniform(x0, x1), rng.uniform(y0, y1)
        if region.contains(Point(x, y)):
            pts.append((x, y))
    return np.array(pts), rng.uniform(-math.pi, math.pi, n)


@pytest.mark.parametrize("path", WORLDS, ids=[p.stem for p in WORLDS])
def test_rays_match_pymunk_and_shapely(path):
    """Noise-free ray distances equal pymunk's Space.segment_query_first and shapely's
    ray/wall intersection to 1e-9 m on 200 random poses in every bundled world."""
    world = load_world(path)
    batch = Batch(world, [Jitterbug()], seed=0)
    geometry = batch.geometry
    rng = np.random.default_rng(12)
    pos, ang = random_poses(geometry, 200, rng, world.robot.radius)
    ray_angles = np.radians(world.robot.range_finders.angles_deg)
    reach = batch.reach
    dirs = ray_directions(ang, ray_angles)
    got = cast_rays(batch.grid, pos, ang, ray_angles, reach)

    space, origin = batch.arena.space, batch.arena.origins[0]
    only_walls = pymunk.ShapeFilter(mask=WALL_CATEGORY)
    walls = geometry.wall_lines
    for i in range(len(pos)):
        for j in range(len(ray_angles)):
            start = pos[i]
            end = start + reach * dirs[i, j]
            hit = space.segment_query_first(tuple(origin + start), tuple(origin + end), 0.0, only_walls)
            ref_pymunk = hit.alpha * reach if hit is not None else math.inf
            crossing = LineString([tuple(start), tuple(end)]).intersection(walls)
            if crossing.is_empty:
                ref_shapely = math.inf
            else:
                ref_shapely = min(Point(start).distance(g) for g in getattr(crossing, "geoms", [crossing]))
            for ref in (ref_pymunk, ref_shapely):
                if math.isinf(ref):
                    assert math.isinf(got[i, j])
                else:
                    assert abs(got[i, j] - ref) < 1e-9


def test_wall_grid_keeps_every_reachable_wall():
    """The grid's candidate list of a cell holds every wall within one ray length of any
    point of the cell (checked against shapely distances)."""
    world = template_world("double-junction")
    walls = build_geometry(world).walls
    grid = WallGrid(walls, reach=0.7, cell=0.5)
    rng = np.random.default_rng(3)
    pts = np.column_stack([rng.uniform(-1.3, 1.3, 300), rng.uniform(-0.3, 2.6, 300)])
    cells = grid.cells_of(pts)
    for p, c in zip(pts, cells):
        near = {k for k, w in enumerate(walls) if LineString([w[:2], w[2:]]).distance(Point(p)) <= 0.7}
        assert near <= set(grid.candidates[c].tolist())


def test_proximity_reading_convention():
    """Proximity is 1 - d/range with d from the body surface, 0 when nothing is in range
    (REFERENCES.md section 4, common practice)."""
    d = np.array([0.1, 0.6, 1.1, np.inf, 0.05])
    got = proximity(d, body_radius=0.1, max_range=1.0)
    assert got.tolist() == pytest.approx([1.0, 0.5, 0.0, 0.0, 1.0])


def test_zone_signals_follow_the_robot():
    """At the start the home signal is on and the junction marker off; the bias is 1;
    driving up the stem the junction signal comes on inside the marker disc."""
    world = template_world("junction", physics={"time_step_s": 0.05})
    layout = Layout.of(world)

    batch = Batch(world, [Constant(0.6, 0.6)], seed=0)
    obs = batch.obs[0]
    assert obs[layout.index("home")] == 1.0 and obs[layout.index("junction")] == 0.0
    assert obs[layout.index("bias")] == 1.0 and obs[layout.index("reward")] == 0.0
    marker = world.markers[0]
    seen = False
    for _ in range(60):
        batch.step()
        inside = math.dist(batch.positions[0], marker.position) <= marker.radius
        assert batch.obs[0, layout.index("junction")] == float(inside)
        seen |= inside
    assert seen


def test_sensor_noise_is_multiplicative_and_seeded():
    """With noise, readings are the clean reading times (1 + N(0, sigma^2)) (REFERENCES.md
    section 4): same seed same readings, other seed other readings, and the relative error
    has the requested standard deviation."""
    def run(seed, noise):
        world = template_world("junction", robot={"range_finders": {"angles_deg": [-90, -45, 0, 45, 90], "max_range": 1.0, "noise": noise}})
        batch = Batch(world, [Jitterbug(64)], seed=seed)
        return batch.obs[:, :5]

    clean = run(1, 0.0)
    a, b, c = run(1, 0.05), run(1, 0.05), run(2, 0.05)
    assert np.array_equal(a, b) and not np.array_equal(a, c)
    rel = (a[clean > 0.2] / clean[clean > 0.2]) - 1
    assert 0.035 < rel.std() < 0.065
