"""Drawing a world: floor, walls, home, sites with values, markers, robot and rays.

:func:`draw_world` is what the preview, the live viewer (every frame, with the live pose
and ray end points) and the recorder call. It draws through any
:class:`~neurodrome.view.draw.Canvas`, so it needs no screen and no pygame of its own.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Sequence

import numpy as np
from shapely.geometry import GeometryCollection, MultiPolygon, Point, Polygon

from ..world.geometry import Geometry
from ..world.lint import value_schedule
from ..world.spec import WorldSpec
from .draw import Canvas, PygameCanvas, Viewport, arrow_head
from .palette import DEFAULT, Color, Palette

#: Pixel heights of the title band and the bottom band (before the ``ui`` scale).
TITLE_BAND = 64
BOTTOM_BAND = 44


def world_bounds(spec: WorldSpec, geometry: Geometry) -> tuple[float, float, float, float]:
    """The world rectangle worth showing: the free space and every zone."""
    x0, y0, x1, y1 = geometry.free.bounds if not geometry.free.is_empty else (0.0, 0.0, 1.0, 1.0)
    discs = [(spec.home.position, spec.home.radius)] + [(s.position, s.radius) for s in spec.sites]
    for (x, y), r in discs:
        x0, y0, x1, y1 = min(x0, x - r), min(y0, y - r), max(x1, x + r), max(y1, y + r)
    return (x0, y0, x1, y1)


def fit_viewport(spec: WorldSpec, geometry: Geometry, size: tuple[int, int], ui: float = 1.0) -> Viewport:
    """A viewport fitting the world between the title band and the bottom band."""
    top, bottom = round(TITLE_BAND * ui), round(BOTTOM_BAND * ui)
    area = (0, top, size[0], max(size[1] - top - bottom, 1))
    return Viewport(world_bounds(spec, geometry), area, margin=round(64 * ui))


def cast_rays(geometry: Geometry, pose: tuple[float, float, float], body_radius: float,
              angles_deg: Sequence[float], max_range: float) -> np.ndarray:
    """End points (R, 2) of range-finder rays at ``pose`` (x, y, heading in degrees): the
    nearest wall hit, or the end of the range (``max_range`` past the body surface).
    Computed by the simulator's own sensors, so the preview shows what the robot senses."""
    from ..sim.sensors import WallGrid, ray_directions
    from ..sim.sensors import cast_rays as cast

    x, y, heading = pose
    reach = body_radius + max_range
    dirs = ray_directions(np.array([math.radians(heading)]), np.radians(np.asarray(angles_deg, dtype=float)))
    if not len(geometry.walls):
        return np.array([x, y]) + reach * dirs[0]
    grid = WallGrid(geometry.walls, reach)
    dist = cast(grid, np.array([[x, y]], dtype=float), np.array([math.radians(heading)]), np.radians(np.asarray(angles_deg, dtype=float)), reach)[0]
    return np.array([x, y]) + np.minimum(dist, reach)[:, None] * dirs[0]


def marker_zone(marker) -> Polygon:
    """A marker's zone as a shapely polygon (a disc is drawn with 64 segments)."""
    if marker.polygon is not None:
        return Polygon(marker.polygon).buffer(0)
    return Point(marker.position).buffer(marker.radius, quad_segs=16)


def _polygons(geom) -> list[Polygon]:
    if isinstance(geom, Polygon):
        return [] if geom.is_empty else [geom]
    if isinstance(geom, (MultiPolygon, GeometryCollection)):
        return [g for g in geom.geoms if isinstance(g, Polygon) and not g.is_empty]
    return []


def _fmt(v: float) -> str:
    return f"{v:.2f}".rstrip("0").rstrip(".") if abs(v) < 1000 else f"{v:.3g}"


def _schedule_text(spec: WorldSpec) -> str:
    task = spec.task
    parts = [f"{task.trials} trials", f"{task.time_limit_s:g} s each"]
    events = sorted(task.relocations, key=lambda e: (e.earliest_trial, e.latest_trial))
    if not events:
        parts.append("stock fixed")
    else:
        when = ", ".join(
            f"{e.after_trial}" if e.after_trial is not None else f"[{e.window[0]}, {e.window[1]}]" for e in events
        )
        noun = "restock" if len(events) == 1 else f"{len(events)} restocks"
        parts.append(f"{noun} after trial {when}")
    if task.scoring.return_home:
        parts.append("return home")
    return "  \u00b7  ".join(parts)


