"""One frame of a run: arena, trail, lit zones, status, restock cue and network panel.

:class:`Show` keeps what a single instant does not hold (the trail of the current
trial, the strip chart, the restock cue) and draws a whole frame through any
:class:`~neurodrome.view.draw.Canvas`. The live viewer and the recorder both use it,
and the arena itself is :func:`~neurodrome.view.scene.draw_world`, as in the preview,
so the three pictures look alike.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .draw import Canvas, Viewport
from .hud import RestockCue, draw_flash, draw_help, draw_status
from .netpanel import NetPanel
from .palette import DEFAULT, REDDISH_PURPLE
from .playback import Playback
from .scene import BOTTOM_BAND, TITLE_BAND, draw_world, marker_zone, world_bounds, _polygons

TRAIL = (92, 102, 122)  #: slate: apart from every zone hue, opaque (cheap to draw)


@dataclass
class ShowOptions:
    rays: bool = True
    trail: bool = True
    panel: bool = True
    help: bool = False
    status: bool = True
    flash: str | None = None  #: a short message over the arena
    speed_text: str | None = None  #: shown as an extra status chip (viewer only)


class Show:
    """Drawing state of one playback."""

    def __init__(self, pb: Playback) -> None:
        self.pb = pb
        self.panel = NetPanel(pb.net_spec, pb.neuron_ids, pb.net) if pb.net is not None else None
        self.cue = RestockCue()
        self.trail: list[tuple[float, float]] = []
        self.viewport: Viewport | None = None
        self.panel_rect: tuple[int, int, int, int] | None = None
        self._zones = [(m.name, marker_zone(m).intersection(pb.geometry.free)) for m in pb.spec.markers]
        self.jumped()

    def jumped(self) -> None:
        """The playback moved by more than a step (restart, trial change): drop history."""
        self.trail = [self.pb.pose[:2]]
        self.cue.clear()
        if self.panel is not None:
            self.panel.clear_history()
            self.panel.observe(self.pb.step_index, self.pb.net, [])

    def observe(self, events: list[tuple[str, dict]], before: np.ndarray | None = None) -> None:
        """Take in one control step's events (``before``: site values before the step)."""
        pb = self.pb
        for kind, detail in events:
            if kind == "trial-start":
                self.trail = []
            elif kind == "relocation" and before is not None:
                old = dict(zip(pb.site_names, before.tolist()))
                self.cue.trigger(pb.step_index, old, detail.get("after", pb.site_value_map()), int(detail.get("trial", pb.trial)))
        self.trail.append(pb.pose[:2])
        if self.panel is not None:
            self.panel.observe(pb.step_index, pb.net, events)

    def step(self) -> list[tuple[str, dict]]:
        """Advance the playback one control step and take in its events."""
        before = self.pb.site_values.copy()
        events = self.pb.step()
        self.observe(events, before)
        return events

    # -- drawing ------------------------------------------------------------------------
    def layout(self, size: tuple[int, int], opts: ShowOptions) -> tuple[Viewport, tuple[int, int, int, int] | None]:
        w, h = size
        show_panel = opts.panel and self.panel is not None
        pw = min(max(360, round(0.34 * w)), 520) if show_panel and w >= 720 else 0
        area = (0, TITLE_BAND, w - pw, max(h - TITLE_BAND - BOTTOM_BAND, 1))
        vp = Viewport(world_bounds(self.pb.spec, self.pb.geometry), area, margin=56)
        rect = (w - pw + 4, TITLE_BAND, pw - 10, h - TITLE_BAND - BOTTOM_BAND) if pw else None
        return vp, rect

    def draw(self, canvas: Canvas, opts: ShowOptions, title: str | None = None, subtitle: str | None = None) -> None:
        pb = self.pb
        vp, rect = self.layout(canvas.size, opts)
        self.viewport, self.panel_rect = vp, rect
        x, y, heading = pb.pose
        rays = pb.rays if opts.rays else np.zeros((0, 2))
        draw_world(canvas, vp, pb.spec, pb.geometry, site_values=pb.site_value_map(),
                   robot_pose=(x, y, float(np.degrees(heading))), rays=rays,
                   title=title if title is not None else pb.spec.name,
                   subtitle=subtitle if subtitle is not None else short_label(pb.label), legend=True)
        self._draw_zones(canvas, vp)
        if opts.trail:
            self._draw_trail(canvas, vp)
        if rect is not None and self.panel is not None:
            self.panel.draw(canvas, rect, pb.net, title=f"network  \u00b7  {pb.net_spec.name if pb.net_spec and pb.net_spec.name else short_label(pb.label)}")
        if opts.status:
            extra = [("speed", opts.speed_text)] if opts.speed_text else None
            heading = title if title is not None else pb.spec.name
            draw_status(canvas, pb, canvas.size[0] - 12, extra=extra,
                        left=16 + canvas.text_size(heading, 24, True)[0] + 16)
        self.cue.draw(canvas, vp, pb, pb.step_index, vp.area[1] + 8)
        if opts.flash:
            draw_flash(canvas, opts.flash, (vp.area[0] + vp.area[2] / 2, vp.area[1] + vp.area[3] - 24))
        if opts.help:
            draw_help(canvas, (0, 0) + canvas.size)

    def _draw_zones(self, canvas: Canvas, vp: Viewport) -> None:
        """Outline the zones the robot is in: lit markers, home, the store it reached."""
        pos = np.array([self.pb.pose[:2]])
        for name, zone in self._zones:
            if zone.is_empty or not zone.buffer(1e-9).contains(_point(pos[0])):
                continue
            for poly in _polygons(zone):
                canvas.polyline(vp.to_px_array(np.asarray(poly.exterior.coords)).tolist(), REDDISH_PURPLE, width=5, closed=True)
        spec = self.pb.spec
        for disc, color in [((spec.home.position, spec.home.radius), DEFAULT.home)] + [
                ((s.position, s.radius), DEFAULT.site) for s in spec.sites]:
            (cx, cy), r = disc
            if (pos[0, 0] - cx) ** 2 + (pos[0, 1] - cy) ** 2 <= r * r:
                canvas.circle(vp.to_px(cx, cy), r * vp.scale + 3, outline=color, width=5)

    def _draw_trail(self, canvas: Canvas, vp: Viewport) -> None:
        if len(self.trail) < 2:
            return
        pts = np.asarray(self.trail, dtype=float)
        # stop short of the robot so the trail never paints over its body
        r = self.pb.spec.robot.radius
        far = np.hypot(pts[:, 0] - self.pb.pose[0], pts[:, 1] - self.pb.pose[1]) > r
        last = len(pts) - int(np.argmax(far[::-1])) if far.any() else 0
        pts = pts[:last]
        if len(pts) >= 2:
            canvas.polyline(vp.to_px_array(pts).tolist(), TRAIL, width=3)


def short_label(text: str) -> str:
    """A controller label without its directories."""
    return text.replace("\\", "/").rsplit("/", 1)[-1]


def _point(xy):
    from shapely.geometry import Point

    return Point(float(xy[0]), float(xy[1]))
