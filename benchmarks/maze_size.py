"""Range-finder cost per ray cast against maze size: the 12-wall clinic junction against a
curved maze of about 1000 walls, before and after the cell-walk grid.

Usage:  python benchmarks/maze_size.py [--robots 1000] [--rounds 40] [--points 500]

The big maze is a corridor 0.5 m wide following an Archimedean spiral (4 turns, radius
0.8 m growing 1 m per turn) sampled at ``--points`` points (500 give 1000 walls), built
as a world dict from the junction template and through ``build_geometry``, so its walls
are exactly what the simulator would use. Poses are uniform in each world's free space
eroded by the robot radius, headings uniform; rays are the world's 8 range finders, of
length radius + max range. "before" is a copy of the previous kernel and grid (labelled
below, kept here only for this comparison), "after" is ``neurodrome.sim.sensors.cast_rays``
and "called" is ``cast_one`` called (not inlined) once per ray from another compiled
kernel. All three are checked to give bit-identical distances before they are timed.
Figures are printed, never asserted.
"""

from __future__ import annotations

import argparse
import math
import time
from pathlib import Path

import numpy as np
import shapely
from numba import njit
from shapely.geometry import LineString, box

from neurodrome.sim.sensors import WallGrid, cast_one, cast_rays
from neurodrome.world import build_geometry, load_world, world_from_data
from neurodrome.world.templates import make

ROOT = Path(__file__).resolve().parent.parent


def spiral_maze(points: int = 500):
    """The ``spiral`` template: one corridor along an Archimedean spiral of ``points``
    points (about 2 * points walls)."""
    return world_from_data(make("spiral", points=points), "<spiral maze>")


def random_poses(geometry, n, rng, margin):
    region = geometry.free.buffer(-margin)
    x0, y0, x1, y1 = region.bounds
    pts = []
    while len(pts) < n:
        x, y = rng.uniform(x0, x1, 4 * n), rng.uniform(y0, y1, 4 * n)
        inside = shapely.contains_xy(region, x, y)
        pts.extend(zip(x[inside], y[inside]))
    return np.array(pts[:n]), rng.uniform(-math.pi, math.pi, n)


