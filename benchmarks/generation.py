"""Seconds per generation: one population of random plastic networks evaluated serially,
on a warm 2-worker local pool and on a 2-worker local Dask cluster.

Usage:  python benchmarks/generation.py [--population 300] [--trials 100]
        [--world worlds/clinic-junction-restock.json] [--workers 2] [--skip dask,...]

The population is 300 random networks of 16 neurons (one modulatory, see
network_bench.py) built as dicts, as an evolver builds them. Each mode is warmed up on a
small evaluation first (worker start-up and kernel loading are paid once per run, not per
generation), then one generation is timed. A robot-step is one control step of one
robot. The three modes must return identical results; the script says whether they did.
Figures are printed, never asserted.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from network_bench import random_population  # noqa: E402

from neurodrome.control.protocol import Layout  # noqa: E402
from neurodrome.evaluate import evaluate  # noqa: E402
from neurodrome.executors import LocalPool  # noqa: E402
from neurodrome.world import load_world  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent


def timed(world, population, trials: int, executor) -> tuple[float, list]:
    # warm-up: one small chunk per worker, so every worker has loaded the simulator
    evaluate(world, population[:16], seed=99, trials=1, executor=executor, workers=1, chunk_size=8)
    t0 = time.perf_counter()
    results = evaluate(world, population, seed=1, trials=trials, executor=executor, workers=1)
    return time.perf_counter() - t0, results


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--world", default=str(ROOT / "worlds" / "clinic-junction-restock.json"))
    parser.add_argument("--population", type=int, default=300)
    parser.add_argument("--trials", type=int, default=100)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--skip", default="", help="comma-separated modes to leave out: serial, pool, dask")
    args = parser.parse_args(argv)
    skip = {s.strip() for s in args.skip.split(",") if s.strip()}
    world = load_world(args.world)
    population = random_population(args.population, Layout.of(world), seed=0)
    print(f"world {world.name}: {args.population} random plastic networks x {args.trials} trials, "
          f"{args.workers} workers for the parallel modes", flush=True)
    rows: list[tuple[str, float, list]] = []
    if "serial" not in skip:
        rows.append(("serial (in-process)", *timed(world, population, args.trials, None)))
        print(f"  serial done: {rows[-1][1]:.1f} s", flush=True)
    if "pool" not in skip:
        with LocalPool(args.workers).start() as pool:
            rows.append((f"local pool, {args.workers} workers", *timed(world, population, args.trials, pool)))
        print(f"  pool done: {rows[-1][1]:.1f} s", flush=True)
    if "dask" not in skip:
        import distributed

        with distributed.LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True,
                                      host="127.0.0.1", dashboard_address=None) as cluster, \
                distributed.Client(cluster) as client:
            rows.append((f"Dask local cluster, {args.workers} workers", *timed(world, population, args.trials, client)))
        print(f"  dask done: {rows[-1][1]:.1f} s", flush=True)
    if not rows:
        return
    base = rows[0][1]
    steps = sum(r.steps for r in rows[0][2])
    print(f"\n{'mode':<32} {'s/generation':>12} {'robot-steps/s':>14} {'vs first':>9}")
    for name, seconds, _ in rows:
        print(f"{name:<32} {seconds:>12.1f} {steps / seconds:>14,.0f} {base / seconds:>8.2f}x")
    same = all([r.to_dict() for r in res] == [r.to_dict() for r in rows[0][2]] for _, _, res in rows)
    print(f"\n{steps:,} robot-steps per generation; results identical across modes: {'yes' if same else 'NO'}")


if __name__ == "__main__":
    main()
