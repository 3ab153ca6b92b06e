"""Vectorised range finders and zone signals.

Walls are static, so range finders are ray/segment intersections in world-file
coordinates. The walls are bucketed in a uniform grid sized from the walls themselves
(cell side 1.5 times the median wall length, bounded so the grid stays small); each cell lists
the walls that touch it, and a ray walks the cells it crosses in order, stopping as soon
as its nearest hit so far lies no farther than where it leaves the current cell. Its cost
therefore depends on the walls near the ray, not on the size of the maze. Results agree
with pymunk's ``Space.segment_query_first`` and with shapely, and are bit-identical to
testing every wall with the same formula (see the tests). The ray cast is one small
compiled kernel (numba), :func:`cast_one`, which other compiled kernels may call.
"""

from __future__ import annotations


import numpy as np
import shapely
from numba import njit

from ..world.spec import WorldSpec

#: Each cell lists the walls that touch its box grown by this much on every side
#: (metres). It absorbs the rounding of the cell walk and of the hit formula (both of the
#: order of 1e-16 times the coordinates), so coordinates up to about 1e6 m are safe.
CELL_TOLERANCE = 1e-6
#: The grid extends this far (metres) beyond the walls' bounding box on every side.
GRID_MARGIN = 1e-3
#: Cell side as a multiple of the median wall length, before the bounds below.
CELL_PER_WALL_LENGTH = 1.5
#: The grid holds at most max(MIN_CELL_CAP, CELLS_PER_WALL * walls) cells.
CELLS_PER_WALL = 8
MIN_CELL_CAP = 256


