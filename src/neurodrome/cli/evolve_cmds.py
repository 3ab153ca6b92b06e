"""Sub-commands of the evolution area: ``report`` (and, later, ``evolve``).

Each command is a pair: ``_add_<name>(subparsers)`` builds its parser and sets ``func``;
``_run_<name>(args)`` does the work and returns the exit status. :func:`register` calls
every ``_add_`` in :data:`COMMANDS`, so a new command is one more pair and one more entry.
Heavy modules are imported inside ``_run_`` so ``neurodrome --help`` stays fast.
"""

from __future__ import annotations

import argparse
import json
from typing import Callable


def _generation_list(text: str) -> list[int]:
    """Parse ``"10,50"`` into ``[10, 50]``; anything else is a usage error."""
    values = []
    for part in text.split(","):
        part = part.strip()
        if not part.isdigit():
            raise argparse.ArgumentTypeError(f"expected generation numbers like 10,50 (found {text!r})")
        values.append(int(part))
    return values


def _add_report(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "report",
        help="compare treatments over repeated runs: plot, tables, rank-sum tests",
        description=(
            "Read run directories written by the evolver (run.json + log.jsonl), group them by "
            "treatment, and write a plot of median best-so-far fitness with inter-quartile bands, "
            "tables of final values, Mann-Whitney U tests with Vargha-Delaney A12 between every "
            "pair of treatments, and a Markdown summary. A folder that holds run directories "
            "stands for all of them."
        ),
    )
    parser.add_argument("run_dirs", nargs="+", metavar="RUN_DIR", help="run directory, or a folder of them")
    parser.add_argument("-o", "--output", required=True, metavar="REPORT_DIR", help="where to write the report")
    parser.add_argument("--checkpoints", type=_generation_list, default=None, metavar="G,G,...",
                        help="also compare at these generations (0-based, as in log.jsonl); "
                             "the final generation is always compared")
    parser.add_argument("--json", action="store_true", help="print the results as JSON")
    parser.set_defaults(func=_run_report)


def _run_report(args: argparse.Namespace) -> int:
    from ..evolve.report import make_report

    report = make_report(args.run_dirs, args.output, checkpoints=args.checkpoints)
    if args.json:
        payload = {
            "generations": report.generations,
            "checkpoints": report.checkpoints,
            "files": {k: str(v) for k, v in report.files.items()},
            "finals": [f.__dict__ for f in report.finals],
            "comparisons": [
                {"generation": c.generation, "first": c.first, "second": c.second, "u": c.test.u,
                 "p": c.test.p, "method": c.test.method, "a12": c.test.a12, "effect": c.magnitude}
                for c in report.comparisons
            ],
        }
        print(json.dumps(payload, indent=2))
        return 0
    runs = sum(len(r) for r in report.treatments.values())
    print(f"{runs} runs, {len(report.treatments)} treatment(s), {report.generations} generations")
    for f in report.finals:
        print(f"  {f.treatment}: final median {f.median:.6g} (IQR {f.q1:.6g} .. {f.q3:.6g}, n = {f.runs})")
    final = report.generations - 1
    for c in report.comparisons:
        if c.generation == final:
            print(f"  {c.first} vs {c.second}: U = {c.test.u:g}, p = {c.test.p:.4g}, "
                  f"A12 = {c.test.a12:.3f} ({c.magnitude})")
    print(f"wrote {report.files['summary']} and {len(report.files) - 1} more files in {report.out_dir}")
    return 0


#: The commands of this area; the evolver's ``_add_evolve`` joins this tuple.
COMMANDS: tuple[Callable[[argparse._SubParsersAction], None], ...] = (_add_report,)


def register(subparsers: argparse._SubParsersAction) -> None:
    """Add this area's sub-commands to the ``neurodrome`` parser."""
    for add in COMMANDS:
        add(subparsers)

