"""Trial videos for talks: ``neurodrome record`` writes MP4 (H.264) or GIF, headless.

Frames are drawn off-screen by the same :class:`~neurodrome.view.show.Show` the live
viewer uses and piped to the ffmpeg that the ``imageio-ffmpeg`` wheel ships (extra
``video``). Timing is exact and independent of drawing speed: the recording covers the
control steps of trials A..B, T steps in all, and video frame k shows the instant
``floor(k * speed / (fps * control_period))`` steps after the start of trial A, for
every such instant before the end, and the last frame shows the end of trial B with its
final score: ``ceil(T * fps * control_period / speed) + 1`` frames of simulation,
preceded by ``round(title_s * fps)`` frames of title card when a title is given and
followed by ``round(hold_s * fps)`` copies of the last frame. Frame sizes are multiples of 16 (what H.264 encoders work in).
"""

from __future__ import annotations

import copy
import math
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TextIO

import numpy as np

from .errors import MissingExtraError, NeurodromeError, Problem
from .view.playback import Playback

FORMATS = {".mp4": "mp4", ".gif": "gif"}
TITLE_SECONDS = 2.5


@dataclass
class RecordResult:
    path: Path
    frames: int
    size: tuple[int, int]
    fps: float
    steps: int  #: control steps covered
    trials: tuple[int, int]
    score: float


def parse_size(text: str) -> tuple[tuple[int, int], str | None]:
    """``WxH`` to a size in multiples of 16 (rounded to the nearest, at least 16x16);
    returns the size and a note when it had to round."""
    try:
        w_text, h_text = text.lower().split("x")
        w, h = int(w_text), int(h_text)
    except ValueError:
        raise NeurodromeError(Problem("--size", "WIDTHxHEIGHT in pixels, such as 1280x720", text)) from None
    if not (64 <= w <= 7680 and 64 <= h <= 4320):
        raise NeurodromeError(Problem("--size", "a width of 64 to 7680 and a height of 64 to 4320 pixels", text))
    rw, rh = max(16, round(w / 16) * 16), max(16, round(h / 16) * 16)
    note = None if (rw, rh) == (w, h) else f"--size {w}x{h} rounded to {rw}x{rh} (video sizes are multiples of 16)"
    return (rw, rh), note


def parse_trials(text: str | None, n_trials: int) -> tuple[int, int]:
    """``A:B`` (inclusive, from 1), ``K``, ``A:`` or ``:B``; default all trials."""
    if text is None:
        return (1, n_trials)
    try:
        if ":" in text:
            a_text, b_text = text.split(":", 1)
            a = int(a_text) if a_text.strip() else 1
            b = int(b_text) if b_text.strip() else n_trials
        else:
            a = b = int(text)
    except ValueError:
        raise NeurodromeError(Problem("--trials", "A:B, the first and last trial to record (from 1)", text)) from None
    if not 1 <= a <= b <= n_trials:
        raise NeurodromeError(Problem("--trials", f"1 <= A <= B <= {n_trials} (the run's trials)", text))
    return (a, b)


def simulation_frames(steps: int, fps: float, control_period: float, speed: float) -> int:
    """Frames of simulation for ``steps`` control steps (see the module docstring)."""
    return math.ceil(steps * fps * control_period / speed - 1e-9) + 1


class _Encoder:
    """Frames to a file through imageio-ffmpeg's own ffmpeg."""

    def __init__(self, path: Path, size: tuple[int, int], fps: float, kind: str) -> None:
        try:
            import imageio_ffmpeg
        except ImportError:
            raise MissingExtraError("video", "imageio-ffmpeg", "Recording videos") from None
        path.parent.mkdir(parents=True, exist_ok=True)
        if kind == "mp4":
            options: dict[str, Any] = dict(codec="libx264", pix_fmt_out="yuv420p", quality=None,
                                           output_params=["-crf", "18", "-preset", "medium", "-movflags", "+faststart"])
        else:
            # one palette for the whole clip, from every frame: clean flat colours
            options = dict(codec="gif", pix_fmt_out=None, quality=None, output_params=[
                "-vf", "split[a][b];[a]palettegen=stats_mode=full[p];[b][p]paletteuse=dither=none"])
        self._gen = imageio_ffmpeg.write_frames(str(path), size, fps=fps, macro_block_size=16,
                                                ffmpeg_log_level="error", **options)
        self._gen.send(None)
        self.count = 0

    def add(self, frame: np.ndarray) -> None:
        self._gen.send(np.ascontiguousarray(frame))
        self.count += 1

    def close(self) -> None:
        self._gen.close()