def _nice_length(target: float) -> float:
    """The largest 1, 2 or 5 times a power of ten not above ``target`` (metres)."""
    if target <= 0:
        return 1.0
    k = math.floor(math.log10(target))
    for m in (5, 2, 1):
        if m * 10**k <= target:
            return m * 10**k
    return 10**k


def _label(canvas: Canvas, anchor_pt: tuple[float, float], lines: list[tuple[str, int, bool, Color]],
           direction: tuple[float, float], pal: Palette, ui: float) -> None:
    """A boxed multi-line label placed beside ``anchor_pt`` in screen ``direction``."""
    sizes = [canvas.text_size(t, s, b) for t, s, b, _ in lines]
    pad = round(5 * ui)
    w = max(sz[0] for sz in sizes) + 2 * pad
    h = sum(sz[1] for sz in sizes) + 2 * pad
    dx, dy = direction
    cx = anchor_pt[0] + dx * w / 2
    cy = anchor_pt[1] + dy * h / 2
    cw, ch = canvas.size
    cx = min(max(cx, w / 2 + 2), cw - w / 2 - 2)
    cy = min(max(cy, h / 2 + 2), ch - h / 2 - 2)
    box = [(cx - w / 2, cy - h / 2), (cx + w / 2, cy - h / 2), (cx + w / 2, cy + h / 2), (cx - w / 2, cy + h / 2)]
    canvas.polygon(box, fill=pal.label_bg, outline=pal.text_muted_on_ground, width=1)
    y = cy - h / 2 + pad
    for (text, size, bold, color), (_, th) in zip(lines, sizes):
        canvas.text((cx, y), text, color, size=size, anchor="top", bold=bold)
        y += th


def _screen_dir(vx: float, vy: float) -> tuple[float, float]:
    """Unit screen direction (y down) for a world direction, snapped to the nearest axis."""
    if abs(vx) >= abs(vy):
        return (1.0 if vx >= 0 else -1.0, 0.0)
    return (0.0, -1.0 if vy >= 0 else 1.0)