# ---- BEFORE: a copy of the previous grid and kernel, for the side-by-side figure only ----
class OldWallGrid:
    """The previous WallGrid: cell side = reach, each cell lists every wall within one
    reach of the cell, padded with a degenerate wall that never reports a hit."""

    def __init__(self, walls, reach, cell=None):
        walls = np.asarray(walls, dtype=np.float64).reshape(-1, 4)
        self.reach = float(reach)
        xs = np.concatenate([walls[:, 0], walls[:, 2]])
        ys = np.concatenate([walls[:, 1], walls[:, 3]])
        pad = self.reach + 1.0
        self.x0, self.y0 = float(xs.min() - pad), float(ys.min() - pad)
        width, height = float(xs.max() + pad) - self.x0, float(ys.max() + pad) - self.y0
        self.cell = float(cell) if cell else max(self.reach, 0.25)
        self.nx = max(1, int(np.ceil(width / self.cell)))
        self.ny = max(1, int(np.ceil(height / self.cell)))
        lines = shapely.STRtree([LineString([(w[0], w[1]), (w[2], w[3])]) for w in walls])
        buckets = []
        for j in range(self.ny):
            for i in range(self.nx):
                x, y = self.x0 + i * self.cell, self.y0 + j * self.cell
                area = box(x, y, x + self.cell, y + self.cell).buffer(self.reach, join_style="mitre")
                buckets.append(np.sort(lines.query(area, predicate="intersects")))
        k = max(1, max(len(b) for b in buckets))
        self.candidates = np.full((len(buckets), k), len(walls), dtype=np.intp)
        for c, b in enumerate(buckets):
            self.candidates[c, : len(b)] = b
        self.walls = np.vstack([walls, np.array([[1e9, 1e9, 1e9, 1e9]])])
        self.start = self.walls[:, 0:2]
        self.edge = self.walls[:, 2:4] - self.walls[:, 0:2]

    def cells_of(self, points):
        i = np.clip(((points[:, 0] - self.x0) // self.cell).astype(np.intp), 0, self.nx - 1)
        j = np.clip(((points[:, 1] - self.y0) // self.cell).astype(np.intp), 0, self.ny - 1)
        return j * self.nx + i


def old_cast_rays(grid, origins, headings, ray_angles, length):
    out = np.empty((len(origins), len(ray_angles)))
    _old_cast_kernel(origins, headings, ray_angles, grid.candidates, grid.cells_of(origins), grid.start, grid.edge, float(length), out)
    return out


@njit(cache=True, nogil=True)
def _old_cast_kernel(origins, headings, ray_angles, candidates, cells, start, edge, length, out):
    n, r = origins.shape[0], ray_angles.shape[0]
    k = candidates.shape[1]
    for i in range(n):
        px = origins[i, 0]
        py = origins[i, 1]
        row = candidates[cells[i]]
        for j in range(r):
            theta = headings[i] + ray_angles[j]
            dx = np.cos(theta)
            dy = np.sin(theta)
            best = np.inf
            for m in range(k):
                w = row[m]
                ex = edge[w, 0]
                ey = edge[w, 1]
                denom = dx * ey - dy * ex
                if denom == 0.0:
                    continue
                apx = start[w, 0] - px
                apy = start[w, 1] - py
                t = (apx * ey - apy * ex) / denom
                u = (apx * dy - apy * dx) / denom
                if u >= 0.0 and u <= 1.0 and t >= 0.0 and t <= length and t < best:
                    best = t
            out[i, j] = best
# ---- end of BEFORE ----


@njit(nogil=True)
def _called_per_ray(origins, headings, ray_angles, length, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge, out):
    """cast_one called (not inlined) once per ray, as another kernel would call it."""
    for i in range(origins.shape[0]):
        for j in range(ray_angles.shape[0]):
            theta = headings[i] + ray_angles[j]
            out[i, j] = cast_one(origins[i, 0], origins[i, 1], theta, length, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge)


def called_per_ray(grid, pos, ang, rays, reach):
    out = np.empty((len(pos), len(rays)))
    _called_per_ray(pos, ang, rays, float(reach), *grid.kernel_args, out)
    return out


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--robots", type=int, default=1000)
    parser.add_argument("--rounds", type=int, default=40, help="timed rounds; each figure is the fastest call")
    parser.add_argument("--points", type=int, default=500, help="points of the spiral's centre line")
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args(argv)

    worlds = [("clinic junction", load_world(ROOT / "worlds" / "clinic-junction.json")), ("spiral maze", spiral_maze(args.points))]
    rng = np.random.default_rng(args.seed)
    cases, info = {}, {}
    for label, world in worlds:
        geometry = build_geometry(world)
        robot = world.robot
        reach = robot.radius + robot.range_finders.max_range
        rays = np.radians(np.asarray(robot.range_finders.angles_deg, dtype=float))
        pos, ang = random_poses(geometry, args.robots, rng, robot.radius)
        old, new = OldWallGrid(geometry.walls, reach), WallGrid(geometry.walls, reach)
        a, b, c = old_cast_rays(old, pos, ang, rays, reach), cast_rays(new, pos, ang, rays, reach), called_per_ray(new, pos, ang, rays, reach)
        info[label] = (len(geometry.walls), old.candidates.shape[1], new, bool(np.array_equal(a, b) and np.array_equal(b, c)))
        for name, fn, grid in (("before", old_cast_rays, old), ("after", cast_rays, new), ("called", called_per_ray, new)):
            cases[label, name] = (lambda fn=fn, grid=grid, pos=pos, ang=ang, rays=rays, reach=reach: fn(grid, pos, ang, rays, reach))
    best = dict.fromkeys(cases, math.inf)
    for _ in range(args.rounds):  # interleaved, so a burst of other load hits every case alike
        for key, run in cases.items():
            t0 = time.perf_counter()
            run()
            best[key] = min(best[key], time.perf_counter() - t0)
    ns = {key: 1e9 * t / (args.robots * 8) for key, t in best.items()}

    print(f"{args.robots} robots x 8 rays at random free-space poses; ns per ray cast, fastest of {args.rounds} interleaved rounds")
    print("before: previous grid and kernel (copy above); after: cast_rays; called: cast_one called per ray from another kernel")
    print(f"{'world':<16} {'walls':>6} {'old K':>6} {'new grid':>16} {'walls/cell':>11} {'before':>8} {'after':>8} {'called':>8} {'identical':>10}")
    for label, _ in worlds:
        w, k, new, same = info[label]
        per_cell = np.diff(new.cell_start)
        grid = f"{new.nx}x{new.ny} @{new.cell:.3f}"
        occupied = f"{per_cell[per_cell > 0].mean():.1f} / {per_cell.max()}"
        print(f"{label:<16} {w:>6} {k:>6} {grid:>16} {occupied:>11} {ns[label, 'before']:>8.1f} {ns[label, 'after']:>8.1f} {ns[label, 'called']:>8.1f} {str(same):>10}")
    j, m = "clinic junction", "spiral maze"
    print(f"maze / junction per ray: before {ns[m, 'before'] / ns[j, 'before']:.2f}x, after {ns[m, 'after'] / ns[j, 'after']:.2f}x "
          f"(after maze / before junction {ns[m, 'after'] / ns[j, 'before']:.2f}x)")
    print(f"after / before: junction {ns[j, 'after'] / ns[j, 'before']:.2f}x, maze {ns[m, 'after'] / ns[m, 'before']:.2f}x")


if __name__ == "__main__":
    main()
