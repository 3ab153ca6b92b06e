"""Evolver throughput: generations per minute on the relocating single junction.

    python benchmarks/evolve_speed.py [--population 150] [--generations 3] [--workers 2]
                                      [--world worlds/clinic-junction-restock.json] [--trials N]

Runs the reference evolver (default configuration, modulated treatment) from generation 0
in a temporary run directory with a local pool of worker processes and prints the wall
time of each generation, the share spent evaluating, and generations per minute. Early
generations are random networks: many stand still until the time limit, which makes them
slower than a later population that reaches the stores; the figure is a floor.
"""

from __future__ import annotations

import argparse
import json
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--population", type=int, default=150)
    parser.add_argument("--generations", type=int, default=3)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--trials", type=int, default=None, help="override the world's trial count")
    parser.add_argument("--world", default=str(ROOT / "worlds" / "clinic-junction-restock.json"))
    parser.add_argument("--json", action="store_true")
    parser.add_argument("--study", action="store_true",
                        help="instead: a 2-run x 2-treatment study side by side against its runs one after another")
    args = parser.parse_args()
    if args.study:
        return study(args)

    from neurodrome.evolve.config import EvolveConfig
    from neurodrome.evolve.run import Run
    from neurodrome.executors import LocalPool

    config = EvolveConfig.model_validate({"population": args.population, "generations": args.generations,
                                          "seed": args.seed, "evaluation": {"trials": args.trials}})
    rows = []
    with tempfile.TemporaryDirectory() as tmp, LocalPool(args.workers) as pool:
        run = Run(args.world, config, Path(tmp) / "run", "modulated", args.seed)
        run.start(resume=False)
        started = time.perf_counter()
        for _ in range(args.generations):
            t0 = time.perf_counter()
            rec = run.step(pool)
            rows.append({"generation": rec["generation"], "seconds": time.perf_counter() - t0,
                         "eval_seconds": rec["eval_seconds"], "best": rec["best"], "median": rec["median"]})
            print(f"generation {rec['generation']}: {rows[-1]['seconds']:.1f} s "
                  f"(evaluation {rec['eval_seconds']:.1f} s), best {rec['best']:.4g}, median {rec['median']:.4g}",
                  flush=True)
        total = time.perf_counter() - started
    per_minute = args.generations / total * 60.0
    summary = {"population": args.population, "workers": args.workers, "generations": args.generations,
               "world": args.world, "trials": run.trials, "seconds": total, "generations_per_minute": per_minute,
               "rows": rows}
    if args.json:
        print(json.dumps(summary, indent=2))
    else:
        print(f"{per_minute:.2f} generations per minute (population {args.population}, {run.trials} trials, "
              f"{args.workers} workers, {total:.0f} s for {args.generations} generations)")


def study(args: argparse.Namespace) -> None:
    """Time a 2-run x 2-treatment study side by side on one pool, then the same four runs
    one after another (``side_by_side=1``) on the same pool; print the study's time against
    its longest run and against the sum of its runs. The two must write identical logs."""
    from neurodrome.evolve.config import EvolveConfig
    from neurodrome.evolve.study import Study

    config = EvolveConfig.model_validate({"population": args.population, "generations": args.generations,
                                          "seed": args.seed, "runs": 2, "treatments": ["modulated", "fixed"],
                                          "evaluation": {"trials": args.trials}})
    times, logs = {}, {}
    with tempfile.TemporaryDirectory() as tmp:
        for mode, at_once in (("one after another", 1), ("side by side", None)):
            out = Path(tmp) / mode.replace(" ", "-")
            t0 = time.perf_counter()
            summaries = Study(args.world, config, out, workers=args.workers, side_by_side=at_once).run()
            times[mode] = (time.perf_counter() - t0, summaries)
            logs[mode] = [[{k: v for k, v in json.loads(line).items() if k != "eval_seconds"}
                           for line in (s.run_dir / "log.jsonl").read_text().splitlines()] for s in summaries]
            print(f"{mode}: {times[mode][0]:.1f} s", flush=True)
    alone = [s.seconds for s in times["one after another"][1]]
    together = times["side by side"][0]
    print(f"study of 4 runs ({args.population} genomes, {args.generations} generations, {args.workers} workers): "
          f"side by side {together:.1f} s; runs alone {', '.join(f'{a:.1f}' for a in alone)} s "
          f"(sum {sum(alone):.1f} s); side by side / longest run = {together / max(alone):.2f}x, "
          f"/ sum = {together / sum(alone):.2f}x; logs identical: {'yes' if logs['side by side'] == logs['one after another'] else 'NO'}")


if __name__ == "__main__":
    main()