def draw_world(
    canvas: Canvas,
    viewport: Viewport,
    spec: WorldSpec,
    geometry: Geometry,
    *,
    site_values: dict[str, float] | None = None,
    robot_pose: tuple[float, float, float] | None = None,
    rays: np.ndarray | None = None,
    title: str | None = None,
    subtitle: str | None = None,
    palette: Palette = DEFAULT,
    ui: float = 1.0,
    legend: bool = True,
) -> None:
    """Draw one frame of a world.

    ``site_values`` are the current values (default: the whole schedule, "1 -> 0.2");
    ``robot_pose`` is (x, y, heading in degrees) (default: home); ``rays`` are (R, 2) ray
    end points in metres (default: cast from the pose against the walls). ``ui`` scales
    every pixel length and font size, for supersampled canvases.
    """
    pal = palette
    W = viewport.to_px_array
    canvas.clear(pal.ground)

    # Floor: each polygon's outline filled, then its holes in ground colour; biggest
    # first, so a floor island inside another part's hole is painted after that hole.
    for poly in sorted(_polygons(geometry.free), key=lambda p: -p.area):
        canvas.polygon(W(np.asarray(poly.exterior.coords)[:-1]).tolist(), fill=pal.floor)
        for hole in poly.interiors:
            canvas.polygon(W(np.asarray(hole.coords)[:-1]).tolist(), fill=pal.ground)

    s = viewport.scale
    # Markers are drawn clipped to the floor: a robot's centre never leaves it, so the
    # part of a zone inside a wall can never raise the signal.
    marker_tops: dict[str, tuple[float, float]] = {}
    for m in spec.markers:
        zone = marker_zone(m).intersection(geometry.free)
        for poly in _polygons(zone):
            canvas.polygon(W(np.asarray(poly.exterior.coords)[:-1]).tolist(), fill=pal.marker_fill,
                           outline=pal.marker, width=1.5 * ui)
        if not zone.is_empty:
            zx0, _, zx1, zy1 = zone.bounds
            marker_tops[m.name] = viewport.to_px(0.5 * (zx0 + zx1), zy1)

    home = spec.home
    hc = viewport.to_px(*home.position)
    canvas.circle(hc, home.radius * s, fill=pal.home_fill, outline=pal.home, width=2.5 * ui)

    tables = value_schedule(spec.task)
    current = site_values if site_values is not None else tables[0]
    best = max(current.values()) if current else None
    for site in spec.sites:
        c = viewport.to_px(*site.position)
        top = best is not None and current.get(site.name) == best
        canvas.circle(c, site.radius * s, fill=pal.site_best_fill if top else pal.site_fill,
                      outline=pal.site, width=2.5 * ui)

    canvas.segments(W(geometry.walls[: geometry.boundary_walls].reshape(-1, 2)).reshape(-1, 4), pal.wall, 3.5 * ui)
    extra = geometry.walls[geometry.boundary_walls:]
    if len(extra):
        canvas.segments(W(extra.reshape(-1, 2)).reshape(-1, 4), pal.extra_wall, 4.5 * ui)

    pose = robot_pose if robot_pose is not None else (home.position[0], home.position[1], home.heading_deg)
    robot = spec.robot
    rf = robot.range_finders
    if rays is None and rf.angles_deg and len(geometry.walls):
        rays = cast_rays(geometry, pose, robot.radius, rf.angles_deg, rf.max_range)
    _draw_robot(canvas, viewport, pose, robot.radius, robot.wheel_base, rays, rf.angles_deg, pal, ui)

    # Labels last, so nothing covers them.
    cx, cy = (geometry.free.centroid.x, geometry.free.centroid.y) if not geometry.free.is_empty else (0, 0)
    for site in spec.sites:
        values = [current[site.name]] if site_values is not None else [t[site.name] for t in tables]
        c = viewport.to_px(*site.position)
        d = _screen_dir(site.position[0] - cx, site.position[1] - cy)
        gap = site.radius * s + 6 * ui
        _label(canvas, (c[0] + d[0] * gap, c[1] + d[1] * gap), [
            (site.name, round(13 * ui), False, pal.text),
            (" -> ".join(_fmt(v) for v in values), round(16 * ui), True, pal.site if values[0] == best else pal.text),
        ], d, pal, ui)
    for name, top in marker_tops.items():
        canvas.text((top[0], top[1] + 5 * ui), name, pal.marker, size=round(12 * ui), anchor="top")
    hd = _screen_dir(home.position[0] - cx, home.position[1] - cy)
    hgap = home.radius * s + 6 * ui
    _label(canvas, (hc[0] + hd[0] * hgap, hc[1] + hd[1] * hgap),
           [("home", round(13 * ui), True, pal.home)], hd, pal, ui)

    _draw_bands(canvas, viewport, spec, title, subtitle, pal, ui, legend)


def _draw_robot(canvas: Canvas, viewport: Viewport, pose, radius: float, wheel_base: float,
                rays: np.ndarray | None, angles_deg, pal: Palette, ui: float) -> None:
    x, y, heading = pose
    h = math.radians(heading)
    s = viewport.scale
    c = viewport.to_px(x, y)
    if rays is not None and len(rays):
        ang = h + np.radians(np.asarray(angles_deg, dtype=float))
        starts = np.column_stack([x + radius * np.cos(ang), y + radius * np.sin(ang)])
        ends = np.asarray(rays, dtype=float).reshape(-1, 2)
        segs = np.hstack([viewport.to_px_array(starts), viewport.to_px_array(ends)])
        canvas.segments(segs, pal.ray, 1.6 * ui)
        for ex, ey in segs[:, 2:]:
            canvas.circle((ex, ey), 3.0 * ui, fill=pal.ray_hit)
    # Wheels: short dark bars across the body edge at +-wheel_base/2, along the heading.
    fx, fy = math.cos(h), math.sin(h)
    lx, ly = -fy, fx
    half_len = 0.45 * radius
    for side in (1, -1):
        wx, wy = x + side * lx * wheel_base / 2, y + side * ly * wheel_base / 2
        a = viewport.to_px(wx - fx * half_len, wy - fy * half_len)
        b = viewport.to_px(wx + fx * half_len, wy + fy * half_len)
        canvas.polyline([a, b], pal.robot_outline, width=max(2.0, 0.22 * radius * s))
    canvas.circle(c, radius * s, fill=pal.robot, outline=pal.robot_outline, width=2 * ui)
    tip = viewport.to_px(x + 0.95 * radius * fx, y + 0.95 * radius * fy)
    tail = viewport.to_px(x - 0.35 * radius * fx, y - 0.35 * radius * fy)
    canvas.polygon(arrow_head(tip, tail, 0.75 * radius * s, 32), fill=pal.floor)


