"""The ``neurodrome`` command: one entry point, one module of sub-commands per area.

Exit status: 0 success, 1 the task ran but failed (for example a check with errors in
``--strict`` mode is still 2: bad input), 2 bad input, 130 interrupted.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from .._version import __version__
from ..errors import MissingExtraError, NeurodromeError

#: Modules under ``neurodrome.cli`` that each define ``register(subparsers)``.
COMMAND_MODULES = ("world_cmds", "sim_cmds", "media_cmds", "evolve_cmds")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="neurodrome",
        description="Corridor mazes, batched robot physics and plastic neural controllers.",
    )
    parser.add_argument("--version", action="version", version=f"neurodrome {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMAND_MODULES:
        try:
            module = importlib.import_module(f"{__name__}.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"{__name__}.{name}":
                continue
            raise
        module.register(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help(sys.stderr)
        return 2
    try:
        return int(args.func(args) or 0)
    except NeurodromeError as exc:
        print(f"neurodrome {args.command}: error:\n{exc.render()}", file=sys.stderr)
        return 2
    except MissingExtraError as exc:
        print(f"neurodrome {args.command}: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
