"""The network panel: neurons by role, connections by sign and size, learning over time.

Columns left to right: inputs (and bias), modulatory neurons, hidden neurons, outputs.
Standard neurons are discs, modulatory neurons diamonds; a neuron's fill runs from orange
(negative output) through grey (0) to sky blue (positive), the same two hues as
connection signs, so "blue excites, orange inhibits" reads everywhere. Line width grows
with |weight|; connections from modulatory neurons are dashed; plastic connections sit
on a yellow band and are redrawn every frame from the live weights. The selected
connection (a click picks one) is outlined in white and charted below: its weight, and
the modulation M_i = tanh(m_i / 2) reaching its target, with reward and trial ticks.
"""

from __future__ import annotations

import math
from collections import deque
from dataclasses import dataclass

import numpy as np

from ..control.spec import NetworkSpec
from .draw import Canvas
from .palette import BLUISH_GREEN, DEFAULT, ORANGE, REDDISH_PURPLE, SKY_BLUE, YELLOW, Color
from .playback import NetState

NEUTRAL = (120, 126, 138)
PANEL_BG = (34, 37, 44)
PANEL_EDGE = (70, 76, 88)
SELECTED = (255, 255, 255)
HISTORY = 400  #: control steps kept for the strip chart


def blend(color: Color, alpha: float, under: Color = PANEL_BG) -> Color:
    """``color`` at opacity ``alpha`` (0..1) over ``under``, as an opaque colour: the
    panel draws no translucent layers, which cost a full-frame blit each."""
    return tuple(round(under[k] + (color[k] - under[k]) * alpha) for k in range(3))  # type: ignore[return-value]


def value_color(v: float) -> Color:
    """Orange for -1, grey for 0, sky blue for +1 (clipped)."""
    if not math.isfinite(v):
        return (255, 0, 255)
    t = max(-1.0, min(1.0, float(v)))
    end = SKY_BLUE if t >= 0 else ORANGE
    a = abs(t)
    return tuple(round(NEUTRAL[k] + (end[k] - NEUTRAL[k]) * a) for k in range(3))  # type: ignore[return-value]


@dataclass
class Neuron:
    index: int
    id: str
    column: str  #: input, modulatory, hidden, output
    modulatory: bool


@dataclass
class Link:
    source: int
    target: int
    plastic: bool
    modulatory: bool  #: from a modulatory neuron
    bounds: tuple[float, float] | None


def describe(spec: NetworkSpec | None, neuron_ids: list[str], weights: np.ndarray | None) -> tuple[list[Neuron], list[Link]]:
    """Neurons and connections to draw. Without the network file (a replay whose file is
    gone) roles are guessed from the weights: a neuron nothing feeds is an input."""
    if spec is not None:
        kinds = {n.id: n for n in spec.neurons}
        neurons = []
        for k, nid in enumerate(neuron_ids):
            n = kinds[nid]
            col = "input" if n.role in ("input", "bias") else "output" if n.role == "output" else (
                "modulatory" if n.kind == "modulatory" else "hidden")
            neurons.append(Neuron(k, nid, col, n.kind == "modulatory"))
        index = {nid: k for k, nid in enumerate(neuron_ids)}
        links = [Link(index[c.source], index[c.target], c.plastic, kinds[c.source].kind == "modulatory",
                      spec.bounds_of(c) if c.plastic else None) for c in spec.connections]
        return neurons, links
    n = len(neuron_ids)
    w = weights if weights is not None else np.zeros((n, n))
    fed = (w != 0).any(axis=0)
    neurons = [Neuron(k, nid, "hidden" if fed[k] else "input", False) for k, nid in enumerate(neuron_ids)]
    links = [Link(j, i, False, False, None) for j, i in zip(*np.nonzero(w))]
    return neurons, links