class WallGrid:
    """Walls bucketed in a uniform grid, stored flat (compressed sparse rows).

    Cell (i, j), 0 <= i < nx, 0 <= j < ny, is the box [x0 + i cell, x0 + (i + 1) cell] x
    [y0 + j cell, y0 + (j + 1) cell] and has index c = j nx + i; its walls are
    ``cell_walls[cell_start[c]:cell_start[c + 1]]`` (ascending wall indices), every wall
    that touches the box grown by ``grow`` (default ``CELL_TOLERANCE``; the contact test
    grows it by the robot radius, so a cell lists every wall a robot centred in it can touch). ``start`` (W, 2) and ``edge`` (W, 2)
    are each wall's first end point and its vector to the second.

    The cell side is ``cell`` when given, otherwise ``CELL_PER_WALL_LENGTH`` times the
    median wall length, at most ``reach`` (the longest ray) and at least what keeps the
    grid within ``max(MIN_CELL_CAP, CELLS_PER_WALL * W)`` cells. ``reach`` no longer
    shapes the grid otherwise; it is kept for callers.
    """

    def __init__(self, walls: np.ndarray, reach: float, cell: float | None = None, grow: float = CELL_TOLERANCE) -> None:
        walls = np.ascontiguousarray(np.asarray(walls, dtype=np.float64).reshape(-1, 4))
        self.reach = float(reach)
        self.grow = float(grow)
        self.walls = walls
        self.start = np.ascontiguousarray(walls[:, 0:2])
        self.edge = np.ascontiguousarray(walls[:, 2:4] - walls[:, 0:2])
        # A wall with a zero edge never reports a hit (its denominator is 0 for every ray),
        # so it is left out of the cells.
        live = np.flatnonzero((self.edge[:, 0] != 0.0) | (self.edge[:, 1] != 0.0))
        if len(live):
            xs = np.concatenate([walls[live, 0], walls[live, 2]])
            ys = np.concatenate([walls[live, 1], walls[live, 3]])
            lo_x, hi_x, lo_y, hi_y = float(xs.min()), float(xs.max()), float(ys.min()), float(ys.max())
        else:
            lo_x = hi_x = lo_y = hi_y = 0.0
        self.x0, self.y0 = lo_x - GRID_MARGIN, lo_y - GRID_MARGIN
        width, height = hi_x + GRID_MARGIN - self.x0, hi_y + GRID_MARGIN - self.y0
        self.cell = float(cell) if cell else self._auto_cell(live, width, height)
        self.nx = max(1, int(np.ceil(width / self.cell)))
        self.ny = max(1, int(np.ceil(height / self.cell)))
        self.cell_start, self.cell_walls = self._bucket(live)

    def _auto_cell(self, live: np.ndarray, width: float, height: float) -> float:
        if not len(live):
            return max(width, height)
        lengths = np.hypot(self.edge[live, 0], self.edge[live, 1])
        side = CELL_PER_WALL_LENGTH * float(np.median(lengths))
        if self.reach > 0:
            side = min(side, self.reach)
        side = max(side, 1e-9 * max(width, height))
        cap = max(MIN_CELL_CAP, CELLS_PER_WALL * len(live))
        while int(np.ceil(width / side)) * int(np.ceil(height / side)) > cap:
            side *= 1.25
        return side

    def _bucket(self, live: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        n_cells = self.nx * self.ny
        if not len(live):
            return np.zeros(n_cells + 1, dtype=np.intp), np.zeros(0, dtype=np.intp)
        i = np.tile(np.arange(self.nx), self.ny)
        j = np.repeat(np.arange(self.ny), self.nx)
        # The same expressions as the cell walk in cast_one, so both see the same boxes.
        xa, xb = self.x0 + i * self.cell, self.x0 + (i + 1) * self.cell
        ya, yb = self.y0 + j * self.cell, self.y0 + (j + 1) * self.cell
        g = self.grow
        boxes = shapely.box(xa - g, ya - g, xb + g, yb + g)
        w = self.walls[live]
        lines = shapely.linestrings(np.stack([w[:, 0:2], w[:, 2:4]], axis=1))
        cells, found = shapely.STRtree(lines).query(boxes, predicate="intersects")
        found = live[found]
        order = np.lexsort((found, cells))
        cell_walls = np.ascontiguousarray(found[order], dtype=np.intp)
        counts = np.bincount(cells, minlength=n_cells)
        cell_start = np.zeros(n_cells + 1, dtype=np.intp)
        np.cumsum(counts, out=cell_start[1:])
        return cell_start, cell_walls

    @property
    def kernel_args(self) -> tuple:
        """``(gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge)``: the grid as
        :func:`cast_one` takes it (floats, ints, contiguous intp and float64 arrays)."""
        return (self.x0, self.y0, self.cell, self.nx, self.ny, self.cell_start, self.cell_walls, self.start, self.edge)


    def cells_of(self, points: np.ndarray) -> np.ndarray:
        """(N,) cell index of each point (N, 2), clamped to the grid."""
        i = np.clip(np.floor((points[:, 0] - self.x0) / self.cell), 0, self.nx - 1).astype(np.intp)
        j = np.clip(np.floor((points[:, 1] - self.y0) / self.cell), 0, self.ny - 1).astype(np.intp)
        return j * self.nx + i

    def walls_in(self, c: int) -> np.ndarray:
        """Indices of the walls listed in cell ``c``."""
        return self.cell_walls[self.cell_start[c] : self.cell_start[c + 1]]


def ray_directions(angles: np.ndarray, ray_angles: np.ndarray) -> np.ndarray:
    """(N, R, 2) unit directions of rays at ``ray_angles`` (R,) radians from headings (N,)."""
    theta = angles[:, None] + ray_angles[None, :]
    return np.stack([np.cos(theta), np.sin(theta)], axis=-1)


def cast_rays(grid: WallGrid, origins: np.ndarray, headings: np.ndarray, ray_angles: np.ndarray, length: float) -> np.ndarray:
    """Distance along each ray to the first wall, ``inf`` where none is within ``length``.

    origins (N, 2), headings (N,) and ray_angles (R,) in radians -> (N, R). Ray r of agent
    i is the segment origin + t d, d = (cos, sin)(heading + ray angle), 0 <= t <= length;
    a wall a + u e, 0 <= u <= 1, is hit where the 2D cross products give t and u in range
    (common practice: parametric line intersection). Each ray is :func:`cast_one`.
    """
    origins = np.ascontiguousarray(origins, dtype=np.float64).reshape(-1, 2)
    headings = np.ascontiguousarray(headings, dtype=np.float64).reshape(-1)
    ray_angles = np.ascontiguousarray(ray_angles, dtype=np.float64).reshape(-1)
    out = np.empty((len(origins), len(ray_angles)))
    _cast_all(origins, headings, ray_angles, float(length), *grid.kernel_args, out)
    return out


@njit(cache=True, nogil=True)
def cast_one(px, py, theta, length, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge):  # pragma: no cover - compiled
    """Distance along the ray from (px, py) at angle ``theta`` to the nearest wall within
    ``length``, ``inf`` when there is none; the grid as :attr:`WallGrid.kernel_args` gives it.

    The ray walks the cells it crosses in order (the grid traversal of Amanatides & Woo
    1987, "A fast voxel traversal algorithm for ray tracing", Eurographics [from memory]:
    tx, ty are the ray parameters of the next x and y cell sides, advanced by dtx, dty
    per step), tests each listed wall with the parametric formula below and stops once
    the nearest hit so far is no farther than the current cell's exit. The nearest hit
    lies in a cell the walk has visited by then, so the result is the minimum of the
    formula over every wall, as if all were tested: the order of the tests and repeated
    tests do not change a minimum. (The rounding of the walk, about 1e-16 times the
    coordinates per step, is far below ``CELL_TOLERANCE``.) An origin outside the grid
    starts where the ray enters it; a ray that never enters it within ``length`` hits
    nothing, since every wall is inside.

    Another numba kernel may call this per ray. A call passes every array as several
    machine words; to inline it instead, compile ``cast_one.py_func`` with
    ``njit(inline="always")`` as :func:`cast_rays` does.
    """
    dx = np.cos(theta)
    dy = np.sin(theta)
    best = np.inf
    if not (abs(px) < np.inf and abs(py) < np.inf and abs(dx) <= 1.0 and abs(dy) <= 1.0):
        return best  # NaN or infinite input: the formula accepts no wall either
    gx1 = gx0 + gnx * gcell
    gy1 = gy0 + gny * gcell
    t_out = length
    if px >= gx0 and px <= gx1 and py >= gy0 and py <= gy1:
        qx = px
        qy = py
    else:  # start where the ray [0, length] enters the grid's box (slab test)
        t_in = 0.0
        if dx != 0.0:
            ta = (gx0 - px) / dx
            tb = (gx1 - px) / dx
            t_in = max(t_in, min(ta, tb))
            t_out = min(t_out, max(ta, tb))
        elif not (px >= gx0 and px <= gx1):
            return best
        if dy != 0.0:
            ta = (gy0 - py) / dy
            tb = (gy1 - py) / dy
            t_in = max(t_in, min(ta, tb))
            t_out = min(t_out, max(ta, tb))
        elif not (py >= gy0 and py <= gy1):
            return best
        if not (t_in <= t_out):
            return best
        qx = px + t_in * dx
        qy = py + t_in * dy
    ci = min(max(int(np.floor((qx - gx0) / gcell)), 0), gnx - 1)
    cj = min(max(int(np.floor((qy - gy0) / gcell)), 0), gny - 1)
    # Per axis: the cell step, the ray parameter of the side of the current cell the ray
    # leaves by, and the parameter span of one cell.
    step_x = 0
    tx = np.inf
    dtx = np.inf
    if dx != 0.0:
        step_x = 1 if dx > 0.0 else -1
        side = ci + 1 if dx > 0.0 else ci
        tx = (gx0 + side * gcell - px) / dx
        dtx = gcell / abs(dx)
    step_y = 0
    ty = np.inf
    dty = np.inf
    if dy != 0.0:
        step_y = 1 if dy > 0.0 else -1
        side = cj + 1 if dy > 0.0 else cj
        ty = (gy0 + side * gcell - py) / dy
        dty = gcell / abs(dy)
    c = cj * gnx + ci
    row = step_y * gnx
    zero = np.uint64(0)
    one = np.uint64(1)
    while True:
        # Unsigned indices (all are >= 0) spare numba's negative-index wraparound.
        cu = np.uint64(c)
        for k in range(cell_start[cu], cell_start[cu + one]):
            w = np.uint64(cell_walls[np.uint64(k)])
            ex = edge[w, zero]
            ey = edge[w, one]
            denom = dx * ey - dy * ex
            if denom == 0.0:
                continue
            apx = start[w, zero] - px
            apy = start[w, one] - py
            t = (apx * ey - apy * ex) / denom
            u = (apx * dy - apy * dx) / denom
            if u >= 0.0 and u <= 1.0 and t >= 0.0 and t <= length and t < best:
                best = t
        if tx < ty:  # the ray leaves through an x side at tx
            if best <= tx or tx >= t_out:
                return best
            ci += step_x
            if ci < 0 or ci >= gnx:
                return best
            c += step_x
            tx += dtx
        else:
            if best <= ty or ty >= t_out:
                return best
            cj += step_y
            if cj < 0 or cj >= gny:
                return best
            c += row
            ty += dty


# The same function inlined into the batch loop: a call per ray would pass each array as
# several machine words and cost about as much as the walk itself.
cast_one_inline = njit(nogil=True, inline="always")(cast_one.py_func)


@njit(cache=True, nogil=True)
def _cast_all(origins, headings, ray_angles, length, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge, out):  # pragma: no cover - compiled
    for i in range(origins.shape[0]):
        px = origins[i, 0]
        py = origins[i, 1]
        for j in range(ray_angles.shape[0]):
            theta = headings[i] + ray_angles[j]
            out[i, j] = cast_one_inline(px, py, theta, length, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls, start, edge)


def proximity(distance_from_centre: np.ndarray, body_radius: float, max_range: float) -> np.ndarray:
    """Range readings as proximity 1 - d/range in [0, 1], d measured from the body surface;
    0 when nothing is within range (common practice)."""
    d = np.clip(distance_from_centre - body_radius, 0.0, max_range)
    return np.where(np.isfinite(distance_from_centre), 1.0 - d / max_range, 0.0)


class Zones:
    """Membership tests for home, sites and markers, batched over agents."""

    def __init__(self, spec: WorldSpec) -> None:
        self.home = np.array(spec.home.position, dtype=float)
        self.home_r2 = spec.home.radius**2
        self.site_pos = np.array([s.position for s in spec.sites], dtype=float)  # (S, 2)
        self.site_r2 = np.array([s.radius**2 for s in spec.sites], dtype=float)
        self.marker_names = [m.name for m in spec.markers]
        self._discs = []
        self._polys = []
        for k, m in enumerate(spec.markers):
            if m.polygon is None:
                self._discs.append((k, np.array(m.position, dtype=float), m.radius**2))
            else:
                self._polys.append((k, shapely.Polygon(m.polygon)))

    def at_home(self, pos: np.ndarray) -> np.ndarray:
        d = pos - self.home
        return d[:, 0] ** 2 + d[:, 1] ** 2 <= self.home_r2

    def at_sites(self, pos: np.ndarray) -> np.ndarray:
        """(N, S) bool: the robot centre is inside site s."""
        d = pos[:, None, :] - self.site_pos[None, :, :]
        return d[..., 0] ** 2 + d[..., 1] ** 2 <= self.site_r2[None, :]

    def in_markers(self, pos: np.ndarray) -> np.ndarray:
        """(N, M) bool: the robot centre is inside marker m."""
        out = np.zeros((len(pos), len(self.marker_names)), dtype=bool)
        for k, c, r2 in self._discs:
            d = pos - c
            out[:, k] = d[:, 0] ** 2 + d[:, 1] ** 2 <= r2
        for k, poly in self._polys:
            out[:, k] = shapely.contains_xy(poly, pos[:, 0], pos[:, 1])
        return out
