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
    args = parser.parse_args()

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


if __name__ == "__main__":
    main()