def _draw_bands(canvas: Canvas, viewport: Viewport, spec: WorldSpec, title: str | None, subtitle: str | None,
                pal: Palette, ui: float, legend: bool) -> None:
    cw, ch = canvas.size
    pad = round(16 * ui)
    canvas.text((pad, round(10 * ui)), title if title is not None else spec.name, pal.text_on_ground,
                size=round(24 * ui), anchor="topleft", bold=True)
    canvas.text((pad, round(40 * ui)), subtitle if subtitle is not None else _schedule_text(spec),
                pal.text_muted_on_ground, size=round(15 * ui), anchor="topleft")

    # Scale bar: a round length near a fifth of the map width.
    metres = _nice_length(0.2 * (viewport.area[2] - 2 * viewport.margin) / viewport.scale)
    length = metres * viewport.scale
    y = ch - round(18 * ui)
    x0 = pad
    tick = 6 * ui
    canvas.polyline([(x0, y), (x0 + length, y)], pal.scale_bar, width=3 * ui)
    canvas.polyline([(x0, y - tick), (x0, y + tick)], pal.scale_bar, width=2 * ui)
    canvas.polyline([(x0 + length, y - tick), (x0 + length, y + tick)], pal.scale_bar, width=2 * ui)
    canvas.text((x0 + length + 10 * ui, y), f"{metres:g} m", pal.text_on_ground, size=round(15 * ui), anchor="left")

    if not legend:
        return
    items: list[tuple[str, Color, Color]] = [
        ("range rays", pal.ray, pal.ray_hit),
        ("robot", pal.robot, pal.robot_outline),
        ("home", pal.home_fill, pal.home),
        ("store (value)", pal.site_fill, pal.site),
        ("zone signal", pal.marker_fill, pal.marker),
    ]
    size = round(14 * ui)
    r, key_w, gap = 7 * ui, 22 * ui, 22 * ui
    widths = [canvas.text_size(text, size)[0] + 8 * ui + (key_w if k == 0 else 2 * r) for k, (text, _, _) in
              enumerate(items)]
    scale_end = x0 + length + 10 * ui + canvas.text_size(f"{metres:g} m", round(15 * ui))[0]
    while items and cw - pad - sum(widths) - gap * (len(items) - 1) < scale_end + gap:
        items, widths = items[1:], widths[1:]  # too narrow a picture: drop keys from the left
    x = cw - pad
    for k, (text, fill, edge) in reversed(list(enumerate(items))):
        canvas.text((x, y), text, pal.text_on_ground, size=size, anchor="right")
        x -= canvas.text_size(text, size)[0] + 8 * ui
        if text == "range rays":
            canvas.polyline([(x - key_w, y), (x, y)], fill, width=2 * ui)
            canvas.circle((x, y), 3 * ui, fill=edge)
            x -= key_w
        else:
            canvas.circle((x - r, y), r, fill=pal.floor)  # translucent fills show as on the floor
            canvas.circle((x - r, y), r, fill=fill, outline=edge, width=2 * ui)
            x -= 2 * r
        x -= gap


def render_png(spec: WorldSpec, geometry: Geometry, path: str | Path, size: tuple[int, int] = (1200, 900),
               supersample: int = 2, **options) -> None:
    """Draw a world to a PNG of ``size`` pixels (drawn ``supersample`` times larger, then
    scaled down for smooth edges)."""
    canvas = PygameCanvas(size, supersample=supersample)
    viewport = fit_viewport(spec, geometry, canvas.size, ui=supersample)
    draw_world(canvas, viewport, spec, geometry, ui=supersample, **options)
    canvas.save(path)
