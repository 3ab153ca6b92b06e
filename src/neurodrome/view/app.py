"""The live viewer behind ``neurodrome watch``: a resizable pygame window on one agent.

The loop of one frame is: events -> simulation -> draw -> flip -> tick. Simulation time
is kept apart from the frame rate: every frame adds ``elapsed * speed`` seconds to an
accumulator and takes as many fixed control steps as fit in it, so a run looks the same
at any frame rate and the simulation is exactly the headless one (same seed, same
result as ``evaluate``). Going back a trial re-simulates from the start.

Nothing happens at import; :func:`main` opens the window. Keys are listed in
:data:`neurodrome.view.hud.KEY_HELP` and shown with H.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import Any, Callable

from ..errors import NeurodromeError, Problem
from .draw import PygameCanvas, _pygame
from .playback import Playback
from .show import Show, ShowOptions

SPEED_MIN, SPEED_MAX = 1 / 8, 64.0
MAX_STEPS_PER_FRAME = 400  #: beyond this the viewer falls behind rather than freezing
FLASH_FRAMES = 90


class NoDisplayError(NeurodromeError):
    """The live viewer needs a graphical display."""


def display_available() -> bool:
    """True when SDL can open a window: a chosen video driver, Windows or macOS, or an
    X11 / Wayland display."""
    if os.environ.get("SDL_VIDEODRIVER"):
        return True
    if sys.platform in ("win32", "darwin"):
        return True
    return bool(os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))


def no_display(found: str = "no DISPLAY or WAYLAND_DISPLAY") -> NoDisplayError:
    return NoDisplayError(Problem(
        "display",
        "a graphical display for the live viewer; without one, make a video instead: "
        "neurodrome record WORLD CONTROLLER -o trial.mp4",
        found,
    ))


def speed_text(speed: float) -> str:
    return f"{speed:g}x" if speed >= 1 else f"1/{round(1 / speed)}x"


class Viewer:
    """Viewer state and input handling; :meth:`run` is the window loop."""

    def __init__(self, pb: Playback, *, speed: float = 1.0, screenshot_dir: str | Path = ".") -> None:
        self.pb = pb
        self.show = Show(pb)
        self.opts = ShowOptions()
        self.paused = False
        self.speed = min(max(float(speed), SPEED_MIN), SPEED_MAX)
        self.screenshot_dir = Path(screenshot_dir)
        self.screenshots: list[Path] = []
        self.frames = 0
        self.quit = False
        self._acc = 0.0
        self._flash: tuple[str, int] | None = None
        self._surface: Any = None

    # -- input --------------------------------------------------------------------------
    def handle_event(self, ev: Any) -> None:
        pg = _pygame()
        if ev.type == pg.QUIT:
            self.quit = True
        elif ev.type == pg.KEYDOWN:
            self.handle_key(ev.key, getattr(ev, "unicode", ""))
        elif ev.type == pg.MOUSEBUTTONDOWN and ev.button == 1:
            self.click(*ev.pos)

    def handle_key(self, key: int, char: str = "") -> None:
        pg = _pygame()
        if key in (pg.K_ESCAPE, pg.K_q):
            self.quit = True
        elif key == pg.K_SPACE:
            self.paused = not self.paused
            self.flash("paused" if self.paused else "running")
        elif key in (pg.K_RIGHT, pg.K_PERIOD):
            self.paused = True
            self.step_once()
        elif key in (pg.K_UP, pg.K_PLUS, pg.K_EQUALS, pg.K_KP_PLUS) or char == "+":
            self.set_speed(self.speed * 2)
        elif key in (pg.K_DOWN, pg.K_MINUS, pg.K_KP_MINUS) or char == "-":
            self.set_speed(self.speed / 2)
        elif key in (pg.K_n, pg.K_PAGEDOWN):
            self.next_trial()
        elif key in (pg.K_p, pg.K_PAGEUP):
            self.previous_trial()
        elif key in (pg.K_HOME, pg.K_BACKSPACE):
            self.restart()
        elif key == pg.K_r:
            self.opts.rays = not self.opts.rays
        elif key == pg.K_t:
            self.opts.trail = not self.opts.trail
        elif key == pg.K_TAB:
            self.opts.panel = not self.opts.panel
        elif key == pg.K_s:
            self.screenshot()
        elif key in (pg.K_h, pg.K_F1) or char == "?":
            self.opts.help = not self.opts.help

    def click(self, x: float, y: float) -> None:
        rect = self.show.panel_rect
        if self.show.panel is None or rect is None or not self.opts.panel:
            return
        if rect[0] <= x <= rect[0] + rect[2] and rect[1] <= y <= rect[1] + rect[3]:
            if self.show.panel.pick(x, y) is not None:
                self.show.panel.observe(self.pb.step_index, self.pb.net, [])

    # -- actions ------------------------------------------------------------------------
    def flash(self, text: str) -> None:
        self._flash = (text, self.frames + FLASH_FRAMES)

    def set_speed(self, speed: float) -> None:
        self.speed = min(max(speed, SPEED_MIN), SPEED_MAX)
        self.flash(f"speed {speed_text(self.speed)}")

    def step_once(self) -> None:
        if not self.pb.finished:
            self.show.step()

    def next_trial(self) -> None:
        if self.pb.trial >= self.pb.n_trials:
            self.pb.run_to_end()
        else:
            self.pb.goto_trial(self.pb.trial + 1)
        self.show.jumped()
        self._acc = 0.0
        self.flash(f"trial {self.pb.trial}")

    def previous_trial(self) -> None:
        self.pb.goto_trial(max(1, self.pb.trial - 1))
        self.show.jumped()
        self._acc = 0.0
        self.flash(f"trial {self.pb.trial}")

    def restart(self) -> None:
        self.pb.restart()
        self.show.jumped()
        self._acc = 0.0
        self.flash("restarted")

    def advance(self, dt: float) -> int:
        """Run the simulation for ``dt`` seconds of wall time at the current speed;
        returns the number of control steps taken."""
        if self.paused or self.pb.finished:
            self._acc = 0.0
            return 0
        period = self.pb.control_period
        self._acc += dt * self.speed
        n = int(self._acc / period + 1e-9)
        self._acc -= n * period
        if n > MAX_STEPS_PER_FRAME:
            n, self._acc = MAX_STEPS_PER_FRAME, 0.0
        taken = 0
        for _ in range(n):
            if self.pb.finished:
                break
            self.show.step()
            taken += 1
        return taken

    def screenshot(self) -> Path | None:
        if self._surface is None:
            return None
        pg = _pygame()
        name = f"{self.pb.spec.name}-trial{self.pb.trial}-step{self.pb.step_index}"
        path = self.screenshot_dir / f"{name}.png"
        k = 2
        while path.exists():
            path = self.screenshot_dir / f"{name}-{k}.png"
            k += 1
        self.screenshot_dir.mkdir(parents=True, exist_ok=True)
        pg.image.save(self._surface, str(path))
        self.screenshots.append(path)
        self.flash(f"saved {path.name}")
        return path

    # -- drawing and the loop ------------------------------------------------------------
    def render(self, canvas: Any) -> None:
        flash = None
        if self._flash is not None and self.frames < self._flash[1]:
            flash = self._flash[0]
        if self.pb.finished:
            flash = f"finished: score {self.pb.fitness:+.2f}   (P previous trial, Home restart, H keys)"
        self.opts.flash = flash
        self.opts.speed_text = ("paused" if self.paused else speed_text(self.speed))
        self.show.draw(canvas, self.opts)

    def run(self, *, size: tuple[int, int] = (1280, 720), max_frames: int | None = None, fixed_dt: float | None = None,
            fps: int = 60, on_frame: Callable[["Viewer"], None] | None = None) -> None:
        """Open the window and loop until quit (or ``max_frames``). ``fixed_dt`` replaces
        the measured frame time (tests); ``on_frame`` runs before each frame's events."""
        if not display_available():
            raise no_display()
        pg = _pygame()
        try:
            pg.display.init()
            screen = pg.display.set_mode(size, pg.RESIZABLE)
        except pg.error as exc:
            raise no_display(str(exc)) from None
        pg.display.set_caption(f"neurodrome watch \u00b7 {self.pb.spec.name} \u00b7 {self.pb.label}")
        clock = pg.time.Clock()
        canvas = None
        dt = 0.0
        try:
            while not self.quit and (max_frames is None or self.frames < max_frames):
                if on_frame is not None:
                    on_frame(self)
                for ev in pg.event.get():
                    self.handle_event(ev)
                self.advance(dt)
                screen = pg.display.get_surface()
                if canvas is None or screen is not self._surface:  # first frame or resized
                    canvas = PygameCanvas(surface=screen)  # keeps its fonts across frames
                self._surface = screen
                self.render(canvas)
                pg.display.flip()
                # a fixed frame time (tests, scripted runs) need not wait for the wall clock
                measured = clock.tick(fps if fixed_dt is None else 0) / 1000.0
                dt = fixed_dt if fixed_dt is not None else min(measured, 0.25)
                self.frames += 1
        finally:
            pg.display.quit()


def main(pb: Playback, *, speed: float = 1.0, start_trial: int | None = None, size: tuple[int, int] = (1280, 720)) -> int:
    """Watch ``pb`` in a window; returns an exit status."""
    if not display_available():
        raise no_display()
    viewer = Viewer(pb, speed=speed)
    if start_trial is not None and start_trial > 1:
        pb.goto_trial(start_trial)
        viewer.show.jumped()
    viewer.run(size=size)
    for path in viewer.screenshots:
        print(f"screenshot written to {path}", file=sys.stderr)
    return 0
