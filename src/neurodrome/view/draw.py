"""A small drawing interface shared by the preview, the live viewer and the recorder.

Scene code draws through :class:`Canvas`, a handful of primitives in *pixel*
coordinates; a :class:`Viewport` maps world metres (y up) to pixels (y down). Two back
ends: :class:`PygameCanvas` draws on a pygame ``Surface`` (off-screen works with no
display), :class:`RecordingCanvas` only records the calls, for tests. pygame is imported
lazily, inside the pygame back end, so importing this module never needs it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Protocol, Sequence

import numpy as np

from ..errors import MissingExtraError
from .palette import Color

PointPx = tuple[float, float]


@dataclass(frozen=True)
class Viewport:
    """World metres to pixels: uniform scale, y up in the world, y down on screen.

    ``bounds`` is the world rectangle (x0, y0, x1, y1) shown inside the pixel rectangle
    ``area`` (left, top, width, height), centred and fitted with ``margin`` pixels spare.
    """

    bounds: tuple[float, float, float, float]
    area: tuple[int, int, int, int]
    margin: int = 24

    @property
    def scale(self) -> float:
        """Pixels per metre."""
        x0, y0, x1, y1 = self.bounds
        w = max(self.area[2] - 2 * self.margin, 1)
        h = max(self.area[3] - 2 * self.margin, 1)
        return min(w / max(x1 - x0, 1e-9), h / max(y1 - y0, 1e-9))

    def _offset(self) -> tuple[float, float]:
        x0, y0, x1, y1 = self.bounds
        s = self.scale
        left, top, w, h = self.area
        ox = left + (w - (x1 - x0) * s) / 2.0 - x0 * s
        oy = top + (h + (y1 - y0) * s) / 2.0 + y0 * s
        return ox, oy

    def to_px(self, x: float, y: float) -> PointPx:
        ox, oy = self._offset()
        s = self.scale
        return (ox + x * s, oy - y * s)

    def to_px_array(self, points: np.ndarray) -> np.ndarray:
        """(N, 2) world points to (N, 2) pixel points."""
        ox, oy = self._offset()
        pts = np.asarray(points, dtype=float).reshape(-1, 2)
        return np.column_stack([ox + pts[:, 0] * self.scale, oy - pts[:, 1] * self.scale])

    def to_world(self, px: float, py: float) -> tuple[float, float]:
        ox, oy = self._offset()
        return ((px - ox) / self.scale, (oy - py) / self.scale)

    def length_px(self, metres: float) -> float:
        return metres * self.scale


class Canvas(Protocol):
    """Drawing primitives in pixel coordinates. ``fill``/``outline`` of ``None`` skip
    that part; colours with an alpha channel blend over what is already drawn."""

    @property
    def size(self) -> tuple[int, int]: ...

    def clear(self, color: Color) -> None: ...

    def polygon(self, points: Sequence[PointPx], fill: Color | None = None,
                outline: Color | None = None, width: float = 1) -> None: ...

    def polyline(self, points: Sequence[PointPx], color: Color, width: float = 1,
                 closed: bool = False) -> None: ...

    def segments(self, segments: np.ndarray, color: Color, width: float = 1) -> None:
        """(S, 4) rows of x0, y0, x1, y1 in pixels."""
        ...

    def circle(self, center: PointPx, radius: float, fill: Color | None = None,
               outline: Color | None = None, width: float = 1) -> None: ...

    def text(self, pos: PointPx, text: str, color: Color, size: int = 16,
             anchor: str = "center", background: Color | None = None, bold: bool = False) -> None:
        """``anchor`` is one of center, left, right, top, bottom, topleft, topright,
        bottomleft, bottomright: which point of the text box sits at ``pos``."""
        ...

    def text_size(self, text: str, size: int = 16, bold: bool = False) -> tuple[int, int]: ...


@dataclass
class RecordingCanvas:
    """Records every call as ``(name, arguments)``: drawing tests need no screen."""

    width: int = 800
    height: int = 600
    calls: list[tuple[str, dict[str, Any]]] = field(default_factory=list)

    @property
    def size(self) -> tuple[int, int]:
        return (self.width, self.height)

    def _rec(self, name: str, **kw: Any) -> None:
        self.calls.append((name, kw))

    def clear(self, color: Color) -> None:
        self._rec("clear", color=color)

    def polygon(self, points, fill=None, outline=None, width=1) -> None:
        self._rec("polygon", points=[tuple(p) for p in points], fill=fill, outline=outline, width=width)

    def polyline(self, points, color, width=1, closed=False) -> None:
        self._rec("polyline", points=[tuple(p) for p in points], color=color, width=width, closed=closed)

    def segments(self, segments, color, width=1) -> None:
        self._rec("segments", segments=np.asarray(segments, dtype=float).copy(), color=color, width=width)

    def circle(self, center, radius, fill=None, outline=None, width=1) -> None:
        self._rec("circle", center=tuple(center), radius=radius, fill=fill, outline=outline, width=width)

    def text(self, pos, text, color, size=16, anchor="center", background=None, bold=False) -> None:
        self._rec("text", pos=tuple(pos), text=text, color=color, size=size, anchor=anchor,
                  background=background, bold=bold)

    def text_size(self, text: str, size: int = 16, bold: bool = False) -> tuple[int, int]:
        return (int(0.55 * size * len(text)) + 1, size)

    def named(self, name: str) -> list[dict[str, Any]]:
        """The arguments of every recorded call of one primitive."""
        return [kw for n, kw in self.calls if n == name]


def _pygame():
    try:
        import os

        os.environ.setdefault("PYGAME_HIDE_SUPPORT_PROMPT", "1")
        import pygame
    except ImportError:
        raise MissingExtraError("view", "pygame", "Drawing worlds") from None
    if not pygame.font.get_init():
        pygame.font.init()
    return pygame


#: Text anchors to the pygame Rect attribute that takes a point.
_ANCHORS = {
    "center": "center", "left": "midleft", "right": "midright", "top": "midtop", "bottom": "midbottom",
    "topleft": "topleft", "topright": "topright", "bottomleft": "bottomleft", "bottomright": "bottomright",
}


class PygameCanvas:
    """Draws on a pygame ``Surface``; with ``surface=None`` makes an off-screen one.

    Thin lines are anti-aliased; for smooth filled shapes give ``supersample`` > 1: the
    surface is that many times the final ``size`` (callers scale their pixel lengths and
    font sizes to match) and :meth:`save` / :meth:`to_array` scale it down.
    """

    def __init__(self, size: tuple[int, int] | None = None, surface: Any = None, supersample: int = 1) -> None:
        pg = _pygame()
        self._pg = pg
        self.supersample = max(1, int(supersample))
        if surface is None:
            if size is None:
                raise ValueError("give a size or a surface")
            surface = pg.Surface((size[0] * self.supersample, size[1] * self.supersample))
        self.surface = surface
        self._fonts: dict[tuple[int, bool], Any] = {}
        self._alpha: Any = None  # one reusable transparent layer; see _layer

    @property
    def size(self) -> tuple[int, int]:
        return self.surface.get_size()

    def _layer(self, color: Color):
        """Where to draw a colour: the surface itself, or a transparent layer for alpha.

        The layer is kept and reused, and only the rectangle a shape touched is blended
        and cleared again: a fresh full-frame layer per translucent shape cost most of
        a live frame's time."""
        if len(color) == 4 and color[3] < 255:
            if self._alpha is None or self._alpha.get_size() != self.size:
                self._alpha = self._pg.Surface(self.size, self._pg.SRCALPHA)
            return self._alpha
        return None

    def _flush(self, layer, rect=None) -> None:
        if layer is None:
            return
        if rect is None:
            self.surface.blit(layer, (0, 0))
            layer.fill((0, 0, 0, 0))
            return
        rect = rect.inflate(4, 4).clip(layer.get_rect())
        self.surface.blit(layer, rect.topleft, area=rect)
        layer.fill((0, 0, 0, 0), rect)

    def clear(self, color: Color) -> None:
        self.surface.fill(color[:3])

    def polygon(self, points, fill=None, outline=None, width=1) -> None:
        pts = [(float(x), float(y)) for x, y in points]
        if len(pts) < 3:
            return
        if fill is not None:
            layer = self._layer(fill)
            self._flush(layer, self._pg.draw.polygon(layer or self.surface, fill, pts))
        if outline is not None:
            self.polyline(pts, outline, width, closed=True)

    def polyline(self, points, color, width=1, closed=False) -> None:
        pts = [(float(x), float(y)) for x, y in points]
        if len(pts) < 2:
            return
        layer = self._layer(color)
        target = layer or self.surface
        w = max(1, round(width))
        if w <= 1:
            rect = self._pg.draw.aalines(target, color, closed, pts)
        else:
            seq = pts + [pts[0]] if closed else pts
            rects = [self._thick_segment(target, color, a, b, w) for a, b in zip(seq[:-1], seq[1:])]
            rect = rects[0].unionall(rects[1:])
        self._flush(layer, rect)

    def _thick_segment(self, target, color, a: PointPx, b: PointPx, w: int):
        """Draws one wide segment; returns the rectangle it touched."""
        # pygame's wide lines leave gaps at joints; round ends close them.
        rect = self._pg.draw.line(target, color, a, b, w)
        r = w / 2.0
        if r >= 1.5:
            rect = rect.unionall([self._pg.draw.circle(target, color, a, r), self._pg.draw.circle(target, color, b, r)])
        return rect

    def segments(self, segments, color, width=1) -> None:
        segs = np.asarray(segments, dtype=float).reshape(-1, 4)
        layer = self._layer(color)
        target = layer or self.surface
        w = max(1, round(width))
        rects = []
        for x0, y0, x1, y1 in segs:
            if w <= 1:
                rects.append(self._pg.draw.aaline(target, color, (x0, y0), (x1, y1)))
            else:
                rects.append(self._thick_segment(target, color, (x0, y0), (x1, y1), w))
        self._flush(layer, rects[0].unionall(rects[1:]) if rects else None)

    def circle(self, center, radius, fill=None, outline=None, width=1) -> None:
        c = (float(center[0]), float(center[1]))
        if fill is not None:
            layer = self._layer(fill)
            self._flush(layer, self._pg.draw.circle(layer or self.surface, fill, c, radius))
        if outline is not None:
            layer = self._layer(outline)
            self._flush(layer, self._pg.draw.circle(layer or self.surface, outline, c, radius, max(1, round(width))))

    def _font(self, size: int, bold: bool):
        key = (size, bold)
        if key not in self._fonts:
            # The default font's nominal size runs small; 1.3 brings it to about ``size`` px
            # tall. It is a bold face already, so ``bold`` asks for a slightly larger size
            # rather than pygame's smeared synthetic bold.
            font = self._pg.font.Font(None, max(6, round(size * (1.4 if bold else 1.3))))
            self._fonts[key] = font
        return self._fonts[key]

    def text_size(self, text: str, size: int = 16, bold: bool = False) -> tuple[int, int]:
        return self._font(size, bold).size(text)

    def text(self, pos, text, color, size=16, anchor="center", background=None, bold=False) -> None:
        if anchor not in _ANCHORS:
            raise ValueError(f"unknown text anchor {anchor!r}")
        img = self._font(size, bold).render(text, True, color[:3])
        rect = img.get_rect(**{_ANCHORS[anchor]: (round(pos[0]), round(pos[1]))})
        if background is not None:
            pad = max(2, round(0.25 * size))
            box = rect.inflate(2 * pad, pad)
            layer = self._pg.Surface(box.size, self._pg.SRCALPHA)
            self._pg.draw.rect(layer, background, layer.get_rect(), border_radius=pad)
            self.surface.blit(layer, box.topleft)
        self.surface.blit(img, rect)

    def final_surface(self):
        """The surface at its final size (scaled down when drawn supersampled)."""
        if self.supersample == 1:
            return self.surface
        w, h = self.size
        return self._pg.transform.smoothscale(self.surface, (w // self.supersample, h // self.supersample))

    def save(self, path: str | Path) -> None:
        """Write a PNG (or any format pygame infers from the suffix)."""
        Path(path).parent.mkdir(parents=True, exist_ok=True)
        self._pg.image.save(self.final_surface(), str(path))

    def to_array(self) -> np.ndarray:
        """The final picture as an (H, W, 3) uint8 array."""
        surf = self.final_surface()
        w, h = surf.get_size()
        return np.frombuffer(self._pg.image.tobytes(surf, "RGB"), dtype=np.uint8).reshape(h, w, 3)


def arrow_head(tip: PointPx, tail: PointPx, length: float, half_angle_deg: float = 28.0) -> list[PointPx]:
    """The triangle of an arrow head at ``tip`` pointing away from ``tail`` (pixels)."""
    ang = math.atan2(tip[1] - tail[1], tip[0] - tail[0])
    a = math.radians(half_angle_deg)
    return [
        tip,
        (tip[0] - length * math.cos(ang - a), tip[1] - length * math.sin(ang - a)),
        (tip[0] - length * math.cos(ang + a), tip[1] - length * math.sin(ang + a)),
    ]
