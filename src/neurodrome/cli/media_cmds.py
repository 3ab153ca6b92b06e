"""Media commands: ``watch`` (live window) and ``record`` (MP4 / GIF, headless)."""

from __future__ import annotations

import argparse
import math
import sys

from ..errors import NeurodromeError, Problem

SOURCES_HELP = (
    "WORLD is a world file and CONTROLLER a bundled agent name, a network file or "
    "module:attribute, as for 'neurodrome evaluate'; or give --replay FILE (or a WORLD ending "
    "in .npz) to play a replay written by 'neurodrome evaluate --replay'."
)


def _common(p: argparse.ArgumentParser) -> None:
    p.add_argument("world", nargs="?", metavar="WORLD")
    p.add_argument("controller", nargs="?", metavar="CONTROLLER")
    p.add_argument("--replay", metavar="FILE", help="play a replay file (.npz) instead of simulating")
    p.add_argument("--agent", type=int, default=0, metavar="K",
                   help="live: the agent index (as in evaluate, default 0); replay: which recorded agent (row, default 0)")
    p.add_argument("--seed", type=int, default=0, help="evaluation seed (default 0): same seed, same run as evaluate")


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("watch", help="watch one agent live in a window",
                       description="Watch one agent in a window: arena, rays, trail, status, network panel. "
                                   + SOURCES_HELP + " Press H in the window for the keys.")
    _common(p)
    p.add_argument("--trials", type=int, help="override the world's number of trials")
    p.add_argument("--trial", type=int, metavar="K", help="start at trial K (earlier trials simulated unseen)")
    p.add_argument("--speed", type=float, default=1.0, help="simulated seconds per second (default 1)")
    p.add_argument("--size", default="1280x720", metavar="WxH", help="initial window size (default 1280x720)")
    p.set_defaults(func=cmd_watch)

    p = sub.add_parser("record", help="record trials to MP4 or GIF, headless",
                       description="Record trials of one agent to a video (MP4 H.264 or GIF, by the file's "
                                   "extension), without a display. " + SOURCES_HELP
                                   + " Needs the 'video' extra: pip install 'neurodrome[video]'.")
    _common(p)
    p.add_argument("-o", "--output", required=True, metavar="FILE", help="output video, .mp4 or .gif")
    p.add_argument("--trials", metavar="A:B", help="first and last trial to record, from 1 (default all)")
    p.add_argument("--run-trials", type=int, metavar="N", help="override the world's number of trials (live runs)")
    p.add_argument("--size", default="1280x720", metavar="WxH", help="frame size, rounded to multiples of 16 (default 1280x720)")
    p.add_argument("--fps", type=float, default=30.0, help="frames per second (default 30)")
    p.add_argument("--speed", type=float, default=1.0, help="simulated seconds per video second (default 1)")
    p.add_argument("--title", metavar="TEXT", help="open with a title card and use TEXT as the caption title")
    p.add_argument("--hold", type=float, default=1.0, metavar="SECONDS", help="hold the last frame this long (default 1)")
    p.add_argument("--no-panel", action="store_true", help="arena only, without the network panel")
    p.add_argument("--no-rays", action="store_true", help="do not draw the range-finder rays")
    p.add_argument("--no-trail", action="store_true", help="do not draw the trail")
    p.add_argument("--no-progress", action="store_true", help="no progress bar on standard error")
    p.set_defaults(func=cmd_record)


def _finite(name: str, value: float, low: float, high: float) -> None:
    if not (math.isfinite(value) and low <= value <= high):
        raise NeurodromeError(Problem(name, f"a number from {low:g} to {high:g}", str(value)))


def _open(args: argparse.Namespace, trials: int | None):
    from ..view.playback import open_playback

    if trials is not None and trials < 1:
        raise NeurodromeError(Problem("--trials", "a whole number of trials >= 1", str(trials)))
    return open_playback(args.world, args.controller, replay=args.replay, seed=args.seed, trials=trials, agent=args.agent)


def cmd_watch(args: argparse.Namespace) -> int:
    from ..record import parse_size
    from ..view import app

    _finite("--speed", args.speed, 1 / 8, 64)
    size, _ = parse_size(args.size)
    if not app.display_available():
        raise app.no_display()
    pb = _open(args, args.trials)
    if args.trial is not None and not 1 <= args.trial <= pb.n_trials:
        raise NeurodromeError(Problem("--trial", f"a trial from 1 to {pb.n_trials}", str(args.trial)))
    return app.main(pb, speed=args.speed, start_trial=args.trial, size=size)


def cmd_record(args: argparse.Namespace) -> int:
    from ..record import FORMATS, parse_size, parse_trials, record
    from pathlib import Path

    if Path(args.output).suffix.lower() not in FORMATS:
        raise NeurodromeError(Problem("-o", "a file name ending in .mp4 or .gif", args.output))
    _finite("--fps", args.fps, 1, 120)
    _finite("--speed", args.speed, 1 / 64, 256)
    _finite("--hold", args.hold, 0, 60)
    size, note = parse_size(args.size)
    if note:
        print(f"neurodrome record: {note}", file=sys.stderr)
    try:
        import imageio_ffmpeg  # noqa: F401  (fail before simulating anything)
    except ImportError:
        from ..errors import MissingExtraError

        raise MissingExtraError("video", "imageio-ffmpeg", "Recording videos") from None
    pb = _open(args, args.run_trials)
    trials = parse_trials(args.trials, pb.n_trials)
    result = record(pb, args.output, trials=trials, size=size, fps=args.fps, speed=args.speed, title=args.title,
                    hold_s=args.hold, panel=not args.no_panel, rays=not args.no_rays, trail=not args.no_trail,
                    progress=None if not args.no_progress else _Null())
    print(f"{result.path}: {result.frames} frames, {result.size[0]}x{result.size[1]} at {result.fps:g} fps, "
          f"trials {result.trials[0]}-{result.trials[1]}, score {result.score:+.2f}", file=sys.stderr)
    return 0


class _Null:
    """A stream that swallows the progress bar (--no-progress)."""

    def write(self, _text: str) -> int:
        return 0

    def flush(self) -> None:
        pass

    def isatty(self) -> bool:
        return False
