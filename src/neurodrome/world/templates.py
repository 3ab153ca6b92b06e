"""World templates: a single junction, a double junction, a junction with N arms.

Each returns plain world data (a dict ready for JSON) in our demo scenario: a courier
rover leaves the clinic's dispatch bay, drives the service corridors and picks one of the
store rooms; which store holds the stock is swapped at the restock (a relocation).
"""

from __future__ import annotations

import inspect
import math
from typing import Any

import numpy as np

from .spec import SCHEMA_FILE, WORLD_FORMAT, WORLD_VERSION

KINDS = ("junction", "double-junction", "arms", "loading-bay", "spiral")


def _relocations(names: list[str], relocate: str, trials: int, count: int = 1) -> list[dict[str, Any]]:
    """Swap events spread evenly over the lifetime.

    ``relocate``: ``none``; ``fixed`` (after trial k*trials/(count+1)); ``window``
    (drawn from a window of +-15 % of the lifetime around that trial).
    """
    if relocate == "none" or count < 1:
        return []
    events = []
    for k in range(1, count + 1):
        centre = round(k * trials / (count + 1))
        if relocate == "fixed":
            events.append({"action": "swap", "sites": names, "after_trial": max(1, centre)})
        else:
            half = max(1, round(0.15 * trials / count))
            lo, hi = max(1, centre - half), min(trials - 1, centre + half)
            events.append({"action": "swap", "sites": names, "window": [lo, max(lo, hi)]})
    return events


def _base(name: str, description: str, width: float, trials: int, time_limit: float) -> dict[str, Any]:
    return {
        "$schema": SCHEMA_FILE,
        "format": WORLD_FORMAT,
        "version": WORLD_VERSION,
        "name": name,
        "description": description,
        "robot": {
            "radius": round(min(0.1, width / 5), 4),
            "wheel_base": round(min(0.18, width * 0.36), 4),
            "max_wheel_speed": 0.5,
            "mass": 1.0,
            "range_finders": {"angles_deg": [-90, -45, -20, 0, 20, 45, 90, 180], "max_range": 1.0, "noise": 0.0},
            "signals": ["home", "junction", "reward", "bias"],
        },
        "physics": {"time_step_s": 0.05, "control_period_s": 0.1},
        "task": {"trials": trials, "time_limit_s": time_limit},
    }


def junction(
    *,
    width: float = 0.5,
    stem: float = 1.5,
    arm: float = 1.0,
    trials: int = 100,
    relocate: str = "none",
    relocations: int = 1,
    high: float = 1.0,
    low: float = 0.2,
    name: str = "clinic-junction",
) -> dict[str, Any]:
    """A single junction: a stem from the dispatch bay up to a crossing corridor whose
    west and east ends are the two store rooms."""
    data = _base(
        name,
        "Courier rover: dispatch bay at the foot of the stem, the west and east store rooms at "
        "the ends of the crossing corridor.",
        width,
        trials,
        time_limit=round(4 * (stem + arm) / 0.5 + 10, 1),
    )
    data["corridors"] = [
        {"name": "stem", "path": [[0.0, 0.0], [0.0, stem]], "width": width},
        {"name": "crossing", "path": [[-arm, stem], [arm, stem]], "width": width},
    ]
    site_r = round(width * 0.45, 4)
    data["home"] = {"position": [0.0, 0.0], "heading_deg": 90.0, "radius": site_r}
    data["sites"] = [
        {"name": "west-store", "position": [-arm, stem], "radius": site_r},
        {"name": "east-store", "position": [arm, stem], "radius": site_r},
    ]
    data["markers"] = [{"name": "junction", "position": [0.0, stem], "radius": round(width * 0.6, 4)}]
    data["task"]["site_values"] = {"west-store": low, "east-store": high}
    data["task"]["relocations"] = _relocations(["west-store", "east-store"], relocate, trials, relocations)
    return data


