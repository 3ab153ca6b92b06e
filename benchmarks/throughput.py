"""Robot-steps per second of the batched engine against a plain per-robot loop.

Usage:  python benchmarks/throughput.py [--world worlds/clinic-junction.json] [--steps 200] [--sizes 1,100,1000]

Both sides run in this process on the same world with the same controller; one
robot-step is one control step of one robot (sensing, controller, physics). Figures are
printed, never asserted: wall-clock numbers belong in a benchmark, not a unit test.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from plain_loop import PlainRobot  # noqa: E402

from neurodrome.control.protocol import Layout  # noqa: E402
from neurodrome.control.reference import Courier  # noqa: E402
from neurodrome.sim.batch import Batch  # noqa: E402
from neurodrome.world import load_world  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent


def batched_rate(world, make, n: int, steps: int) -> float:
    batch = Batch(world, [make() for _ in range(n)], seed=0)
    batch.step()  # compile kernels and warm caches outside the timing
    t0 = time.perf_counter()
    for _ in range(steps):
        batch.step()
    return n * steps / (time.perf_counter() - t0)


def plain_rate(world, make, n: int, steps: int) -> float:
    robots = [PlainRobot(world, make()) for _ in range(n)]
    t0 = time.perf_counter()
    for _ in range(steps):
        for robot in robots:
            robot.step()
    return n * steps / (time.perf_counter() - t0)


def report(label: str, world, make, sizes: list[int], steps: int, plain_cap: int) -> None:
    print(f"\n{label}")
    print(f"{'N':>6} {'batched steps/s':>16} {'plain steps/s':>14} {'ratio':>7}")
    for n in sizes:
        fast = batched_rate(world, make, n, steps)
        # the plain loop's rate per robot does not depend on N; cap it to keep the run short
        slow = plain_rate(world, make, min(n, plain_cap), max(10, steps // 4))
        print(f"{n:>6} {fast:>16,.0f} {slow:>14,.0f} {fast / slow:>6.1f}x")


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--world", default=str(ROOT / "worlds" / "clinic-junction.json"))
    parser.add_argument("--steps", type=int, default=200)
    parser.add_argument("--sizes", default="1,100,1000")
    parser.add_argument("--plain-cap", type=int, default=200, help="robots run by the plain loop (its per-robot rate is flat in N)")
    parser.add_argument("--networks", action="store_true", help="also run the plastic-network benchmark")
    args = parser.parse_args(argv)
    world = load_world(args.world)
    sizes = [int(s) for s in args.sizes.split(",")]
    layout = Layout.of(world)
    rf = world.robot.range_finders
    print(f"world {world.name}: {len(rf.angles_deg)} range finders, physics {world.physics.time_step_s} s x "
          f"{world.physics.substeps} substeps per {world.physics.control_period_s} s control step")
    report("scripted courier (courier-memory)", world, lambda: Courier(layout, "memory"), sizes, args.steps, args.plain_cap)
    if args.networks:
        from network_bench import network_factory

        report("plastic network (16 neurons, 1 modulatory)", world, network_factory(layout), sizes, args.steps, args.plain_cap)


if __name__ == "__main__":
    main()
