"""Status, help and cues drawn over the arena: what a viewer needs to read at a glance.

- :func:`draw_status`: chips in the title band: trial k of N, phase, step, reward this
  trial, running score, restocks (relocations) so far.
- :class:`RestockCue`: when site values change, a banner naming the change and rings
  pulsing on the stores whose value moved; it lasts a fixed number of *control steps*,
  so a recording shows it the same way whatever its frame rate.
- :func:`draw_help`: the key list overlay; :func:`draw_title_card` for recordings.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from .draw import Canvas, Viewport
from .palette import BLUISH_GREEN, DEFAULT, YELLOW, Color, with_alpha
from .playback import Playback

CHIP_BG = (58, 63, 74)
CUE_STEPS = 30  #: control steps a restock cue stays up (3 s at the usual 0.1 s period)

#: (keys, what they do) as shown in the help overlay; app.py binds the same keys.
KEY_HELP: list[tuple[str, str]] = [
    ("Space", "pause / resume"),
    ("Right  or  .", "one step (pauses)"),
    ("Up / Down  or  + / -", "faster / slower"),
    ("N  or  PgDn", "next trial"),
    ("P  or  PgUp", "previous trial (re-simulated, same seed)"),
    ("Home  or  Backspace", "restart from trial 1"),
    ("R", "range-finder rays on / off"),
    ("T", "trail on / off"),
    ("Tab", "network panel on / off"),
    ("click a connection", "chart its weight"),
    ("S", "save a screenshot (PNG)"),
    ("H  or  F1", "this help"),
    ("Esc  or  Q", "quit"),
]


def _fmt(v: float) -> str:
    return f"{v:+.2f}" if v else "0.00"


def status_items(pb: Playback) -> list[tuple[str, str]]:
    """(label, value) pairs of the status line."""
    return [
        ("trial", f"{pb.trial} of {pb.n_trials}"),
        ("phase", pb.phase_name),
        ("step", f"{pb.steps_in_trial} / {pb.step_limit}"),
        ("reward", _fmt(pb.trial_score)),
        ("score", _fmt(pb.fitness)),
        ("restocks", str(pb.relocations)),
    ]


def draw_status(canvas: Canvas, pb: Playback, right: float, top: float = 8, extra: list[tuple[str, str]] | None = None,
                left: float = 0) -> None:
    """Status chips right-aligned at ``right`` in the title band, kept right of ``left``:
    in a narrow picture the chips shrink, then the least needed (speed, step, phase) go."""
    items = status_items(pb) + (extra or [])
    size = 22

    def widths(items: list[tuple[str, str]], size: int) -> list[float]:
        return [max(canvas.text_size(v, size, True)[0], canvas.text_size(k.upper(), 11)[0]) + 20 for k, v in items]

    while sum(widths(items, size)) + 6 * len(items) > right - left:
        if size > 16:
            size = 16
        elif len(items) > 3:
            drop = next((k for k in ("speed", "step", "phase", "restocks") if any(n == k for n, _ in items)), None)
            if drop is None:
                break
            items = [it for it in items if it[0] != drop]
        else:
            break
    x = right
    for (label, value), w in zip(reversed(items), reversed(widths(items, size))):
        canvas.polygon([(x - w, top), (x, top), (x, top + 50), (x - w, top + 50)], fill=CHIP_BG)
        canvas.text((x - w / 2, top + 5), label.upper(), DEFAULT.text_muted_on_ground, size=11, anchor="top")
        color = DEFAULT.text_on_ground
        if label == "reward" and pb.trial_score > 0:
            color = BLUISH_GREEN_LIGHT
        canvas.text((x - w / 2, top + 45), value, color, size=size, anchor="bottom", bold=True)
        x -= w + 6


#: A lighter bluish green: the site hue itself is too dark on the chip background.
BLUISH_GREEN_LIGHT = (80, 214, 170)


@dataclass
class RestockCue:
    """The visible cue of a relocation (site values changing)."""

    start: int | None = None  #: step index when it happened
    sites: list[str] = field(default_factory=list)
    text: str = ""

    def trigger(self, step: int, before: dict[str, float], after: dict[str, float], after_trial: int) -> None:
        changed = [s for s in after if before.get(s) != after[s]]
        self.start = step
        self.sites = changed
        moves = ", ".join(f"{s} {before.get(s, 0):g} -> {after[s]:g}" for s in changed) or "no value changed"
        self.text = f"RESTOCK after trial {after_trial}:  {moves}"

    def clear(self) -> None:
        self.start = None

    def age(self, step: int) -> int | None:
        if self.start is None or not 0 <= step - self.start < CUE_STEPS:
            return None
        return step - self.start

    def draw(self, canvas: Canvas, viewport: Viewport, pb: Playback, step: int, y: float) -> None:
        age = self.age(step)
        if age is None:
            return
        fade = 1.0 - age / CUE_STEPS
        pulse = 0.5 + 0.5 * math.cos(age * 0.6)
        s = viewport.scale
        for site in pb.spec.sites:
            if site.name in self.sites:
                c = viewport.to_px(*site.position)
                r = site.radius * s * (1.15 + 0.35 * pulse)
                canvas.circle(c, r, outline=with_alpha(YELLOW, round(120 + 135 * fade)), width=5)
        area = viewport.area
        w = canvas.text_size(self.text, 20, True)[0] + 36
        cx = area[0] + area[2] / 2
        canvas.polygon([(cx - w / 2, y), (cx + w / 2, y), (cx + w / 2, y + 40), (cx - w / 2, y + 40)],
                       fill=with_alpha((20, 20, 24), round(235 * max(fade, 0.4))), outline=YELLOW, width=2)
        canvas.text((cx, y + 20), self.text, YELLOW, size=20, bold=True)


def draw_flash(canvas: Canvas, text: str, center: tuple[float, float]) -> None:
    """A short message (screenshot saved, paused ...) on a dark box."""
    canvas.text(center, text, DEFAULT.text_on_ground, size=18, background=(20, 20, 24, 220), bold=True)


def draw_help(canvas: Canvas, area: tuple[int, int, int, int]) -> None:
    """The key list, centred on ``area`` (left, top, width, height)."""
    left, top, w, h = area
    rows = KEY_HELP
    key_w = max(canvas.text_size(k, 18, True)[0] for k, _ in rows)
    what_w = max(canvas.text_size(v, 18)[0] for _, v in rows)
    line = 30
    bw, bh = key_w + what_w + 80, line * len(rows) + 80
    x0, y0 = left + (w - bw) / 2, top + (h - bh) / 2
    canvas.polygon([(x0, y0), (x0 + bw, y0), (x0 + bw, y0 + bh), (x0, y0 + bh)], fill=(20, 22, 27, 235),
                   outline=(120, 126, 138), width=2)
    canvas.text((x0 + bw / 2, y0 + 16), "keys", DEFAULT.text_on_ground, size=22, anchor="top", bold=True)
    y = y0 + 58
    for key, what in rows:
        canvas.text((x0 + 30 + key_w, y), key, YELLOW, size=18, anchor="right", bold=True)
        canvas.text((x0 + 50 + key_w, y), what, DEFAULT.text_on_ground, size=18, anchor="left")
        y += line


def draw_title_card(canvas: Canvas, title: str, lines: list[str], accent: Color = BLUISH_GREEN) -> None:
    """A full-frame title for the start of a recording."""
    w, h = canvas.size
    canvas.clear(DEFAULT.ground)
    canvas.polyline([(w * 0.2, h * 0.5 - 8), (w * 0.8, h * 0.5 - 8)], accent, width=4)
    canvas.text((w / 2, h * 0.5 - 24), title, DEFAULT.text_on_ground, size=max(28, h // 16), anchor="bottom", bold=True)
    y = h * 0.5 + 14
    for text in lines:
        canvas.text((w / 2, y), text, DEFAULT.text_muted_on_ground, size=max(16, h // 36), anchor="top")
        y += max(16, h // 36) * 1.5