def double_junction(
    *,
    width: float = 0.5,
    stem: float = 1.5,
    arm: float = 1.0,
    branch: float = 0.8,
    trials: int = 200,
    relocate: str = "window",
    relocations: int = 3,
    high: float = 1.0,
    low: float = 0.2,
    name: str = "clinic-double-junction",
) -> dict[str, Any]:
    """Two levels of junctions: the crossing corridor's ends turn up and down into four
    store rooms (north-west, south-west, north-east, south-east)."""
    data = _base(
        name,
        "Courier rover: dispatch bay, a first junction, then a second junction on each side "
        "leading to four store rooms.",
        width,
        trials,
        time_limit=round(4 * (stem + arm + branch) / 0.5 + 10, 1),
    )
    data["corridors"] = [
        {"name": "stem", "path": [[0.0, 0.0], [0.0, stem]], "width": width},
        {"name": "crossing", "path": [[-arm, stem], [arm, stem]], "width": width},
        {"name": "west-wing", "path": [[-arm, stem - branch], [-arm, stem + branch]], "width": width},
        {"name": "east-wing", "path": [[arm, stem - branch], [arm, stem + branch]], "width": width},
    ]
    site_r = round(width * 0.45, 4)
    names = ["north-west-store", "south-west-store", "north-east-store", "south-east-store"]
    pos = [[-arm, stem + branch], [-arm, stem - branch], [arm, stem + branch], [arm, stem - branch]]
    data["home"] = {"position": [0.0, 0.0], "heading_deg": 90.0, "radius": site_r}
    data["sites"] = [{"name": n, "position": p, "radius": site_r} for n, p in zip(names, pos)]
    r = round(width * 0.6, 4)
    data["markers"] = [
        {"name": "junction", "position": [0.0, stem], "radius": r},
        {"name": "west-junction", "position": [-arm, stem], "radius": r},
        {"name": "east-junction", "position": [arm, stem], "radius": r},
    ]
    data["robot"]["signals"] = ["home", "junction", "west-junction", "east-junction", "reward", "bias"]
    values = {n: low for n in names}
    values["south-east-store"] = high
    data["task"]["site_values"] = values
    data["task"]["time_limit_s"] = data["task"]["time_limit_s"]
    events = []
    if relocate != "none":
        # Move the high value round the stores: each event swaps the current holder with the next.
        order = ["south-east-store", "north-west-store", "north-east-store", "south-west-store"]
        base = _relocations(order[:2], relocate, trials, relocations)
        for k, event in enumerate(base):
            event["sites"] = [order[k % 4], order[(k + 1) % 4]]
            events.append(event)
    data["task"]["relocations"] = events
    return data


def arms(
    *,
    width: float = 0.5,
    stem: float = 1.5,
    arm: float = 1.2,
    angles: list[float] | None = None,
    trials: int = 100,
    relocate: str = "window",
    relocations: int = 1,
    high: float = 1.0,
    low: float = 0.2,
    name: str = "clinic-arms",
) -> dict[str, Any]:
    """A junction with N straight arms leaving the hub at the given headings (degrees,
    0 = east, anticlockwise); the stem comes up from the south."""
    angles = [150.0, 90.0, 30.0] if angles is None else list(angles)
    if not angles:
        raise ValueError("give at least one arm angle")
    data = _base(
        name,
        f"Courier rover: dispatch bay below a hub with {len(angles)} store-room arms.",
        width,
        trials,
        time_limit=round(4 * (stem + arm) / 0.5 + 10, 1),
    )
    hub = (0.0, stem)
    corridors = [{"name": "stem", "path": [[0.0, 0.0], [0.0, stem]], "width": width}]
    sites = []
    site_r = round(width * 0.45, 4)
    for k, a in enumerate(angles):
        end = (round(hub[0] + arm * math.cos(math.radians(a)), 6), round(hub[1] + arm * math.sin(math.radians(a)), 6))
        corridors.append({"name": f"arm-{k + 1}", "path": [list(hub), list(end)], "width": width})
        sites.append({"name": f"store-{k + 1}", "position": list(end), "radius": site_r})
    data["corridors"] = corridors
    data["home"] = {"position": [0.0, 0.0], "heading_deg": 90.0, "radius": site_r}
    data["sites"] = sites
    data["markers"] = [{"name": "junction", "position": list(hub), "radius": round(width * 0.7, 4)}]
    values = {s["name"]: low for s in sites}
    values[sites[-1]["name"]] = high
    data["task"]["site_values"] = values
    data["task"]["relocations"] = _relocations([s["name"] for s in sites[-2:]] if len(sites) > 1 else [], relocate if len(sites) > 1 else "none", trials, relocations)
    return data


