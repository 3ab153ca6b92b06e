"""Range finders against pymunk's own ray query and shapely, zone signals, noise."""

from __future__ import annotations

import math

import numpy as np
import pymunk
import pytest
import shapely
from numba import njit
from shapely.geometry import LineString, Point

from neurodrome.control.protocol import Layout
from neurodrome.sim.arena import WALL_CATEGORY
from neurodrome.sim.batch import Batch
from neurodrome.sim.sensors import CELL_PER_WALL_LENGTH, CELL_TOLERANCE, WallGrid, cast_one, cast_rays, proximity, ray_directions
from neurodrome.world import build_geometry, load_world, world_from_data
from neurodrome.world.templates import make
from sim_support import WORLDS_DIR, Constant, Jitterbug, bundled_world_paths, template_world

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


def test_wall_grid_lists_every_wall_touching_each_cell():
    """Each cell lists exactly the walls that touch its box grown by the tolerance
    (checked against shapely's intersection test)."""
    world = template_world("double-junction")
    walls = build_geometry(world).walls
    grid = WallGrid(walls, reach=0.7, cell=0.5)
    for c in range(grid.nx * grid.ny):
        i, j = c % grid.nx, c // grid.nx
        x, y = grid.x0 + i * grid.cell, grid.y0 + j * grid.cell
        cell = shapely.box(x - CELL_TOLERANCE, y - CELL_TOLERANCE, x + grid.cell + CELL_TOLERANCE, y + grid.cell + CELL_TOLERANCE)
        touching = {k for k, w in enumerate(walls) if LineString([w[:2], w[2:]]).intersects(cell)}
        assert set(grid.walls_in(c).tolist()) == touching


