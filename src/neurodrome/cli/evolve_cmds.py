"""Sub-commands of the evolution area: ``evolve`` and ``report``.

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


def _treatment_list(text: str) -> list[str]:
    """Parse ``"modulated,fixed"``; the configuration validates the names."""
    return [part.strip() for part in text.split(",") if part.strip()]


def _add_evolve(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "evolve",
        help="evolve controllers with the reference NEAT evolver",
        description=(
            "Evolve plastic networks for a world with NEAT-style topology evolution (historical "
            "markings, speciation with an adaptive threshold, elitism), by fitness, novelty or both. "
            "Each generation appends to RUN_DIR/log.jsonl, writes the best genome so far to "
            "RUN_DIR/best.net.json (a network file for evaluate, watch and record) and an atomic "
            "checkpoint; --resume continues a stopped run exactly. With several runs or treatments "
            "each run gets RUN_DIR/<treatment>-<seed>/, and the runs go side by side on the shared "
            "workers (or Dask cluster), each run identical to the same run alone; --resume then "
            "continues every unfinished run. Options given here override the config file."
        ),
    )
    parser.add_argument("world", metavar="WORLD", help="world file")
    parser.add_argument("--config", metavar="FILE", default=None, help="evolver configuration (JSON); defaults otherwise")
    parser.add_argument("-o", "--output", required=True, metavar="RUN_DIR", help="run directory to write")
    parser.add_argument("--generations", type=int, default=None, metavar="G", help="generations per run")
    parser.add_argument("--population", type=int, default=None, metavar="P", help="genomes per generation")
    parser.add_argument("--seed", type=int, default=None, metavar="S", help="seed of the first run (run r: S + r)")
    parser.add_argument("--runs", type=int, default=None, metavar="N", help="independent runs per treatment")
    parser.add_argument("--treatments", type=_treatment_list, default=None, metavar="A,B",
                        help="treatments: modulated, plastic, fixed")
    parser.add_argument("--workers", type=int, default=1, metavar="K",
                        help="local worker processes for evaluation (0: all cores; default 1, in this process)")
    parser.add_argument("--scheduler", default=None, metavar="ADDR", help="evaluate on a Dask cluster (tcp://host:8786)")
    parser.add_argument("--side-by-side", type=int, default=0, metavar="K",
                        help="runs that evolve at once on the shared workers (default 0: all of them; "
                             "1: one after another); without --workers or --scheduler runs go one at a time")
    parser.add_argument("--spread", choices=("generations", "runs"), default="generations",
                        help="what the local workers take: chunks of every run's generations (default), or whole "
                             "runs, each evolved in one worker process (best when there are at least as many "
                             "runs as workers)")
    parser.add_argument("--resume", action="store_true",
                        help="continue every unfinished run in RUN_DIR from its checkpoint")
    parser.add_argument("--quiet", action="store_true", help="no progress display")
    parser.add_argument("--json", action="store_true", help="print a JSON summary of the runs")
    parser.set_defaults(func=_run_evolve)


def _run_evolve(args: argparse.Namespace) -> int:
    import signal

    def stop(_signum: int, _frame: object) -> None:
        # a terminated study unwinds like an interrupted one: workers are stopped and every
        # run's checkpoint of its last whole generation is already on disk
        raise KeyboardInterrupt

    previous = signal.signal(signal.SIGTERM, stop)
    try:
        return _evolve_study(args)
    finally:
        signal.signal(signal.SIGTERM, previous)


def _evolve_study(args: argparse.Namespace) -> int:
    """Prepare every run of the study, print one line per finished generation, summarise."""
    import sys
    import time

    from ..evolve.config import load_config, with_overrides
    from ..evolve.study import GenerationDone, Study

    config = with_overrides(load_config(args.config), generations=args.generations, population=args.population,
                            seed=args.seed, runs=args.runs, treatments=args.treatments)
    study = Study(args.world, config, args.output, workers=args.workers, scheduler=args.scheduler,
                  resume=args.resume, side_by_side=args.side_by_side, spread=args.spread)
    study.prepare()
    total = len(study.runs)
    width = max(len(f"{r.treatment}-{r.seed}") for r in study.runs)
    digits = len(str(config.generations))
    started = time.perf_counter()

    def say(text: str) -> None:
        print(text, file=sys.stderr, flush=True)

    def progress(ev: GenerationDone) -> None:
        say(f"{ev.name:<{width}}  generation {ev.generation + 1:>{digits}}/{ev.generations}  best {ev.best:<9.4g} "
            f"median {ev.median:<9.4g} best so far {ev.best_so_far:<9.4g} | runs done {ev.runs_done}/{ev.runs}  "
            f"[{time.perf_counter() - started:.0f} s]")

    if not args.quiet:
        where = (f"on the Dask cluster at {args.scheduler}" if args.scheduler
                 else f"on {study.workers or 'all'} local workers" if args.workers != 1 else "in this process")
        pace = ("side by side" if study.at_once == total else f"{study.at_once} at a time") if total > 1 else ""
        runs = f"{total} runs" if total > 1 else "1 run"
        resumed = f", {study.runs_done} already finished" if args.resume and study.runs_done else ""
        say(f"{runs} of {config.generations} generations {pace + ' ' if pace else ''}{where}{resumed}")

    summaries = study.run(None if args.quiet else progress)
    if args.json:
        print(json.dumps([{"run_dir": str(s.run_dir), "treatment": s.treatment, "seed": s.seed,
                           "generations": s.generations, "best_so_far": s.best_so_far,
                           "champion_generation": s.champion_generation, "seconds": s.seconds}
                          for s in summaries], indent=2))
        return 0
    for s in summaries:
        print(f"{s.run_dir}: {s.treatment} seed {s.seed}, {s.generations} generations, best fitness "
              f"{s.best_so_far:.6g} (generation {s.champion_generation}), {s.seconds:.0f} s; champion in "
              f"{s.run_dir}/best.net.json")
    return 0


def _add_study(sub: argparse._SubParsersAction) -> None:
    parser = sub.add_parser(
        "study",
        help="run a study file: named arms over repeated runs, optionally with a curriculum",
        description=(
            "Run every arm of a study file (format neurodrome-study: a world, runs per arm, a budget, shared "
            "evolver settings, named arms each a network kind plus the settings it overrides, stages for a "
            "curriculum, a goal) into STUDY_DIR/<arm>-<seed>/. Whole runs are spread over the local worker "
            "processes (each run evolves in one process, so nothing waits on another run's generation); with "
            "--scheduler the runs step side by side on the Dask cluster. --resume continues every unfinished "
            "run; `neurodrome report STUDY_DIR` compares the arms, also while the study runs."
        ),
    )
    parser.add_argument("study", metavar="STUDY_FILE", nargs="?", default=None,
                        help="study file (JSON); with --resume, the copy in STUDY_DIR is used when omitted")
    parser.add_argument("-o", "--output", required=True, metavar="STUDY_DIR", help="directory of the study's runs")
    parser.add_argument("--workers", type=int, default=0, metavar="K",
                        help="local worker processes (default 0: all cores; 1: one run after another here)")
    parser.add_argument("--scheduler", default=None, metavar="ADDR", help="evaluate on a Dask cluster (tcp://host:8786)")
    parser.add_argument("--resume", action="store_true", help="continue every unfinished run of STUDY_DIR")
    parser.add_argument("--quiet", action="store_true", help="no progress display")
    parser.add_argument("--json", action="store_true", help="print a JSON summary of the runs")
    parser.set_defaults(func=_run_study)


def _run_study(args: argparse.Namespace) -> int:
    import signal

    def stop(_signum: int, _frame: object) -> None:
        raise KeyboardInterrupt

    previous = signal.signal(signal.SIGTERM, stop)
    try:
        return _study(args)
    finally:
        signal.signal(signal.SIGTERM, previous)


def _study(args: argparse.Namespace) -> int:
    import sys
    import time
    from pathlib import Path

    from ..errors import ConfigError, Problem
    from ..evolve.study import GenerationDone, Study
    from ..evolve.studyfile import STUDY_COPY, load_study, prepare_study_dir

    out = Path(args.output)
    if args.study is None:
        if not args.resume:
            raise ConfigError(Problem("STUDY_FILE", "a study file (or --resume with a STUDY_DIR that holds one)",
                                      "none given"))
        if not (out / STUDY_COPY).is_file():
            raise ConfigError(Problem(str(out), f"a study directory with {STUDY_COPY} to resume", "no study there"))
    study = prepare_study_dir(load_study(args.study) if args.study else None, out, resume=args.resume)
    runner = Study.from_file(study, out, workers=args.workers, scheduler=args.scheduler, resume=args.resume)
    runner.prepare()
    total = len(runner.runs)
    width = max(len(r.name) for r in runner.runs)
    started = time.perf_counter()

    def say(text: str) -> None:
        print(text, file=sys.stderr, flush=True)

    def progress(ev: GenerationDone) -> None:
        say(f"{ev.name:<{width}}  generation {ev.generation:>4}  best {ev.best:<9.4g} median {ev.median:<9.4g} "
            f"best so far {ev.best_so_far:<9.4g} | runs done {ev.runs_done}/{ev.runs}  "
            f"[{time.perf_counter() - started:.0f} s]")

    if not args.quiet:
        where = (f"on the Dask cluster at {args.scheduler}" if args.scheduler
                 else f"{'whole runs on ' if runner.spread == 'runs' else ''}{runner.workers or 'all'} local workers"
                 if args.workers != 1 else "one after another in this process")
        resumed = f", {runner.runs_done} already finished" if args.resume and runner.runs_done else ""
        arms = ", ".join(a.name for a in study.spec.arms)
        say(f"study {study.name}: {len(study.spec.arms)} arms ({arms}) x {study.spec.runs} runs = {total} runs, "
            f"{where}{resumed}; generations count from 0")

    summaries = runner.run(None if args.quiet else progress)
    if args.json:
        print(json.dumps([{"run_dir": str(s.run_dir), "treatment": s.treatment, "seed": s.seed,
                           "generations": s.generations, "best_so_far": s.best_so_far,
                           "champion_generation": s.champion_generation, "seconds": s.seconds}
                          for s in summaries], indent=2))
        return 0
    print(f"{total} runs in {out}, {time.perf_counter() - started:.0f} s; compare the arms with "
          f"`neurodrome report {out} -o {out / 'report'}`")
    return 0


#: The commands of this area.
COMMANDS: tuple[Callable[[argparse._SubParsersAction], None], ...] = (_add_evolve, _add_study, _add_report)


def register(subparsers: argparse._SubParsersAction) -> None:
    """Add this area's sub-commands to the ``neurodrome`` parser."""
    for add in COMMANDS:
        add(subparsers)