class NetPanel:
    """Layout, live drawing, picking and the strip chart of one agent's network."""

    def __init__(self, spec: NetworkSpec | None, neuron_ids: list[str], first: NetState | None) -> None:
        self.neurons, self.links = describe(spec, neuron_ids, first.weights if first is not None else None)
        self.modulated = {l.target for l in self.links if l.modulatory}
        plastic = [k for k, l in enumerate(self.links) if l.plastic]
        preferred = [k for k in plastic if self.links[k].target in self.modulated]
        self.selected: int | None = (preferred or plastic or [None])[0] if self.links else None
        self.history: deque[tuple[int, float, float]] = deque(maxlen=HISTORY)  # step, M, weight
        self.ticks: deque[tuple[int, str]] = deque(maxlen=64)  # step, kind (site / trial)
        self._pos: dict[int, tuple[float, float]] = {}
        self._rect: tuple[int, int, int, int] | None = None
        self._radius = 8.0

    # -- time ------------------------------------------------------------------------
    def chart_target(self) -> int | None:
        """The neuron whose modulation is charted: the selected connection's target if it
        is modulated, else the first modulated neuron."""
        if self.selected is not None and self.links[self.selected].target in self.modulated:
            return self.links[self.selected].target
        return min(self.modulated) if self.modulated else None

    def observe(self, step: int, net: NetState | None, events: list[tuple[str, dict]]) -> None:
        """Add one instant to the chart (call after every control step)."""
        for kind, _ in events:
            if kind in ("site", "trial-start"):
                self.ticks.append((step, kind))
        if net is None:
            return
        t = self.chart_target()
        mod = math.tanh(float(net.modulation[t]) / 2) if t is not None else float("nan")
        w = float(net.weights[self.links[self.selected].source, self.links[self.selected].target]) if self.selected is not None else float("nan")
        self.history.append((step, mod, w))

    def clear_history(self) -> None:
        self.history.clear()
        self.ticks.clear()

    # -- layout -------------------------------------------------------------------------
    def _layout(self, rect: tuple[int, int, int, int], canvas: Canvas) -> None:
        if rect == self._rect:
            return
        self._rect = rect
        x, y, w, h = rect
        columns = [c for c in ("input", "modulatory", "hidden", "output") if any(n.column == c for n in self.neurons)]
        label_w = max([canvas.text_size(n.id, 12)[0] for n in self.neurons if n.column == "input"] + [0]) + 14
        out_w = max([canvas.text_size(n.id, 12)[0] for n in self.neurons if n.column == "output"] + [0]) + 14
        left, right = x + label_w, x + w - out_w
        top, bottom = y + 52, y + h - 26
        most = max([sum(1 for n in self.neurons if n.column == c) for c in columns] + [1])
        gap = (bottom - top) / max(most, 1)
        self._radius = max(4.0, min(11.0, 0.36 * gap))
        self._pos = {}
        self._columns = []
        spacing = (right - left) / max(len(columns) - 1, 1)
        for ci, col in enumerate(columns):
            cx = left + (right - left) * (ci / max(len(columns) - 1, 1) if len(columns) > 1 else 0.5)
            members = [n for n in self.neurons if n.column == col]
            self._columns.append((col, cx))
            if col in ("input", "output"):  # labelled at the side: one row per gap
                span = gap * len(members)
                y0 = top + (bottom - top - span) / 2 + gap / 2
                for r, n in enumerate(members):
                    self._pos[n.index] = (cx, y0 + r * gap)
                continue
            # labelled below the node: rows need room for the label, and a long column wraps
            # into staggered sub-columns instead of stacking labels on the next node
            label_w = max(canvas.text_size(n.id, 12)[0] for n in members)
            pitch = max(gap, 2.9 * self._radius + 16)
            rows = max(1, int((bottom - top) // pitch))
            subs = -(-len(members) // rows)
            rows = -(-len(members) // subs)
            pitch = min((bottom - top) / rows, 3 * pitch)
            width = min(0.8 * spacing, (subs - 1) * (label_w + 6))
            y0 = top + (bottom - top - pitch * rows) / 2 + pitch / 2
            for r, n in enumerate(members):
                sub, row = r % subs, r // subs
                sx = cx + (width * (sub / (subs - 1) - 0.5) if subs > 1 else 0.0)
                self._pos[n.index] = (sx, y0 + row * pitch + (pitch / 2 if subs > 1 and sub % 2 else 0.0))

    def _curve(self, link: Link) -> list[tuple[float, float]]:
        a, b = self._pos[link.source], self._pos[link.target]
        if link.source == link.target:
            r = self._radius
            return [(a[0] + r * 0.7 + 1.3 * r * (1 + math.cos(t)) * 0.5, a[1] - 1.3 * r * math.sin(t))
                    for t in np.linspace(0, 2 * math.pi, 16)]
        if b[0] > a[0] + 1:
            return [a, b]
        # backward or same-column connections bow outwards so they do not hide others
        mx, my = (a[0] + b[0]) / 2, (a[1] + b[1]) / 2
        dx, dy = b[0] - a[0], b[1] - a[1]
        length = math.hypot(dx, dy) or 1.0
        bow = 0.25 * length + 3 * self._radius
        cx, cy = mx - dy / length * bow, my + dx / length * bow
        return [((1 - t) ** 2 * a[0] + 2 * (1 - t) * t * cx + t * t * b[0],
                 (1 - t) ** 2 * a[1] + 2 * (1 - t) * t * cy + t * t * b[1]) for t in np.linspace(0, 1, 14)]

    def pick(self, px: float, py: float, tolerance: float = 7.0) -> int | None:
        """Select the connection nearest a click (within ``tolerance`` px); returns it."""
        if not self._pos:
            return None
        best, best_d = None, tolerance
        for k, link in enumerate(self.links):
            pts = self._curve(link)
            for (x0, y0), (x1, y1) in zip(pts[:-1], pts[1:]):
                d = _point_segment(px, py, x0, y0, x1, y1)
                if d < best_d:
                    best, best_d = k, d
        if best is not None and best != self.selected:
            self.selected = best
            self.history.clear()
        return best

    def link_midpoint(self, k: int) -> tuple[float, float]:
        """Pixel point on connection ``k`` (after a draw), for tests and tooltips."""
        pts = self._curve(self.links[k])
        if len(pts) == 2:
            return ((pts[0][0] + pts[1][0]) / 2, (pts[0][1] + pts[1][1]) / 2)
        return pts[len(pts) // 2]

    # -- drawing ------------------------------------------------------------------------
    def draw(self, canvas: Canvas, rect: tuple[int, int, int, int], net: NetState | None, title: str = "network") -> None:
        x, y, w, h = rect
        canvas.polygon([(x, y), (x + w, y), (x + w, y + h), (x, y + h)], fill=PANEL_BG, outline=PANEL_EDGE)
        if not self.neurons or net is None:
            canvas.text((x + w / 2, y + h / 2), "no network to show (scripted agent)", DEFAULT.text_muted_on_ground, size=16)
            return
        chart_h = min(230, round(0.36 * h))
        net_rect = (x + 10, y + 4, w - 20, h - chart_h - 12)
        self._layout(net_rect, canvas)
        canvas.text((x + 12, y + 8), title, DEFAULT.text_on_ground, size=16, anchor="topleft", bold=True)
        for col, cx in self._columns:
            canvas.text((cx, y + 48), col, DEFAULT.text_muted_on_ground, size=12, anchor="bottom")
        weights = net.weights
        wmax = max(1e-9, float(np.abs(weights).max()))
        order = sorted(range(len(self.links)), key=lambda k: (self.links[k].plastic, k == self.selected))
        for k in order:
            link = self.links[k]
            wv = float(weights[link.source, link.target])
            pts = self._curve(link)
            width = 1.0 + 4.0 * min(1.0, abs(wv) / wmax)
            if k == self.selected:
                canvas.polyline(pts, SELECTED, width=width + 6)
            if link.plastic:
                canvas.polyline(pts, blend(YELLOW, 0.6), width=width + 4)
            color = SKY_BLUE if wv >= 0 else ORANGE
            alpha = round(90 + 165 * min(1.0, abs(wv) / wmax))
            if link.modulatory:
                _dashed(canvas, pts, REDDISH_PURPLE, width)
            else:
                canvas.polyline(pts, blend(color, alpha / 255), width=width)
        r = self._radius
        out = net.outputs
        for n in self.neurons:
            cx, cy = self._pos[n.index]
            fill = value_color(float(out[n.index]))
            edge = REDDISH_PURPLE if n.modulatory else (230, 232, 236)
            if n.modulatory:
                d = r * 1.45
                canvas.polygon([(cx, cy - d), (cx + d, cy), (cx, cy + d), (cx - d, cy)], fill=fill, outline=edge, width=3)
            else:
                canvas.circle((cx, cy), r, fill=fill, outline=edge, width=1.5)
            if n.column == "input":
                canvas.text((cx - r - 5, cy), n.id, DEFAULT.text_on_ground, size=12, anchor="right")
            elif n.column == "output":
                canvas.text((cx + r + 5, cy), n.id, DEFAULT.text_on_ground, size=12, anchor="left")
            else:
                canvas.text((cx, cy + r * 1.5 + 2), n.id, DEFAULT.text_on_ground, size=12, anchor="top")
        self._draw_key(canvas, x + 12, y + h - chart_h - 18)
        self._draw_chart(canvas, (x + 10, y + h - chart_h - 4, w - 20, chart_h), net)

    def _draw_key(self, canvas: Canvas, x: float, y: float) -> None:
        """One line: what the line colours, the band and the shapes mean."""
        muted = DEFAULT.text_muted_on_ground
        for text, color, style in (("excites", SKY_BLUE, "line"), ("inhibits", ORANGE, "line"),
                                   ("plastic", blend(YELLOW, 0.6), "band"), ("modulatory", REDDISH_PURPLE, "dash"),
                                   ("modulatory neuron", REDDISH_PURPLE, "diamond")):
            if style == "band":
                canvas.polyline([(x, y), (x + 18, y)], color, width=7)
                canvas.polyline([(x, y), (x + 18, y)], SKY_BLUE, width=2)
            elif style == "dash":
                _dashed(canvas, [(x, y), (x + 18, y)], color, 2, dash=4)
            elif style == "diamond":
                canvas.polygon([(x + 9, y - 6), (x + 15, y), (x + 9, y + 6), (x + 3, y)], fill=NEUTRAL, outline=color, width=2)
            else:
                canvas.polyline([(x, y), (x + 18, y)], color, width=3)
            canvas.text((x + 22, y), text, muted, size=11, anchor="left")
            x += 22 + canvas.text_size(text, 11)[0] + 12

    def _draw_chart(self, canvas: Canvas, rect: tuple[int, int, int, int], net: NetState) -> None:
        x, y, w, h = rect
        muted, text = DEFAULT.text_muted_on_ground, DEFAULT.text_on_ground
        if self.selected is None:
            canvas.text((x + w / 2, y + h / 2), "no connections", muted, size=14)
            return
        link = self.links[self.selected]
        src, dst = self.neurons[link.source].id, self.neurons[link.target].id
        wv = float(net.weights[link.source, link.target])
        kind = "plastic" if link.plastic else "fixed"
        canvas.text((x, y), f"{src} -> {dst}  ({kind})  w = {wv:+.3f}", YELLOW if link.plastic else text,
                    size=14, anchor="topleft", bold=True)
        top = y + 22
        lane_h = (h - 22 - 18) / 2
        target = self.chart_target()
        lanes = [
            ("modulation M", REDDISH_PURPLE, 1, (-1.0, 1.0),
             None if target is None else f"at {self.neurons[target].id}"),
            ("weight", YELLOW, 2, self._weight_range(link), None),
        ]
        steps = [s for s, _, _ in self.history]
        if steps:
            s1 = max(steps[-1], steps[0] + HISTORY - 1)
            s0 = s1 - HISTORY + 1
        else:
            s0, s1 = 0, HISTORY - 1
        sx = lambda s: x + 44 + (w - 48) * (s - s0) / max(1, s1 - s0)  # noqa: E731
        for li, (name, color, col, (lo, hi), note) in enumerate(lanes):
            ly = top + li * (lane_h + 9)
            canvas.polygon([(x + 44, ly), (x + w - 4, ly), (x + w - 4, ly + lane_h), (x + 44, ly + lane_h)],
                           fill=(26, 28, 33), outline=PANEL_EDGE)
            canvas.text((x + 40, ly), f"{hi:+.1f}", muted, size=11, anchor="topright")
            canvas.text((x + 40, ly + lane_h), f"{lo:+.1f}", muted, size=11, anchor="bottomright")
            label = name if note is None else f"{name} {note}"
            canvas.text((x + 48, ly + 2), label, color, size=12, anchor="topleft")
            if lo < 0 < hi:
                zy = ly + lane_h * (hi - 0) / (hi - lo)
                canvas.polyline([(x + 44, zy), (x + w - 4, zy)], PANEL_EDGE, width=1)
            for s, kind in self.ticks:
                if s0 <= s <= s1:
                    tx = sx(s)
                    tick_color = BLUISH_GREEN if kind == "site" else muted
                    canvas.polyline([(tx, ly), (tx, ly + lane_h)], tick_color, width=2 if kind == "site" else 1)
            pts = []
            for rec in self.history:
                v = rec[col]
                if math.isfinite(v):
                    vy = ly + lane_h * (hi - min(max(v, lo), hi)) / (hi - lo)
                    pts.append((sx(rec[0]), vy))
            if len(pts) >= 2:
                canvas.polyline(pts, color, width=2)
        ky = top + 2 * lane_h + 11
        canvas.polyline([(x + 48, ky + 6), (x + 48, ky + 16)], BLUISH_GREEN, width=2)
        canvas.text((x + 54, ky + 11), "reward", muted, size=11, anchor="left")
        canvas.polyline([(x + 110, ky + 6), (x + 110, ky + 16)], muted, width=1)
        canvas.text((x + 116, ky + 11), "trial start", muted, size=11, anchor="left")
        canvas.text((x + w - 4, ky + 11), f"last {HISTORY} steps  \u00b7  click a connection to chart it", muted, size=11, anchor="right")

    def _weight_range(self, link: Link) -> tuple[float, float]:
        if link.bounds is not None:
            return (float(link.bounds[0]), float(link.bounds[1]))
        vals = [v for _, _, v in self.history if math.isfinite(v)]
        if not vals:
            return (-1.0, 1.0)
        m = max(1.0, max(abs(v) for v in vals))
        return (-m, m)


def _point_segment(px: float, py: float, x0: float, y0: float, x1: float, y1: float) -> float:
    dx, dy = x1 - x0, y1 - y0
    L = dx * dx + dy * dy
    t = 0.0 if L == 0 else max(0.0, min(1.0, ((px - x0) * dx + (py - y0) * dy) / L))
    return math.hypot(px - (x0 + t * dx), py - (y0 + t * dy))


def _dashed(canvas: Canvas, pts: list[tuple[float, float]], color: Color, width: float, dash: float = 7.0) -> None:
    """A dashed polyline: dashes of ``dash`` px with equal gaps."""
    segs = []
    on, left = True, dash
    for (x0, y0), (x1, y1) in zip(pts[:-1], pts[1:]):
        length = math.hypot(x1 - x0, y1 - y0)
        pos = 0.0
        while pos < length:
            step = min(left, length - pos)
            if on:
                a, b = pos / length, (pos + step) / length
                segs.append((x0 + (x1 - x0) * a, y0 + (y1 - y0) * a, x0 + (x1 - x0) * b, y0 + (y1 - y0) * b))
            pos += step
            left -= step
            if left <= 1e-9:
                on, left = not on, dash
    if segs:
        canvas.segments(np.array(segs), color, width)