def test_proximity_reading_convention():
    """Proximity is 1 - d/range with d from the body surface, 0 when nothing is in range
    (common practice)."""
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
    """With noise, readings are the clean reading times (1 + N(0, sigma^2)) (common
    practice): same seed same readings, other seed other readings, and the relative error
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


# ---- the cell walk: bit-identity with every wall, pymunk, shapely, edge cases ----------


def every_wall(walls, origins, headings, ray_angles, length):
    """Reference: the range-finder formula applied to every wall, in plain numpy (the
    formula of the compiled kernel, same operations in the same order): d = (cos, sin)
    (heading + ray angle), e = wall end - start, ap = start - origin, denom = d x e,
    t = (ap x e) / denom, u = (ap x d) / denom; a wall is hit where denom != 0,
    0 <= u <= 1 and 0 <= t <= length; the reading is the smallest such t, inf if none."""
    walls = np.asarray(walls, dtype=float).reshape(-1, 4)
    sx, sy = walls[:, 0], walls[:, 1]
    ex, ey = walls[:, 2] - walls[:, 0], walls[:, 3] - walls[:, 1]
    out = np.full((len(origins), len(ray_angles)), math.inf)
    for i in range(len(origins)):
        px, py = origins[i, 0], origins[i, 1]
        apx, apy = sx - px, sy - py
        for j in range(len(ray_angles)):
            theta = headings[i] + ray_angles[j]
            dx, dy = math.cos(theta), math.sin(theta)
            denom = dx * ey - dy * ex
            with np.errstate(divide="ignore", invalid="ignore"):
                t = (apx * ey - apy * ex) / denom
                u = (apx * dy - apy * dx) / denom
            hit = (denom != 0.0) & (u >= 0.0) & (u <= 1.0) & (t >= 0.0) & (t <= length)
            if hit.any():
                out[i, j] = t[hit].min()
    return out


def spiral_world():
    """A maze of about 1000 walls: the ``spiral`` template, one corridor 0.5 m wide along an
    Archimedean spiral sampled at 500 points."""
    return world_from_data(make("spiral"), "<spiral maze>")


@pytest.fixture(scope="module")
def maze():
    world = spiral_world()
    geometry = build_geometry(world)
    reach = world.robot.radius + world.robot.range_finders.max_range
    return world, geometry, WallGrid(geometry.walls, reach), reach


def anywhere(bounds, n, rng, pad):
    """Uniform origins over the bounding box grown by ``pad`` (inside walls, outside the
    free space and outside the grid included)."""
    x0, y0, x1, y1 = bounds
    return np.column_stack([rng.uniform(x0 - pad, x1 + pad, n), rng.uniform(y0 - pad, y1 + pad, n)])


def assert_same(grid, walls, origins, headings, ray_angles, length):
    got = cast_rays(grid, origins, headings, ray_angles, length)
    want = every_wall(walls, origins, headings, ray_angles, length)
    bad = np.argwhere(got != want)
    assert not len(bad), f"{len(bad)} rays differ, first {bad[0]}: {got[tuple(bad[0])]!r} vs {want[tuple(bad[0])]!r}"
    return got


@pytest.mark.parametrize("path", WORLDS, ids=[p.stem for p in WORLDS])
def test_rays_bit_identical_to_every_wall_in_bundled_worlds(path):
    """In every bundled world the cell walk gives exactly (==) the reading of the formula
    over every wall (reference: every_wall above), on 200 random free-space poses and on
    100 origins anywhere around the walls, for the sensor reach and for 3x longer rays."""
    world = load_world(path)
    geometry = build_geometry(world)
    reach = world.robot.radius + world.robot.range_finders.max_range
    grid = WallGrid(geometry.walls, reach)
    rng = np.random.default_rng(21)
    pos, ang = random_poses(geometry, 200, rng, world.robot.radius)
    rays = np.radians(world.robot.range_finders.angles_deg)
    got = assert_same(grid, geometry.walls, pos, ang, rays, reach)
    assert np.isfinite(got).mean() > 0.5
    far = anywhere(geometry.bounds, 100, rng, 1.5)
    assert_same(grid, geometry.walls, far, rng.uniform(-math.pi, math.pi, 100), rays, reach)
    assert_same(grid, geometry.walls, far, rng.uniform(-math.pi, math.pi, 100), rays, 3 * reach)


def test_rays_bit_identical_to_every_wall_on_a_1000_wall_maze(maze):
    """On the spiral maze (about 1000 walls, a grid of thousands of short cell lists) the
    cell walk equals the formula over every wall (reference: every_wall) on 300 random
    free-space poses and 200 origins anywhere around it."""
    world, geometry, grid, reach = maze
    assert 900 <= len(geometry.walls) <= 1100
    assert grid.nx * grid.ny > 1000 and np.diff(grid.cell_start).max() < 20
    rng = np.random.default_rng(5)
    rays = np.radians(world.robot.range_finders.angles_deg)
    pos, ang = random_poses(geometry, 300, rng, world.robot.radius)
    assert_same(grid, geometry.walls, pos, ang, rays, reach)
    far = anywhere(geometry.bounds, 200, rng, 2.0)
    assert_same(grid, geometry.walls, far, rng.uniform(-math.pi, math.pi, 200), rays, 2 * reach)


def near_walls(walls, n, rng, offset):
    """Origins within ``offset`` of random points of random walls, on either side."""
    w = walls[rng.integers(0, len(walls), n)]
    e = w[:, 2:] - w[:, :2]
    normal = np.column_stack([-e[:, 1], e[:, 0]]) / np.hypot(e[:, 0], e[:, 1])[:, None]
    return w[:, :2] + rng.uniform(0, 1, n)[:, None] * e + rng.uniform(-offset, offset, n)[:, None] * normal


@pytest.mark.parametrize("cell", [0.04, 0.3, 1.1])
def test_rays_bit_identical_on_the_maze_whatever_the_cell_side(cell, maze):
    """With cells much smaller and larger than the walls, origins close to walls (hits in
    the origin's own cell and its neighbours) give exactly the reading of the formula over
    every wall (every_wall)."""
    world, geometry, _, reach = maze
    grid = WallGrid(geometry.walls, reach, cell=cell)
    rng = np.random.default_rng(int(cell * 100))
    rays = np.radians(world.robot.range_finders.angles_deg)
    origins = near_walls(geometry.walls, 300, rng, 0.06)
    assert_same(grid, geometry.walls, origins, rng.uniform(-math.pi, math.pi, 300), rays, reach)


def test_walk_does_not_stop_at_a_far_hit_from_the_current_cell():
    """A wall listed in the current cell but hit beyond that cell's exit must not end the
    walk: a nearer wall lying wholly in the next cell is the reading (formula: every_wall).
    Cells of 1 m from (-0.001, -0.001); the ray runs east from (0.5, 1). The slanted wall
    touches the ray's first cell (at x = 0.9) and crosses the ray at x = 1.54, past that
    cell's exit at x = 0.999; the short wall at x = 1.3 lies in the next cell only."""
    walls = np.array([[0.9, 1.8, 1.7, 0.8], [1.3, 0.9, 1.3, 1.1], [0.0, 0.0, 0.0, 0.5]])
    grid = WallGrid(walls, 3.0, cell=1.0)
    first = grid.nx * 1 + 0
    assert grid.x0 == -0.001 and 0 in grid.walls_in(first) and 1 not in grid.walls_in(first)
    got = assert_same(grid, walls, np.array([[0.5, 1.0]]), np.zeros(1), np.array([0.0]), 3.0)
    assert got[0, 0] == pytest.approx(0.8)


def test_rays_match_pymunk_and_shapely_on_a_1000_wall_maze(maze):
    """On the spiral maze the readings equal pymunk's Space.segment_query_first (static
    segments of radius 0) and shapely's ray/wall intersection to 1e-9 m, on 150 random
    free-space poses x 8 rays."""
    world, geometry, grid, reach = maze
    rng = np.random.default_rng(8)
    rays = np.radians(world.robot.range_finders.angles_deg)
    pos, ang = random_poses(geometry, 150, rng, world.robot.radius)
    got = cast_rays(grid, pos, ang, rays, reach)
    dirs = ray_directions(ang, rays)

    space = pymunk.Space()
    space.add(*[pymunk.Segment(space.static_body, (w[0], w[1]), (w[2], w[3]), 0.0) for w in geometry.walls])
    lines = [LineString([(w[0], w[1]), (w[2], w[3])]) for w in geometry.walls]
    tree = shapely.STRtree(lines)
    for i in range(len(pos)):
        for j in range(len(rays)):
            start, end = pos[i], pos[i] + reach * dirs[i, j]
            hit = space.segment_query_first(tuple(start), tuple(end), 0.0, pymunk.ShapeFilter())
            ref_pymunk = hit.alpha * reach if hit is not None else math.inf
            ray = LineString([tuple(start), tuple(end)])
            crossings = [ray.intersection(lines[k]) for k in tree.query(ray, predicate="intersects")]
            ref_shapely = min((Point(start).distance(g) for g in crossings), default=math.inf)
            for ref in (ref_pymunk, ref_shapely):
                if math.isinf(ref):
                    assert math.isinf(got[i, j])
                else:
                    assert abs(got[i, j] - ref) < 1e-9


def test_rays_from_cell_boundaries_and_parallel_to_grid_lines(maze):
    """Origins exactly on cell corners and on cell sides, rays along the grid lines
    (heading 0 and -0.0 give a direction with dy == 0 exactly; pi/2, pi and -pi/2 are
    parallel to 1e-16) and diagonal: equal to the formula over every wall (every_wall)."""
    world, geometry, grid, reach = maze
    assert math.sin(0.0) == 0.0 and math.sin(-0.0) == 0.0
    rng = np.random.default_rng(2)
    i = rng.integers(0, grid.nx + 1, 60)
    j = rng.integers(0, grid.ny + 1, 60)
    corners = np.column_stack([grid.x0 + i * grid.cell, grid.y0 + j * grid.cell])
    sides = np.vstack([corners + [0.5 * grid.cell, 0.0], corners + [0.0, 0.37 * grid.cell]])
    origins = np.vstack([corners, sides])
    headings = np.zeros(len(origins))
    rays = np.array([0.0, -0.0, math.pi / 2, math.pi, -math.pi / 2, math.pi / 4, 3 * math.pi / 4, -math.pi / 4, 1e-17])
    for length in (reach, 4 * reach, math.inf):
        assert_same(grid, geometry.walls, origins, headings, rays, length)


@pytest.mark.parametrize("kind", ["junction", "maze"])
def test_rays_along_walls(kind, maze):
    """Rays that start on a wall (at either end or in the middle) and run along it, both
    ways, and rays along a wall's line from 0.05 to 0.9 m before its start: equal to the
    formula over every wall (every_wall). The formula skips a wall exactly parallel to the
    ray (axis-parallel walls); for a slanted one it divides two rounding errors."""
    if kind == "maze":
        _, geometry, grid, reach = maze
    else:
        world = load_world(WORLDS_DIR / "clinic-junction.json")
        geometry = build_geometry(world)
        reach = world.robot.radius + world.robot.range_finders.max_range
        grid = WallGrid(geometry.walls, reach)
    walls = geometry.walls[:: max(1, len(geometry.walls) // 60)]
    start, edge = walls[:, :2], walls[:, 2:] - walls[:, :2]
    along = np.arctan2(edge[:, 1], edge[:, 0])
    origins = np.vstack([start, walls[:, 2:], start + 0.5 * edge])
    headings = np.concatenate([along, along, along])
    rays = np.array([0.0, math.pi])
    assert_same(grid, geometry.walls, origins, headings, rays, reach)
    unit = edge / np.hypot(edge[:, 0], edge[:, 1])[:, None]
    for back in (0.05, 0.3, 0.9):  # before the start, on the wall's own line, heading along it
        assert_same(grid, geometry.walls, start - back * unit, along, np.array([0.0]), reach)


def test_origins_outside_the_grid(maze):
    """Origins far outside the grid aimed at the maze (rays long enough to cross it, and
    unbounded), aimed away, and just outside its box; a NaN origin reads inf: all equal to
    the formula over every wall (every_wall)."""
    _, geometry, grid, _ = maze
    rng = np.random.default_rng(4)
    x0, y0, x1, y1 = geometry.bounds
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    phi = rng.uniform(-math.pi, math.pi, 80)
    origins = np.column_stack([cx + 30 * np.cos(phi), cy + 30 * np.sin(phi)])
    inward = phi + math.pi + rng.uniform(-0.15, 0.15, 80)
    rays = np.array([0.0, 0.05, -0.05, math.pi])
    for length in (45.0, math.inf, 10.0):
        assert_same(grid, geometry.walls, origins, inward, rays, length)
    gx1, gy1 = grid.x0 + grid.nx * grid.cell, grid.y0 + grid.ny * grid.cell
    near = np.array([[grid.x0 - 0.01, cy], [gx1 + 0.01, cy], [cx, grid.y0 - 1e-9], [cx, gy1 + 0.2], [grid.x0 - 0.3, grid.y0 - 0.3]])
    fan = np.linspace(-math.pi, math.pi, 33)
    assert_same(grid, geometry.walls, near, np.zeros(len(near)), fan, 3.0)
    nan = cast_rays(grid, np.array([[math.nan, 0.0], [0.0, math.inf]]), np.zeros(2), fan, 3.0)
    assert np.isinf(nan).all()


def _segment_meets_box(w, box):
    """(W,) bool: segment w (W, 4) meets the closed box (x0, y0, x1, y1); Liang-Barsky
    clipping of the segment's parameter range (a reference independent of shapely)."""
    x0, y0, x1, y1 = box
    px, py = w[:, 0], w[:, 1]
    dx, dy = w[:, 2] - w[:, 0], w[:, 3] - w[:, 1]
    lo, hi = np.zeros(len(w)), np.ones(len(w))
    ok = np.ones(len(w), dtype=bool)
    for p, q in ((-dx, px - x0), (dx, x1 - px), (-dy, py - y0), (dy, y1 - py)):
        flat = p == 0
        ok &= ~(flat & (q < 0))
        with np.errstate(divide="ignore", invalid="ignore"):
            r = q / p
        lo = np.where(~flat & (p < 0), np.maximum(lo, r), lo)
        hi = np.where(~flat & (p > 0), np.minimum(hi, r), hi)
    return ok & (lo <= hi)


def test_cell_lists_hold_the_walls_touching_each_cell(maze):
    """The flat cell lists: offsets rise from 0 to the list length; each cell lists, in
    ascending order, every wall that meets its box (Liang-Barsky clipping, independent of
    shapely) and only walls within CELL_TOLERANCE of it (shapely distance)."""
    _, geometry, grid, _ = maze
    walls = geometry.walls
    start, cw = grid.cell_start, grid.cell_walls
    assert start[0] == 0 and start[-1] == len(cw) and (np.diff(start) >= 0).all()
    assert start.dtype == np.intp and cw.dtype == np.intp
    rng = np.random.default_rng(9)
    for c in rng.choice(grid.nx * grid.ny, 600, replace=False):
        i, j = c % grid.nx, c // grid.nx
        box = (grid.x0 + i * grid.cell, grid.y0 + j * grid.cell, grid.x0 + (i + 1) * grid.cell, grid.y0 + (j + 1) * grid.cell)
        listed = grid.walls_in(c)
        assert (np.diff(listed) > 0).all()
        assert set(np.flatnonzero(_segment_meets_box(walls, box))) <= set(listed.tolist())
        cell_box = shapely.box(*box)
        for k in listed:
            assert LineString([walls[k, :2], walls[k, 2:]]).distance(cell_box) <= CELL_TOLERANCE * (1 + 1e-9)


def test_grid_size_comes_from_the_walls_and_stays_bounded(maze):
    """The cell side follows the walls (CELL_PER_WALL_LENGTH times the median wall length
    in the maze, far below the sensor reach), the number of cells stays within max(256, 8 W) even for two
    tiny walls 100 m apart, a given cell side is kept, and an empty wall set reads inf."""
    _, geometry, grid, reach = maze
    lengths = np.hypot(*(geometry.walls[:, 2:] - geometry.walls[:, :2]).T)
    assert grid.cell == pytest.approx(CELL_PER_WALL_LENGTH * np.median(lengths)) and grid.cell < reach / 4
    assert grid.nx * grid.ny <= 8 * len(geometry.walls)
    sparse = WallGrid(np.array([[0.0, 0.0, 0.01, 0.0], [100.0, 100.0, 100.0, 100.01]]), 1.1)
    assert sparse.nx * sparse.ny <= 256
    assert_same(sparse, sparse.walls, np.array([[0.005, -0.5], [100.0, 99.0], [50.0, 50.0]]), np.full(3, math.pi / 2), np.array([0.0, 0.1]), 2.0)
    assert WallGrid(geometry.walls, reach, cell=0.5).cell == 0.5
    empty = WallGrid(np.zeros((0, 4)), 1.0)
    assert np.isinf(cast_rays(empty, np.zeros((3, 2)), np.zeros(3), np.array([0.0, 1.0]), 1.0)).all()


@njit(cache=False)
def _fan_from_another_kernel(origins, headings, ray_angles, length, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge):
    out = np.empty((origins.shape[0], ray_angles.shape[0]))
    for i in range(origins.shape[0]):
        for j in range(ray_angles.shape[0]):
            theta = headings[i] + ray_angles[j]
            out[i, j] = cast_one(origins[i, 0], origins[i, 1], theta, length, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge)
    return out


def test_cast_one_is_callable_from_another_kernel(maze):
    """WallGrid.kernel_args has the stated types (floats, ints, contiguous intp offsets and
    indices, contiguous float64 (W, 2) starts and edges); cast_one called from another
    compiled kernel, and from Python, gives the same bits as cast_rays."""
    world, geometry, grid, reach = maze
    args = grid.kernel_args
    gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge = args
    assert all(type(v) is float for v in (gx0, gy0, gcell)) and all(type(v) is int for v in (gnx, gny))
    assert cell_start.dtype == np.intp and cell_walls.dtype == np.intp and len(cell_start) == gnx * gny + 1
    w = len(geometry.walls)
    assert start.shape == edge.shape == (w, 2) and start.dtype == edge.dtype == np.float64
    assert all(a.flags.c_contiguous for a in (cell_start, cell_walls, start, edge))
    assert np.array_equal(start, geometry.walls[:, :2]) and np.array_equal(edge, geometry.walls[:, 2:] - geometry.walls[:, :2])
    rng = np.random.default_rng(6)
    pos, ang = random_poses(geometry, 50, rng, world.robot.radius)
    rays = np.radians(world.robot.range_finders.angles_deg)
    want = cast_rays(grid, pos, ang, rays, reach)
    assert np.array_equal(_fan_from_another_kernel(pos, ang, rays, reach, *args), want)
    assert cast_one(pos[0, 0], pos[0, 1], ang[0] + rays[0], reach, *args) == want[0, 0]