def loading_bay(
    *,
    width: float = 0.5,
    stem: float = 0.8,
    arm: float = 1.2,
    bend: float = 1.6,
    trials: int = 150,
    relocate: str = "window",
    relocations: int = 2,
    high: float = 1.0,
    low: float = 0.2,
    name: str = "clinic-loading-bay",
) -> dict[str, Any]:
    """A curved ramp and three arms: the dispatch bay faces east into a quarter-circle
    corridor of radius ``bend`` (drawn as 16 straight pieces) that turns north into a
    short stem; from the hub one arm leaves north-west, one north and one east-north-east
    with a dog-leg turn up to its store room."""
    data = _base(
        name,
        "Courier rover: from the dispatch bay round the curved loading ramp to a hub with three "
        "store rooms (pharmacy, linen, supplies); the restock moves the stock between them.",
        width,
        trials,
        time_limit=round(4 * (bend * math.pi / 2 + stem + 1.5 * arm) / 0.5 + 10, 1),
    )
    centre = (0.0, bend)
    ramp = [
        [round(centre[0] + bend * math.cos(math.radians(a)), 6), round(centre[1] + bend * math.sin(math.radians(a)), 6)]
        for a in [-90 + 90 * k / 16 for k in range(17)]
    ]
    hub = (bend, bend + stem)
    ramp.append([hub[0], hub[1]])

    def point(origin: tuple[float, float], heading: float, length: float) -> list[float]:
        return [round(origin[0] + length * math.cos(math.radians(heading)), 6),
                round(origin[1] + length * math.sin(math.radians(heading)), 6)]

    pharmacy = point(hub, 150.0, arm)
    linen = point(hub, 90.0, arm)
    elbow = point(hub, 15.0, 0.8 * arm)
    supplies = point((elbow[0], elbow[1]), 75.0, 0.7 * arm)
    data["corridors"] = [
        {"name": "ramp", "path": ramp, "width": width},
        {"name": "pharmacy-arm", "path": [list(hub), pharmacy], "width": width},
        {"name": "linen-arm", "path": [list(hub), linen], "width": width},
        {"name": "supplies-arm", "path": [list(hub), elbow, supplies], "width": width},
    ]
    site_r = round(width * 0.45, 4)
    names = ["pharmacy-store", "linen-store", "supplies-store"]
    data["home"] = {"position": [0.0, 0.0], "heading_deg": 0.0, "radius": site_r}
    data["sites"] = [{"name": n, "position": p, "radius": site_r} for n, p in zip(names, [pharmacy, linen, supplies])]
    data["markers"] = [{"name": "junction", "position": list(hub), "radius": round(width * 0.7, 4)}]
    data["task"]["site_values"] = {"pharmacy-store": high, "linen-store": low, "supplies-store": low}
    events = _relocations(names[:2], relocate, trials, relocations)
    order = ["pharmacy-store", "supplies-store", "linen-store"]
    for k, event in enumerate(events):
        event["sites"] = [order[k % 3], order[(k + 1) % 3]]
    data["task"]["relocations"] = events
    return data


def spiral(
    *,
    width: float = 0.5,
    points: int = 500,
    turns: float = 4.0,
    trials: int = 100,
    relocate: str = "none",
    relocations: int = 1,
    high: float = 1.0,
    low: float = 0.2,
    name: str = "clinic-spiral-corridor",
) -> dict[str, Any]:
    """One long winding corridor: an Archimedean spiral (radius 0.8 m growing by 1 m a
    turn) sampled at ``points`` points, so the maze has about twice as many walls; a store
    room halfway along and one at the far end. A test of curved, many-wall geometry."""
    th = np.linspace(0.0, 2 * math.pi * turns, points)
    r = 0.8 + th / (2 * math.pi)
    path = [[round(float(x), 6), round(float(y), 6)] for x, y in zip(r * np.cos(th), r * np.sin(th))]
    length = float(np.sum(np.hypot(np.diff(r * np.cos(th)), np.diff(r * np.sin(th)))))
    data = _base(
        name,
        "Courier rover: a long winding service corridor from the dispatch bay, with the middle "
        "store room halfway along and the far store room at its end.",
        width,
        trials,
        time_limit=round(4 * length / 0.5 + 10, 1),
    )
    data["corridors"] = [{"name": "spiral", "path": path, "width": width}]
    site_r = round(width * 0.45, 4)
    heading = math.degrees(math.atan2(path[1][1] - path[0][1], path[1][0] - path[0][0]))
    data["home"] = {"position": path[0], "heading_deg": round(heading, 3), "radius": site_r}
    data["sites"] = [
        {"name": "middle-store", "position": path[points // 2], "radius": site_r},
        {"name": "far-store", "position": path[-1], "radius": site_r},
    ]
    data["markers"] = [{"name": "junction", "position": path[points // 4], "radius": round(width * 0.6, 4)}]
    data["task"]["site_values"] = {"middle-store": low, "far-store": high}
    data["task"]["relocations"] = _relocations(["middle-store", "far-store"], relocate, trials, relocations)
    return data


def _builder(kind: str) -> Any:
    builders = {"junction": junction, "double-junction": double_junction, "arms": arms, "loading-bay": loading_bay,
                "spiral": spiral}
    if kind not in builders:
        raise ValueError(f"unknown template '{kind}'; choose one of {', '.join(KINDS)}")
    return builders[kind]


def options(kind: str) -> set[str]:
    """The keyword options template ``kind`` takes."""
    return set(inspect.signature(_builder(kind)).parameters)


def make(kind: str, **options: Any) -> dict[str, Any]:
    return _builder(kind)(**{k: v for k, v in options.items() if v is not None})