class _Bar:
    def __init__(self, stream: TextIO, enabled: bool, label: str) -> None:
        self.stream, self.enabled, self.label = stream, enabled, label
        self._last = -1

    def __call__(self, fraction: float, text: str) -> None:
        if not self.enabled:
            return
        width = 30
        filled = int(width * min(max(fraction, 0.0), 1.0))
        if filled == self._last and fraction < 1:
            return
        self._last = filled
        self.stream.write(f"\r{self.label} [{'#' * filled}{'.' * (width - filled)}] {text}")
        if fraction >= 1:
            self.stream.write("\n")
        self.stream.flush()


def record(
    pb: Playback,
    out: str | Path,
    *,
    trials: tuple[int, int] | None = None,
    size: tuple[int, int] = (1280, 720),
    fps: float = 30.0,
    speed: float = 1.0,
    title: str | None = None,
    hold_s: float = 1.0,
    panel: bool = True,
    rays: bool = True,
    trail: bool = True,
    progress: TextIO | None = None,
) -> RecordResult:
    """Record trials ``trials`` (A, B) of ``pb`` to ``out`` (.mp4 or .gif)."""
    from .view.draw import PygameCanvas
    from .view.show import Show, ShowOptions, short_label

    path = Path(out)
    kind = FORMATS.get(path.suffix.lower())
    if kind is None:
        raise NeurodromeError(Problem("-o", "a file name ending in .mp4 or .gif", str(out)))
    if size[0] % 16 or size[1] % 16:
        raise NeurodromeError(Problem("size", "a width and height that are multiples of 16", f"{size[0]}x{size[1]}"))
    if not (math.isfinite(fps) and 1 <= fps <= 120):
        raise NeurodromeError(Problem("--fps", "a frame rate from 1 to 120", str(fps)))
    if not (math.isfinite(speed) and 1 / 64 <= speed <= 256):
        raise NeurodromeError(Problem("--speed", "a speed factor from 1/64 to 256", str(speed)))
    if not (math.isfinite(hold_s) and 0 <= hold_s <= 60):
        raise NeurodromeError(Problem("--hold", "seconds from 0 to 60", str(hold_s)))
    a, b = trials if trials is not None else (1, pb.n_trials)
    pb.goto_trial(a)
    show = Show(pb)
    opts = ShowOptions(rays=rays, trail=trail, panel=panel)
    canvas = PygameCanvas(size)
    bar = _Bar(progress or sys.stderr, progress is not None or sys.stderr.isatty(), f"recording {path.name}")
    encoder = _Encoder(path, size, fps, kind)
    per_frame = speed / (fps * pb.control_period)  # control steps per video frame
    label = short_label(pb.label)
    heading = title or pb.spec.name
    sub = f"{label}  \u00b7  seed {pb.seed}"
    last: np.ndarray | None = None
    try:
        if title:
            from .view.hud import draw_title_card

            lines = [f"{pb.spec.name}  \u00b7  {label}",
                     f"trials {a} to {b} of {pb.n_trials}" if a != b else f"trial {a} of {pb.n_trials}",
                     f"played at {speed:g}x" if speed != 1 else "real time"]
            draw_title_card(canvas, title, lines)
            card = canvas.to_array()
            for _ in range(round(TITLE_SECONDS * fps)):
                encoder.add(card)

        def frame(view: Playback) -> np.ndarray:
            show.pb = view
            show.draw(canvas, opts, title=heading, subtitle=sub)
            show.pb = pb
            return canvas.to_array()

        k = 0
        s = 0
        span = b - a + 1
        score = pb.fitness
        while True:
            while math.floor(k * per_frame + 1e-9) <= s:
                if math.floor(k * per_frame + 1e-9) == s:
                    last = frame(pb)
                    encoder.add(last)
                k += 1
            if pb.finished:  # a fault or a schedule that ended early
                score = pb.fitness
                if math.floor((k - 1) * per_frame + 1e-9) < s:
                    last = frame(pb)
                    encoder.add(last)
                break
            before = copy.copy(pb)
            events = show.step()
            s += 1
            ended = [d for kind_, d in events if kind_ == "trial-end" and int(d.get("trial", 0)) == b]
            if ended:
                # the simulator has already placed the robot for the next trial: show the
                # instant before, with the trial's final score
                final = before
                trial_score = float(ended[0].get("score", before.trial_score))
                final.fitness = before.fitness + (trial_score - before.trial_score)
                final.trial_score = trial_score
                final.steps_in_trial = before.steps_in_trial + 1
                final.finished = pb.finished
                last = frame(final)  # the end of trial B is always the last frame
                encoder.add(last)
                score = final.fitness
                break
            done = (pb.trial - a) + min(1.0, pb.steps_in_trial / max(1, pb.step_limit))
            bar(done / span, f"trial {pb.trial}/{b}  {encoder.count} frames")
        if last is not None:
            for _ in range(round(hold_s * fps)):
                encoder.add(last)
        bar(1.0, f"{encoder.count} frames")
    finally:
        encoder.close()
    return RecordResult(path, encoder.count, size, fps, s, (a, b), float(score))
