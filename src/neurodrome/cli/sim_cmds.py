"""Simulation commands: ``agents`` and ``evaluate``."""

from __future__ import annotations

import argparse
import json
import sys
import time
from typing import Any, TextIO

from ..control.reference import BUNDLED
from ..errors import NeurodromeError, Problem
from ..evaluate import evaluate
from ..jsonio import parse_json_text
from ..sim.task import AgentResult
from ..world import load_world


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
    p.add_argument("--workers", type=int, default=1, help="local worker processes (default 1: in this process; 0: all cores)")
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


def read_json_lines(stream: TextIO, stop_on_error: bool) -> tuple[list[Any], dict[int, str]]:
    """Controller sources from JSON Lines; returns (sources with None for bad lines, errors by line)."""
    sources: list[Any] = []
    errors: dict[int, str] = {}
    for number, line in enumerate(stream, start=1):
        if not line.strip():
            continue
        try:
            item = parse_json_text(line, f"<stdin>:{number}", NeurodromeError)
            if not isinstance(item, (dict, str)):
                raise NeurodromeError(Problem(f"<stdin> line {number}", "a network description (object) or a controller name (string)", type(item).__name__))
        except NeurodromeError as exc:
            if stop_on_error:
                raise
            errors[len(sources)] = f"line {number}: {exc.render()}"
            print(f"neurodrome evaluate: skipping line {number}: {exc.render()}", file=sys.stderr)
            sources.append(None)
            continue
        sources.append(item)
    return sources, errors


def result_json(result: AgentResult | None, error: str | None = None) -> dict:
    if result is None:
        return {"controller": None, "fitness": None, "fault": error, "trials": [], "steps": 0}
    return result.to_dict()


def cmd_evaluate(args: argparse.Namespace) -> int:
    world = load_world(args.world)
    if args.trials is not None and args.trials < 1:
        raise NeurodromeError(Problem("--trials", "a whole number of trials >= 1", str(args.trials)))
    from_stdin = args.controllers == ["-"]
    if "-" in args.controllers and not from_stdin:
        raise NeurodromeError(Problem("CONTROLLER", "'-' alone (standard input) or names and files", " ".join(args.controllers)))
    errors: dict[int, str] = {}
    if from_stdin:
        sources, errors = read_json_lines(sys.stdin, args.stop_on_error)
    else:
        sources = list(args.controllers)
    run = [k for k, s in enumerate(sources) if s is not None]
    executor = args.scheduler if args.scheduler else None
    progress = Progress(sys.stderr, not args.no_progress)
    results = evaluate(
        world,
        [sources[k] for k in run],
        seed=args.seed,
        trials=args.trials,
        workers=args.workers,
        executor=executor,
        agent_ids=run,
        progress=progress,
    ) if run else []
    by_index: dict[int, AgentResult] = dict(zip(run, results))
    if args.replay:
        from ..evaluate import write_replay

        chosen = _parse_indices(args.replay_agents, len(sources))
        chosen = [k for k in chosen if sources[k] is not None]
        write_replay(world, [sources[k] for k in chosen], args.replay, agent_ids=chosen, seed=args.seed, trials=args.trials)
        print(f"replay of {len(chosen)} agent(s) written to {args.replay}", file=sys.stderr)
    if args.json or from_stdin:
        out = sys.stdout
        for k in range(len(sources)):
            out.write(json.dumps(result_json(by_index.get(k), errors.get(k)), allow_nan=False) + "\n")
        out.flush()
    else:
        detail = args.detail or len(results) <= 4
        if detail:
            for r in results:
                print_trials(r)
        print_summary(results)
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
