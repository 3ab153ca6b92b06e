"""Seconds per generation: one population of random plastic networks evaluated serially,
on a warm 2-worker local pool and on a 2-worker local Dask cluster.

Usage:  python benchmarks/generation.py [--population 300] [--trials 100]
        [--world worlds/clinic-junction-restock.json] [--workers 2] [--skip dask,...]

The population is 300 random networks of 16 neurons (one modulatory, see
network_bench.py) built as dicts, as an evolver builds them. Each mode is warmed up on a
small evaluation first (worker start-up and kernel loading are paid once per run, not per
generation), then one generation is timed. A robot-step is one control step of one
robot. The three modes must return identical results; the script says whether they did.

Beside each mode's measured time the script prints the generation's ideal time: total
robot-steps / (workers x full-batch rate), with 1 worker for the serial mode. The
full-batch rate is measured first, in this process, on one batch of the same networks
(the first ``--rate-agents``, default 1000, or the whole population if smaller) stepped
for ``--rate-steps`` control steps while every agent is still running (the trial count
is raised for this so that none finishes; the timing stops early if one faults). The
actual / ideal ratio is what the lockstep tail (a batch runs as long as its slowest
agent, with fewer and fewer agents), the chunking, worker start-up and transport cost
on top of a full batch's throughput. Figures are printed, never asserted.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from network_bench import random_population  # noqa: E402

from neurodrome.control.network import NetworkController  # noqa: E402
from neurodrome.control.protocol import Layout  # noqa: E402
from neurodrome.control.spec import network_from_data  # noqa: E402
from neurodrome.evaluate import evaluate  # noqa: E402
from neurodrome.executors import LocalPool  # noqa: E402
from neurodrome.sim.batch import Batch  # noqa: E402
from neurodrome.world import load_world  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent


def timed(world, population, trials: int, executor) -> tuple[float, list]:
    # warm-up: one small chunk per worker, so every worker has loaded the simulator
    evaluate(world, population[:16], seed=99, trials=1, executor=executor, workers=1, chunk_size=8)
    t0 = time.perf_counter()
    results = evaluate(world, population, seed=1, trials=trials, executor=executor, workers=1)
    return time.perf_counter() - t0, results


def full_batch_rate(world, population, agents: int, steps: int) -> tuple[float, int, int]:
    """(robot-steps/s, agents, steps timed) of one batch of the first ``agents`` networks
    while all of them are running."""
    nets = population[:agents]
    layout = Layout.of(world)
    batch = Batch(world, [NetworkController([network_from_data(d) for d in nets], layout)], seed=1,
                  trials=10**9)
    batch.step()  # compile kernels and warm caches outside the timing
    before, done = int(batch.agent_steps.sum()), 0
    t0 = time.perf_counter()
    while done < steps and batch.arena.live.all():
        batch.step()
        done += 1
    elapsed = time.perf_counter() - t0
    return (int(batch.agent_steps.sum()) - before) / elapsed, len(nets), done


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--world", default=str(ROOT / "worlds" / "clinic-junction-restock.json"))
    parser.add_argument("--population", type=int, default=300)
    parser.add_argument("--trials", type=int, default=100)
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--skip", default="", help="comma-separated modes to leave out: serial, pool, dask")
    parser.add_argument("--rate-agents", type=int, default=1000, help="agents in the full-batch rate measurement")
    parser.add_argument("--rate-steps", type=int, default=300, help="control steps of the full-batch rate measurement")
    args = parser.parse_args(argv)
    skip = {s.strip() for s in args.skip.split(",") if s.strip()}
    world = load_world(args.world)
    population = random_population(args.population, Layout.of(world), seed=0)
    print(f"world {world.name}: {args.population} random plastic networks x {args.trials} trials, "
          f"{args.workers} workers for the parallel modes", flush=True)
    rate, rate_agents, rate_steps = full_batch_rate(world, population, args.rate_agents, args.rate_steps)
    print(f"  full-batch rate: {rate:,.0f} robot-steps/s ({rate_agents} networks x {rate_steps} steps, "
          f"all running, in this process)", flush=True)
    rows: list[tuple[str, int, float, list]] = []
    if "serial" not in skip:
        rows.append(("serial (in-process)", 1, *timed(world, population, args.trials, None)))
        print(f"  serial done: {rows[-1][2]:.1f} s", flush=True)
    if "pool" not in skip:
        with LocalPool(args.workers).start() as pool:
            rows.append((f"local pool, {args.workers} workers", args.workers, *timed(world, population, args.trials, pool)))
        print(f"  pool done: {rows[-1][2]:.1f} s", flush=True)
    if "dask" not in skip:
        import distributed

        with distributed.LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True,
                                      host="127.0.0.1", dashboard_address=None) as cluster, \
                distributed.Client(cluster) as client:
            rows.append((f"Dask local cluster, {args.workers} workers", args.workers, *timed(world, population, args.trials, client)))
        print(f"  dask done: {rows[-1][2]:.1f} s", flush=True)
    if not rows:
        return
    base = rows[0][2]
    steps = sum(r.steps for r in rows[0][3])
    print(f"\n{'mode':<32} {'s/generation':>12} {'robot-steps/s':>14} {'vs first':>9} {'ideal s':>8} "
          f"{'actual/ideal':>13}")
    for name, workers, seconds, _ in rows:
        ideal = steps / (workers * rate)
        print(f"{name:<32} {seconds:>12.2f} {steps / seconds:>14,.0f} {base / seconds:>8.2f}x {ideal:>8.2f} "
              f"{seconds / ideal:>12.2f}x")
    same = all([r.to_dict() for r in res] == [r.to_dict() for r in rows[0][3]] for _, _, _, res in rows)
    print(f"\n{steps:,} robot-steps per generation; ideal = robot-steps / (workers x {rate:,.0f} robot-steps/s, "
          f"the full-batch rate); results identical across modes: {'yes' if same else 'NO'}")


if __name__ == "__main__":
    main()
