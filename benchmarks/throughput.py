"""Robot-steps per second of the batched engine against a plain per-robot loop.

Usage:  python benchmarks/throughput.py [--world worlds/clinic-junction.json] [--steps 200]
        [--sizes 1,10,64,1000] [--controller network|courier] [--plain-cap 200] [--json]
        (--help lists the rest)

One robot-step is one control step of one robot (sensing, controller, physics). For each
batch size N the script prints, side by side:

- ``batched``: robot-steps/s of one ``Batch`` of N robots (counted from the agents'
  own step counters, so an agent that finished early is not counted);
- ``plain``: robot-steps/s of the plain per-robot loop (``plain_loop.py``) run in this
  process on min(N, --plain-cap) robots (its per-robot rate does not depend on N) for
  max(steps/4, --plain-min/robots) control steps;
- ``ratio``: batched / plain;
- ``us/step``: microseconds per control step of the whole batch (at N = 1 this is the
  fixed cost of the vectorised step);
- ``bare us``: microseconds of the bare physics of the same bodies: ``substeps`` calls of
  ``space.step(dt)`` on the batch's own pymunk Space right after the timed steps, bodies
  in the states the run left them in (so contacts are as in the run), restored after
  each of several repetitions, median reported;
- ``step/bare``: control-step time / bare physics time, the overhead of sensing, the
  controllers, the drive and the trial machine over pymunk alone.

Then the fixed cost per control step: the intercept of a least-squares line of control
step time against N over the sizes measured (and its slope, the cost per robot).

Controllers: random 16-neuron plastic networks (``network_bench.py``) by default, the
batch running neurodrome's executor and the plain loop its own per-robot numpy network
(``PlainNetwork``; the script first prints how far the two are apart on the same
observations); ``--controller courier`` runs the scripted courier on both sides.
``--json`` prints the figures as one JSON object instead of the table.

Figures are printed, never asserted: wall-clock numbers belong in a benchmark, not a
unit test, and they move with the machine's load.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np
import pymunk.batch as pb

sys.path.insert(0, str(Path(__file__).resolve().parent))

from network_bench import random_population  # noqa: E402
from plain_loop import PlainNetwork, PlainRobot, check_against_executor  # noqa: E402

from neurodrome.control.network import NetworkController  # noqa: E402
from neurodrome.control.protocol import Layout  # noqa: E402
from neurodrome.control.reference import Courier  # noqa: E402
from neurodrome.control.spec import network_from_data  # noqa: E402
from neurodrome.sim.batch import Batch  # noqa: E402
from neurodrome.world import load_world  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent

_BODY = pb.BodyFields.POSITION | pb.BodyFields.ANGLE | pb.BodyFields.VELOCITY | pb.BodyFields.ANGULAR_VELOCITY


def bare_physics_seconds(batch: Batch, repeats: int) -> float:
    """Median seconds of one control period of bare pymunk on the batch's own Space.

    The bodies start every repetition from the states the run left them in; the states
    are restored afterwards, so the batch could go on stepping.
    """
    arena = batch.arena
    space, substeps, dt = arena.space, arena.substeps, arena.dt
    buf = pb.Buffer()
    pb.get_space_bodies(space, _BODY, buf)
    saved = np.frombuffer(buf.float_buf(), dtype=np.float64).copy()
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        for _ in range(substeps):
            space.step(dt)
        times.append(time.perf_counter() - t0)
        restore = pb.Buffer()
        restore.set_float_buf(saved.copy())
        pb.set_space_bodies(space, _BODY, restore)
    arena.read()
    return float(np.median(times))


def measure_batch(world, controllers: list, steps: int, repeats: int) -> dict:
    batch = Batch(world, controllers, seed=0)
    batch.step()  # compile kernels and warm caches outside the timing
    before = int(batch.agent_steps.sum())
    t0 = time.perf_counter()
    for _ in range(steps):
        batch.step()
    elapsed = time.perf_counter() - t0
    robot_steps = int(batch.agent_steps.sum()) - before
    step_s = elapsed / steps
    bare_s = bare_physics_seconds(batch, repeats)
    return {
        "batched_robot_steps_per_s": robot_steps / elapsed,
        "robot_steps": robot_steps,
        "control_step_us": step_s * 1e6,
        "bare_physics_us": bare_s * 1e6,
        "step_over_bare": step_s / bare_s,
        "live_at_end": int(batch.arena.live.sum()),
    }


def plain_rate(world, controllers: list, steps: int) -> float:
    robots = [PlainRobot(world, c) for c in controllers]
    t0 = time.perf_counter()
    for _ in range(steps):
        for robot in robots:
            robot.step()
    return len(robots) * steps / (time.perf_counter() - t0)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--world", default=str(ROOT / "worlds" / "clinic-junction.json"))
    parser.add_argument("--steps", type=int, default=200, help="timed control steps of each batch")
    parser.add_argument("--sizes", default="1,10,64,1000")
    parser.add_argument("--controller", choices=("network", "courier"), default="network",
                        help="random plastic networks (default) or the scripted courier (courier-memory)")
    parser.add_argument("--plain-cap", type=int, default=200,
                        help="robots run by the plain loop (its per-robot rate is flat in N)")
    parser.add_argument("--plain-min", type=int, default=2000,
                        help="fewest robot-steps the plain loop is timed over (one robot runs this many steps)")
    parser.add_argument("--bare-repeats", type=int, default=15, help="repetitions of the bare physics timing")
    parser.add_argument("--check-networks", type=int, default=8,
                        help="networks in the plain-vs-executor agreement check (0 to skip)")
    parser.add_argument("--check-steps", type=int, default=300)
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of the table")
    args = parser.parse_args(argv)
    world = load_world(args.world)
    sizes = [int(s) for s in args.sizes.split(",")]
    layout = Layout.of(world)
    say = (lambda *a, **k: None) if args.json else print
    rf = world.robot.range_finders
    say(f"world {world.name}: {len(rf.angles_deg)} range finders, physics {world.physics.time_step_s} s x "
        f"{world.physics.substeps} substeps per {world.physics.control_period_s} s control step")

    summary: dict = {"world": world.name, "controller": args.controller, "steps": args.steps,
                     "plain_cap": args.plain_cap, "rows": []}
    if args.controller == "network":
        population = random_population(max(max(sizes), args.check_networks), layout, seed=0)
        specs = [network_from_data(d) for d in population[: max(sizes)]]
        label = "random plastic networks (16 neurons, 1 modulatory; network_bench.py)"
        batched = lambda n: [NetworkController([s], layout) for s in specs[:n]]  # noqa: E731
        plain = lambda n: [PlainNetwork(d, layout) for d in population[:n]]  # noqa: E731
        if args.check_networks > 0:
            worst = check_against_executor(world, population[: args.check_networks], steps=args.check_steps)
            summary["plain_vs_executor_max_abs_diff"] = worst
            say(f"plain network vs NetworkController, same observations ({args.check_networks} networks x "
                f"{args.check_steps} steps, trial resets every 100): largest wheel-command difference {worst:.1e}")
    else:
        label = "scripted courier (courier-memory)"
        batched = lambda n: [Courier(layout, "memory") for _ in range(n)]  # noqa: E731
        plain = batched

    say(f"\n{label}; plain loop on min(N, {args.plain_cap}) robots")
    say(f"{'N':>6} {'batched steps/s':>16} {'plain steps/s':>14} {'ratio':>7} {'us/step':>10} "
        f"{'bare us':>9} {'step/bare':>10}")
    for n in sizes:
        row = {"n": n, **measure_batch(world, batched(n), args.steps, args.bare_repeats)}
        row["plain_robots"] = robots = min(n, args.plain_cap)
        # at least --plain-min robot-steps, so that one robot is timed over more than a few steps
        row["plain_steps"] = max(10, args.steps // 4, -(-args.plain_min // robots))
        row["plain_robot_steps_per_s"] = plain_rate(world, plain(robots), row["plain_steps"])
        row["ratio"] = row["batched_robot_steps_per_s"] / row["plain_robot_steps_per_s"]
        summary["rows"].append(row)
        note = "" if row["live_at_end"] == n else f"  ({n - row['live_at_end']} agents finished during the run)"
        say(f"{n:>6} {row['batched_robot_steps_per_s']:>16,.0f} {row['plain_robot_steps_per_s']:>14,.0f} "
            f"{row['ratio']:>6.1f}x {row['control_step_us']:>10,.0f} {row['bare_physics_us']:>9,.0f} "
            f"{row['step_over_bare']:>9.1f}x{note}", flush=True)

    if len(set(sizes)) >= 2:
        ns = np.array([r["n"] for r in summary["rows"]], dtype=float)
        us = np.array([r["control_step_us"] for r in summary["rows"]])
        slope, intercept = np.polyfit(ns, us, 1)
        summary["fixed_cost_us"], summary["per_robot_us"] = float(intercept), float(slope)
        say(f"\nfixed cost per control step (intercept of a least-squares line of step time against N "
            f"over N = {', '.join(str(n) for n in sizes)}): {intercept:,.0f} us; slope {slope:,.1f} us per robot")
    if args.json:
        print(json.dumps(summary, indent=2))


if __name__ == "__main__":
    main()
