"""Corridors to free space to wall segments.

Each corridor centre line is buffered by half its width with square caps and mitred joins,
the corridors are unioned, obstacles are cut out; the free space's boundary rings become
the wall segments, to which the world's extra walls are added.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property

import numpy as np
import shapely
from shapely.geometry import LineString, MultiPolygon, Point, Polygon
from shapely.ops import unary_union

from .spec import WorldSpec

#: Vertices closer to collinear than this (metres) are merged.
SIMPLIFY_TOLERANCE = 1e-9


@dataclass(frozen=True)
class Geometry:
    """The built arena of one world, in the world's own coordinates.

    ``walls`` has shape (W, 4): rows of x0, y0, x1, y1 in metres.
    """

    free: Polygon | MultiPolygon
    walls: np.ndarray
    boundary_walls: int

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        xs = np.concatenate([self.walls[:, 0], self.walls[:, 2]])
        ys = np.concatenate([self.walls[:, 1], self.walls[:, 3]])
        return float(xs.min()), float(ys.min()), float(xs.max()), float(ys.max())

    @property
    def area(self) -> float:
        return float(self.free.area)

    @cached_property
    def wall_lines(self) -> shapely.MultiLineString:
        return shapely.MultiLineString([[(w[0], w[1]), (w[2], w[3])] for w in self.walls])

    def reachable_space(self, robot_radius: float) -> Polygon | MultiPolygon:
        """Where a robot centre of this radius can be: free space eroded by the radius,
        minus the extra walls thickened by it."""
        # Round joins make this the exact erosion by a disc (up to arc segments): a mitre
        # would keep sharp points at inside corners that a round robot cannot reach.
        eroded = self.free.buffer(-robot_radius, join_style="round", quad_segs=16)
        extra = self.walls[self.boundary_walls:]
        if len(extra):
            cut = unary_union([LineString([(w[0], w[1]), (w[2], w[3])]).buffer(robot_radius) for w in extra])
            eroded = eroded.difference(cut)
        return eroded

    def contains(self, x: float, y: float) -> bool:
        return bool(self.free.covers(Point(x, y)))


#: Turns sharper than this (degrees) split a corridor's centre line into separately
#: buffered pieces: a mitred join of a path that doubles back on itself is degenerate
#: (GEOS returns a sliver for an exact reversal).
HAIRPIN_DEG = 135.0


def corridor_polygon(path: list[tuple[float, float]], width: float) -> Polygon:
    """A corridor's floor: its centre line buffered by width/2, square caps, mitred joins.

    Area of a straight corridor of length l and width w is (l + w) * w (each square cap
    adds w/2 at both ends). At a hairpin (a turn sharper than ``HAIRPIN_DEG``) the line
    is split and the square-capped pieces are unioned.
    """
    pieces = _split_at_hairpins(path)
    polys = [LineString(p).buffer(width / 2.0, cap_style="square", join_style="mitre", mitre_limit=10.0) for p in pieces]
    return polys[0] if len(polys) == 1 else unary_union(polys)


def _split_at_hairpins(path: list[tuple[float, float]]) -> list[list[tuple[float, float]]]:
    pts = np.asarray(path, dtype=float)
    pieces, start = [], 0
    limit = math.cos(math.radians(180.0 - HAIRPIN_DEG))
    for k in range(1, len(pts) - 1):
        a, b = pts[k] - pts[k - 1], pts[k + 1] - pts[k]
        cos_turn = float(np.dot(a, b) / (np.linalg.norm(a) * np.linalg.norm(b)))
        if cos_turn < -limit:  # the direction turns by more than HAIRPIN_DEG
            pieces.append([tuple(p) for p in pts[start : k + 1]])
            start = k
    pieces.append([tuple(p) for p in pts[start:]])
    return pieces


def free_space(spec: WorldSpec) -> Polygon | MultiPolygon:
    floors = [corridor_polygon(c.path, c.width) for c in spec.corridors]
    free = unary_union(floors)
    if spec.obstacles:
        solids = unary_union([Polygon(o.polygon).buffer(0) for o in spec.obstacles])
        free = free.difference(solids)
    free = free.simplify(SIMPLIFY_TOLERANCE, preserve_topology=True)
    if not free.is_valid:
        free = shapely.make_valid(free)
    return _polygons_only(free)


def _polygons_only(geom) -> Polygon | MultiPolygon:
    if isinstance(geom, (Polygon, MultiPolygon)):
        return geom
    parts = [g for g in getattr(geom, "geoms", []) if isinstance(g, Polygon) and not g.is_empty]
    return MultiPolygon(parts) if len(parts) != 1 else parts[0]


def ring_segments(free: Polygon | MultiPolygon) -> np.ndarray:
    """Boundary rings (exterior and holes) of the free space as (S, 4) segments."""
    polys = list(free.geoms) if isinstance(free, MultiPolygon) else [free]
    rows = []
    for poly in polys:
        if poly.is_empty:
            continue
        for ring in [poly.exterior, *poly.interiors]:
            coords = np.asarray(ring.coords, dtype=float)
            rows.append(np.hstack([coords[:-1], coords[1:]]))
    if not rows:
        return np.zeros((0, 4))
    segs = np.vstack(rows)
    keep = np.hypot(segs[:, 2] - segs[:, 0], segs[:, 3] - segs[:, 1]) > 1e-12
    return segs[keep]


def build_geometry(spec: WorldSpec) -> Geometry:
    free = free_space(spec)
    boundary = ring_segments(free)
    extra = np.array([[*w.start, *w.end] for w in spec.walls], dtype=float).reshape(-1, 4)
    walls = np.vstack([boundary, extra]) if len(extra) else boundary
    return Geometry(free=free, walls=np.ascontiguousarray(walls, dtype=float), boundary_walls=len(boundary))
