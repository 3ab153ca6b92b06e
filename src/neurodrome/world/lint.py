"""Lint a valid world: does the robot fit, can it reach every site, is the task sensible?

A world that validates (:mod:`.spec`) can still be unusable: a site in a wall, a corridor
narrower than the robot, a relocation after the last trial, lengths typed in centimetres.
:func:`lint` returns :class:`~neurodrome.errors.Finding` objects at two levels:
``error`` (the world cannot work as written) and ``warning`` (it works, but probably not
as meant). :func:`summarize` gives the facts an author checks at a glance.

Clearance rule: the robot's centre may go where the free space eroded by
``radius + CLEARANCE_MARGIN`` still reaches, so a passage must be at least
``2 * (radius + CLEARANCE_MARGIN)`` wide; a site counts as reachable when that region of
the component holding home comes within the site's radius of the site's centre.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from shapely.geometry import MultiPolygon, Point, Polygon
from shapely.geometry.base import BaseGeometry
from shapely.ops import unary_union

from ..errors import Finding
from .geometry import Geometry, corridor_polygon
from .spec import MAX_EXTENT, Task, WorldSpec

#: Metres of clearance the robot needs on each side beyond its own radius: contact
#: resolution lets a body sink into a wall by a few millimetres, and a robot that touches
#: both walls of a passage at once cannot steer through it.
CLEARANCE_MARGIN = 0.01

#: Corridors wider than this (metres) are taken for a unit mistake (centimetres).
MAX_CORRIDOR_WIDTH = 20.0

#: Bisection on the robot radius stops when the bracket is narrower than this (metres).
BISECTION_TOLERANCE = 1e-4


def _error(where: str, message: str, code: str, **data: Any) -> Finding:
    return Finding("error", where, message, code, data)


def _warning(where: str, message: str, code: str, **data: Any) -> Finding:
    return Finding("warning", where, message, code, data)


def _parts(geom: BaseGeometry) -> list[Polygon]:
    if geom.is_empty:
        return []
    if isinstance(geom, Polygon):
        return [geom]
    if isinstance(geom, MultiPolygon):
        return [g for g in geom.geoms if not g.is_empty]
    return [g for g in getattr(geom, "geoms", []) if isinstance(g, Polygon) and not g.is_empty]


def home_component(geometry: Geometry, spec: WorldSpec, clearance: float) -> Polygon | None:
    """The connected part of the space reachable by a robot centre with this clearance
    (radius plus margin) that holds the home position, or ``None``."""
    home = Point(spec.home.position)
    for part in _parts(geometry.reachable_space(clearance)):
        if part.covers(home):
            return part
    return None


def _reaches(component: Polygon | None, spec: WorldSpec) -> list[bool]:
    if component is None:
        return [False] * len(spec.sites)
    return [component.distance(Point(s.position)) <= s.radius for s in spec.sites]


def widest_robot_diameter(geometry: Geometry, spec: WorldSpec) -> float:
    """The widest robot (diameter, metres) that can start at home and reach every site,
    by bisection on the erosion radius; 0.0 when even a point robot cannot."""
    lo, hi = 0.0, max(c.width for c in spec.corridors) / 2.0
    if not all(_reaches(home_component(geometry, spec, 1e-9), spec)):
        return 0.0
    while hi - lo > BISECTION_TOLERANCE:
        mid = 0.5 * (lo + hi)
        if all(_reaches(home_component(geometry, spec, mid), spec)):
            lo = mid
        else:
            hi = mid
    return 2.0 * lo


def value_schedule(task: Task) -> list[dict[str, float]]:
    """Site values at the first trial, then after each relocation event in the order the
    events can first happen (list of dicts, one more than there are events)."""
    tables = [dict(task.site_values)]
    for event in sorted(task.relocations, key=lambda e: (e.earliest_trial, e.latest_trial)):
        tables.append(event.apply(tables[-1]))
    return tables


def _extent(spec: WorldSpec, geometry: Geometry) -> tuple[float, float]:
    pts = np.asarray(spec.all_points(), dtype=float)
    if len(geometry.walls):
        pts = np.vstack([pts, geometry.walls[:, :2], geometry.walls[:, 2:]])
    span = pts.max(axis=0) - pts.min(axis=0)
    return float(span[0]), float(span[1])


def lint(spec: WorldSpec, geometry: Geometry) -> list[Finding]:
    """Every finding about one world, errors first in file order, then warnings."""
    findings: list[Finding] = []
    findings += _units(spec, geometry)
    if geometry.free.is_empty:
        findings.append(_error("$.corridors", "the free space is empty (obstacles cover every corridor)", "free-empty"))
        return _ordered(findings)
    findings += _free_space(geometry)
    findings += _placement(spec, geometry)
    findings += _reachability(spec, geometry)
    findings += _overlaps(spec)
    findings += _schedule(spec)
    findings += _robot(spec, geometry)
    findings += _obstacles(spec, geometry)
    findings += _markers(spec, geometry)
    return _ordered(findings)


def _ordered(findings: list[Finding]) -> list[Finding]:
    return [f for f in findings if f.level == "error"] + [f for f in findings if f.level != "error"]


def _units(spec: WorldSpec, geometry: Geometry) -> list[Finding]:
    out = []
    for k, c in enumerate(spec.corridors):
        if c.width > MAX_CORRIDOR_WIDTH:
            out.append(_error(
                f"$.corridors[{k}].width",
                f"a corridor {c.width:g} m wide is beyond {MAX_CORRIDOR_WIDTH:g} m: lengths are metres "
                "(centimetres typed by mistake?)",
                "units-width", width=c.width,
            ))
    w, h = _extent(spec, geometry)
    if max(w, h) > MAX_EXTENT:
        out.append(_error(
            "$", f"the world spans {w:g} x {h:g} m; at most {MAX_EXTENT:g} m a side is allowed "
            "(the batched simulator tiles worlds on that pitch; lengths are metres)",
            "extent", width=w, height=h,
        ))
    narrowest = min(c.width for c in spec.corridors)
    if spec.robot.radius >= narrowest:
        out.append(_error(
            "$.robot.radius",
            f"a robot radius of {spec.robot.radius:g} m is at least the narrowest corridor width "
            f"({narrowest:g} m): the robot cannot fit (a radius given where a diameter was meant, "
            "or centimetres?)",
            "units-radius", radius=spec.robot.radius, narrowest=narrowest,
        ))
    return out


def _free_space(geometry: Geometry) -> list[Finding]:
    parts = _parts(geometry.free)
    if len(parts) > 1:
        return [_warning(
            "$.corridors", f"the free space falls into {len(parts)} separate parts; "
            "the robot can only ever use the one holding home", "free-parts", parts=len(parts),
        )]
    return []


def _placement(spec: WorldSpec, geometry: Geometry) -> list[Finding]:
    out = []
    if not geometry.contains(*spec.home.position):
        out.append(_error("$.home.position", "home is outside the free space", "home-outside"))
    elif home_component(geometry, spec, spec.robot.radius) is None:
        out.append(_error(
            "$.home.position",
            f"the robot (radius {spec.robot.radius:g} m) overlaps a wall when it starts at home",
            "home-footprint",
        ))
    for k, s in enumerate(spec.sites):
        if not geometry.contains(*s.position):
            out.append(_error(f"$.sites[{k}].position", f"site '{s.name}' is outside the free space", "site-outside"))
    return out


def _reachability(spec: WorldSpec, geometry: Geometry) -> list[Finding]:
    if not geometry.contains(*spec.home.position):
        return []
    clearance = spec.robot.radius + CLEARANCE_MARGIN
    reach = _reaches(home_component(geometry, spec, clearance), spec)
    out = []
    for k, (s, ok) in enumerate(zip(spec.sites, reach)):
        if not ok and geometry.contains(*s.position):
            out.append(_error(
                f"$.sites[{k}]",
                f"the robot (diameter {2 * spec.robot.radius:g} m plus {CLEARANCE_MARGIN:g} m margin each side) "
                f"cannot travel from home to site '{s.name}': a passage on the way is too narrow or blocked",
                "site-unreachable", site=s.name,
            ))
    return out


def _overlaps(spec: WorldSpec) -> list[Finding]:
    out = []
    home = spec.home
    for k, s in enumerate(spec.sites):
        if math.dist(s.position, home.position) < s.radius + home.radius:
            out.append(_error(
                f"$.sites[{k}]", f"site '{s.name}' overlaps the home zone", "site-home-overlap", site=s.name,
            ))
        for j in range(k):
            t = spec.sites[j]
            if math.dist(s.position, t.position) < s.radius + t.radius:
                out.append(_error(
                    f"$.sites[{k}]", f"site '{s.name}' overlaps site '{t.name}'", "site-overlap",
                    sites=[t.name, s.name],
                ))
    return out


def _schedule(spec: WorldSpec) -> list[Finding]:
    out = []
    trials = spec.task.trials
    for k, event in enumerate(spec.task.relocations):
        if event.after_trial is not None and event.after_trial >= trials:
            out.append(_error(
                f"$.task.relocations[{k}].after_trial",
                f"after_trial {event.after_trial} leaves no trial to relocate into: the task has {trials} "
                f"trials, so use 1..{trials - 1}",
                "relocation-late",
            ))
        if event.window is not None and event.window[1] >= trials:
            out.append(_error(
                f"$.task.relocations[{k}].window",
                f"window [{event.window[0]}, {event.window[1]}] reaches past the task's {trials} trials; "
                f"it must lie within 1..{trials - 1}",
                "relocation-late",
            ))
    tables = value_schedule(spec.task)
    for k in range(1, len(tables)):
        if tables[k] == tables[k - 1]:
            out.append(_warning(
                "$.task.relocations", f"relocation {k} (in trial order) leaves every site value unchanged",
                "relocation-no-op",
            ))
    return out


def _robot(spec: WorldSpec, geometry: Geometry) -> list[Finding]:
    out = []
    robot = spec.robot
    rf = robot.range_finders
    x0, y0, x1, y1 = geometry.free.bounds
    diagonal = math.hypot(x1 - x0, y1 - y0)
    if rf.max_range > diagonal:
        out.append(_warning(
            "$.robot.range_finders.max_range",
            f"a range of {rf.max_range:g} m is longer than the arena's diagonal ({diagonal:.3g} m): "
            "readings scaled by max_range never use the top of their scale",
            "range-long",
        ))
    side_gap = min(c.width for c in spec.corridors) / 2.0 - robot.radius
    if rf.angles_deg and 0 < rf.max_range < side_gap:
        out.append(_warning(
            "$.robot.range_finders.max_range",
            f"a range of {rf.max_range:g} m is shorter than the gap between the body and a side wall "
            f"when the robot drives down the middle of the narrowest corridor ({side_gap:.3g} m): "
            "side rays read nothing there",
            "range-short",
        ))
    # Rays start on the body surface along the outward normal, so no ray can point into
    # the body; what can go wrong is two rays looking the same way (e.g. -180 and 180).
    seen: dict[float, int] = {}
    for k, a in enumerate(rf.angles_deg):
        key = round(((a + 180.0) % 360.0) - 180.0, 6)
        if key in seen:
            out.append(_warning(
                f"$.robot.range_finders.angles_deg[{k}]",
                f"ray {k} ({a:g} deg) looks the same way as ray {seen[key]}", "range-duplicate",
            ))
        else:
            seen[key] = k
    if robot.wheel_base > 2 * robot.radius:
        out.append(_warning(
            "$.robot.wheel_base",
            f"the wheels ({robot.wheel_base:g} m apart) stick out of the body ({2 * robot.radius:g} m across); "
            "collisions use the body circle only",
            "wheel-base",
        ))
    step = robot.max_wheel_speed * spec.physics.time_step_s
    if step > robot.radius:
        out.append(_warning(
            "$.physics.time_step_s",
            f"at full speed the robot moves {step:g} m per physics step, more than its radius: "
            "contacts may be missed",
            "step-long",
        ))
    far = max(math.dist(spec.home.position, s.position) for s in spec.sites)
    travel = far / robot.max_wheel_speed
    if travel > spec.task.time_limit_s:
        out.append(_warning(
            "$.task.time_limit_s",
            f"even in a straight line at full speed the farthest site takes {travel:.3g} s, "
            f"longer than the {spec.task.time_limit_s:g} s time limit",
            "time-short",
        ))
    return out


def _obstacles(spec: WorldSpec, geometry: Geometry) -> list[Finding]:
    out = []
    floor = None
    for k, o in enumerate(spec.obstacles):
        shape = Polygon(o.polygon).buffer(0)
        if shape.area <= 0:
            out.append(_warning(f"$.obstacles[{k}].polygon", "the obstacle has no area (its points are in a line "
                                "or it folds onto itself) and cuts nothing", "obstacle-empty"))
            continue
        if floor is None:
            floor = unary_union([corridor_polygon(c.path, c.width) for c in spec.corridors])
        if not shape.intersects(floor):
            out.append(_warning(f"$.obstacles[{k}]", "the obstacle touches no corridor and cuts nothing",
                                "obstacle-outside"))
    return out


def _markers(spec: WorldSpec, geometry: Geometry) -> list[Finding]:
    out = []
    for k, m in enumerate(spec.markers):
        shape = Polygon(m.polygon).buffer(0) if m.polygon is not None else Point(m.position).buffer(m.radius)
        if not shape.intersects(geometry.free):
            out.append(_warning(f"$.markers[{k}]", f"marker '{m.name}' lies outside the free space (or has no area)",
                                "marker-outside"))
        elif m.position is not None and not geometry.contains(*m.position):
            out.append(_warning(
                f"$.markers[{k}].position", f"marker '{m.name}' is centred outside the free space", "marker-outside",
            ))
    return out


def summarize(spec: WorldSpec, geometry: Geometry) -> dict[str, Any]:
    """Facts an author checks at a glance (plain JSON-ready values, metres)."""
    w, h = _extent(spec, geometry)
    tables = value_schedule(spec.task)
    widest = 0.0
    if not geometry.free.is_empty and geometry.contains(*spec.home.position):
        widest = widest_robot_diameter(geometry, spec)
    return {
        "name": spec.name,
        "area_m2": round(geometry.area, 6),
        "extent_m": [round(w, 6), round(h, 6)],
        "corridors": len(spec.corridors),
        "wall_segments": int(len(geometry.walls)),
        "narrowest_corridor_m": min(c.width for c in spec.corridors),
        "widest_robot_diameter_m": round(widest, 4),
        "robot_diameter_m": 2 * spec.robot.radius,
        "clearance_margin_m": CLEARANCE_MARGIN,
        "trials": spec.task.trials,
        "relocations": len(spec.task.relocations),
        "sites": [
            {"name": s.name, "values": [t[s.name] for t in tables]} for s in spec.sites
        ],
    }
