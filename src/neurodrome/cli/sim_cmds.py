"""Simulation commands: ``agents`` and ``evaluate``."""

from __future__ import annotations

import argparse
import json
import re
import sys
import time
from typing import Any, TextIO

from ..control.reference import BUNDLED
from ..control.spec import network_from_data
from ..errors import NeurodromeError, Problem
from ..evaluate import evaluate
from ..jsonio import parse_json_text
from ..sim.task import AgentResult
from ..world import load_world


#: With at least this many controllers and no --workers, evaluate uses all cores.
AUTO_POOL_MIN = 32


def register(sub: argparse._SubParsersAction) -> None:
    p = sub.add_parser("agents", help="list the bundled scripted agents", description="List the bundled scripted agents.")
    p.set_defaults(func=cmd_agents)

    p = sub.add_parser(
        "evaluate",
        help="evaluate controllers in a world, headless",
        description=(
            "Evaluate controllers in a world, headless. CONTROLLER is a bundled agent name "
            "(see 'neurodrome agents'), a network file, module:attribute (imports and runs that "
            "Python code), or '-' to read network descriptions as JSON Lines on standard input "
            "(one per line; one JSON result per line is written, in order). Controllers on one "
            "command line run together as one batch."
        ),
    )
    p.add_argument("world", metavar="WORLD")
    p.add_argument("controllers", nargs="+", metavar="CONTROLLER")
    p.add_argument("--seed", type=int, default=0, help="evaluation seed (default 0)")
    p.add_argument("--trials", type=int, help="override the world's number of trials")
    p.add_argument("--same-schedule", action="store_true",
                   help="every controller meets the same random draws (restock trial) as agent 0, "
                        "instead of agent k drawing its own")
    p.add_argument("--workers", type=int, default=None,
                   help=f"local worker processes (1: in this process; 0: all cores; default: in this process for "
                        f"fewer than {AUTO_POOL_MIN} controllers, else all cores)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="Dask scheduler address, e.g. tcp://10.0.0.5:8786 (needs neurodrome[cluster])")
    p.add_argument("--json", action="store_true", help="one JSON object per controller on stdout (JSON Lines)")
    p.add_argument("--replay", metavar="FILE", help="also write a replay (.npz) of chosen agents for watch and record")
    p.add_argument("--replay-agents", default="0", metavar="K,...", help="which controllers (0-based positions) the replay holds (default 0)")
    p.add_argument("--detail", action="store_true", help="per-trial tables even for many controllers")
    p.add_argument("--stop-on-error", action="store_true", help="with '-': stop at the first malformed line")
    p.add_argument("--no-progress", action="store_true", help="no progress bar on standard error")
    p.set_defaults(func=cmd_evaluate)


def cmd_agents(args: argparse.Namespace) -> int:
    width = max(len(n) for n in BUNDLED)
    for name, (_, text) in BUNDLED.items():
        print(f"{name:<{width}}  {text}")
    return 0


class Progress:
    """A one-line progress bar on standard error (only when it is a terminal)."""

    def __init__(self, stream: TextIO, enabled: bool) -> None:
        self.stream = stream
        self.enabled = enabled and stream.isatty()
        self.start = time.perf_counter()

    def __call__(self, done: int, total: int) -> None:
        if not self.enabled:
            return
        width = 30
        filled = int(width * done / max(1, total))
        elapsed = time.perf_counter() - self.start
        self.stream.write(f"\r[{'#' * filled}{'.' * (width - filled)}] {done}/{total} controllers  {elapsed:5.1f}s")
        if done >= total:
            self.stream.write("\n")
        self.stream.flush()


def _line_problem(exc: NeurodromeError, number: int) -> NeurodromeError:
    """The same problems, placed at line ``number`` of standard input."""
    problems = []
    for p in exc.problems:
        match = re.match(r"^<stdin>(?::(\d+):(\d+))?(.*)$", p.where)
        where = f"<stdin> line {number}"
        if match and match.group(2):
            where += f", column {match.group(2)}"
        rest = match.group(3).strip() if match else p.where
        problems.append(Problem(f"{where} {rest}".strip(), p.expected, p.found))
    return NeurodromeError(problems, source="<stdin>")


def read_json_lines(stream: TextIO, stop_on_error: bool) -> tuple[list[Any], dict[int, str], list[int]]:
    """Controller sources from JSON Lines.

    Returns (sources with None for bad lines, error text by position, input line number
    of each position). Blank lines are skipped. A network description is validated here,
    so its problems are reported with the line they came from.
    """
    sources: list[Any] = []
    errors: dict[int, str] = {}
    lines: list[int] = []
    for number, line in enumerate(stream, start=1):
        if not line.strip():
            continue
        try:
            item = parse_json_text(line.rstrip("\r\n"), "<stdin>", NeurodromeError)
            if isinstance(item, dict):
                network_from_data(item, "<stdin>")
            elif not isinstance(item, str):
                raise NeurodromeError(Problem("<stdin>", "a network description (object) or a controller name (string)", type(item).__name__))
        except NeurodromeError as exc:
            error = _line_problem(exc, number)
            if stop_on_error:
                raise error from None
            errors[len(sources)] = error.render()
            print(f"neurodrome evaluate: line {number} skipped:\n{error.render()}", file=sys.stderr)
            item = None
        sources.append(item)
        lines.append(number)
    return sources, errors, lines


def result_json(result: AgentResult | None, error: str | None = None, agent: int = 0) -> dict:
    """One output object; a line that could not be read gets the same fields, empty."""
    if result is None:
        return {
            "controller": None, "agent": agent, "fitness": None, "steps": 0, "fault": error,
            "trials": [], "relocations": [], "behaviour": {"outcomes": [], "end_positions": []},
        }
    return result.to_dict()


def cmd_evaluate(args: argparse.Namespace) -> int:
    world = load_world(args.world)
    if args.trials is not None and args.trials < 1:
        raise NeurodromeError(Problem("--trials", "a whole number of trials >= 1", str(args.trials)))
    if args.seed < 0:
        raise NeurodromeError(Problem("--seed", "a whole number >= 0", str(args.seed)))
    if args.workers is not None and args.workers < 0:
        raise NeurodromeError(Problem("--workers", "1 or more worker processes (0: all cores)", str(args.workers)))
    if args.scheduler and args.workers not in (None, 1):
        raise NeurodromeError(Problem("--workers", "no --workers with --scheduler (the cluster's workers run the chunks)", str(args.workers)))
    from_stdin = args.controllers == ["-"]
    if "-" in args.controllers and not from_stdin:
        raise NeurodromeError(Problem("CONTROLLER", "'-' alone (standard input) or names and files", " ".join(args.controllers)))
    errors: dict[int, str] = {}
    lines: list[int] = []
    if from_stdin:
        sources, errors, lines = read_json_lines(sys.stdin, args.stop_on_error)
    else:
        sources = list(args.controllers)
    chosen = _parse_indices(args.replay_agents, len(sources)) if args.replay else []
    run = [k for k, s in enumerate(sources) if s is not None]
    workers = args.workers
    if workers is None:  # starting worker processes costs seconds: only worth it for a population
        workers = 1 if len(run) < AUTO_POOL_MIN or args.scheduler else 0
    progress = Progress(sys.stderr, not args.no_progress)
    results = evaluate(
        world,
        [sources[k] for k in run],
        seed=args.seed,
        trials=args.trials,
        workers=workers,
        executor=args.scheduler or None,
        agent_ids=[0] * len(run) if args.same_schedule else run,
        progress=progress,
    ) if run else []
    by_index: dict[int, AgentResult] = dict(zip(run, results))
    if args.json or from_stdin:
        out = sys.stdout
        for k in range(len(sources)):
            record = result_json(by_index.get(k), errors.get(k), k)
            if from_stdin:
                record["line"] = lines[k]
            out.write(json.dumps(record, allow_nan=False) + "\n")
        out.flush()
    else:
        detail = args.detail or len(results) <= 4
        if detail:
            for r in results:
                print_trials(r)
        print_summary(results)
    if args.replay:
        from ..evaluate import write_replay

        # a source that could not be built has nothing to replay
        chosen = [k for k in chosen if sources[k] is not None and not (by_index[k].fitness is None and by_index[k].fault)]
        if not chosen:
            raise NeurodromeError(Problem("--replay-agents", "at least one controller that could be built", args.replay_agents))
        try:
            ids = [0] * len(chosen) if args.same_schedule else chosen
            write_replay(world, [sources[k] for k in chosen], args.replay, agent_ids=ids, seed=args.seed, trials=args.trials)
        except OSError as exc:
            raise NeurodromeError(Problem(f"--replay {args.replay}", "a file that can be written", str(exc))) from None
        print(f"replay of {len(chosen)} agent(s) written to {args.replay}", file=sys.stderr)
    faulted = any(r.fault for r in results) or bool(errors)
    return 1 if faulted else 0


def _parse_indices(text: str, n: int) -> list[int]:
    try:
        out = [int(part) for part in text.split(",") if part.strip()]
    except ValueError:
        raise NeurodromeError(Problem("--replay-agents", "comma-separated controller positions such as 0,2", text)) from None
    bad = [k for k in out if not 0 <= k < n]
    if bad or not out:
        raise NeurodromeError(Problem("--replay-agents", f"positions between 0 and {n - 1}", text))
    return out


def print_trials(r: AgentResult) -> None:
    print(f"\n{r.controller}")
    if r.fault and not r.trials:
        print(f"  fault: {r.fault}")
        return
    print(f"  {'trial':>5}  {'site':<18} {'value':>6}  {'crash':>5}  {'home':>4}  {'steps':>5}  {'score':>6}")
    moves = {m.after_trial: m for m in r.relocations}
    for t in r.trials:
        print(
            f"  {t.trial:>5}  {t.site or '-':<18} {t.value:>6.2f}  {'yes' if t.crashed else '':>5}  "
            f"{'yes' if t.returned_home else '':>4}  {t.steps:>5}  {t.score:>6.2f}"
        )
        if t.trial in moves:
            m = moves[t.trial]
            after = ", ".join(f"{k} {v:g}" for k, v in m.after.items())
            print(f"  {'':>5}  -- relocation ({m.action} {' / '.join(m.sites)}): {after}")
    if r.fault:
        print(f"  fault: {r.fault}")


def print_summary(results: list[AgentResult]) -> None:
    print()
    width = max([10] + [len(r.controller) for r in results])
    print(f"{'controller':<{width}}  {'fitness':>8}  {'trials':>6}  {'sites':>5}  {'crashes':>7}  {'timeouts':>8}  {'steps':>8}  fault")
    for r in results:
        fit = f"{r.fitness:8.2f}" if r.fitness is not None else f"{'-':>8}"
        sites = sum(1 for t in r.trials if t.site)
        crashes = sum(1 for t in r.trials if t.crashed)
        timeouts = sum(1 for t in r.trials if t.timed_out)
        print(f"{r.controller:<{width}}  {fit}  {len(r.trials):>6}  {sites:>5}  {crashes:>7}  {timeouts:>8}  {r.steps:>8}  {r.fault or ''}")
