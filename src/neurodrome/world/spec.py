"""The world file: pydantic models, format and version, JSON Schema export.

All lengths are metres, angles degrees, times seconds, speeds metres per second, mass
kilograms. A world file is validated once, here; everything inside the package trusts the
resulting :class:`WorldSpec`.
"""

from __future__ import annotations

import math
from typing import Annotated, Literal

from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    StrictBool,
    StrictInt,
    ValidationError,
    field_validator,
    model_validator,
)
from pydantic_core import InitErrorDetails, PydanticCustomError

WORLD_FORMAT = "neurodrome-world"
WORLD_VERSION = 1
SCHEMA_FILE = "world.schema.json"

#: Built-in zone signals a robot may receive (marker names add to these).
BUILTIN_SIGNALS = ("home", "reward", "bias")

#: A world may span at most this many metres on a side (tiles for batching rely on it).
MAX_EXTENT = 200.0

# Strict: a width of "0.5" or true is a mistake in the file, not something to coerce.
Finite = Annotated[float, Field(allow_inf_nan=False, strict=True)]
Length = Annotated[float, Field(allow_inf_nan=False, strict=True, ge=-1e4, le=1e4)]
Positive = Annotated[float, Field(allow_inf_nan=False, strict=True, gt=0, le=1e4)]
NonNegative = Annotated[float, Field(allow_inf_nan=False, strict=True, ge=0, le=1e4)]
Point = tuple[Length, Length]
Name = Annotated[str, Field(min_length=1, max_length=64, pattern=r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")]


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


class Corridor(_Model):
    """A corridor: a centre-line polyline and a width; ends are square-capped."""

    name: Name | None = None
    path: list[Point] = Field(min_length=2, description="centre line, at least two points")
    width: Positive = Field(description="corridor width, metres")

    @field_validator("path")
    @classmethod
    def _distinct_points(cls, path: list[Point]) -> list[Point]:
        for k in range(1, len(path)):
            if math.dist(path[k - 1], path[k]) < 1e-9:
                raise ValueError(f"point {k} repeats point {k - 1}; consecutive points must differ")
        return path


class Wall(_Model):
    """An extra wall segment, added to the boundary walls."""

    start: Point
    end: Point

    @model_validator(mode="after")
    def _not_degenerate(self) -> Wall:
        if math.dist(self.start, self.end) < 1e-9:
            raise ValueError("wall start and end are the same point")
        return self


class Obstacle(_Model):
    """A solid polygon cut out of the free space."""

    name: Name | None = None
    polygon: list[Point] = Field(min_length=3, description="vertices, in order")


class Home(_Model):
    position: Point
    heading_deg: Finite = Field(0.0, description="start heading, degrees anticlockwise from +x")
    radius: Positive = Field(0.25, description="home zone radius, metres")
    jitter: NonNegative = Field(0.0, description="start position jitter (uniform disc radius), metres")
    heading_jitter_deg: Annotated[float, Field(ge=0, le=180, allow_inf_nan=False, strict=True)] = 0.0


class Site(_Model):
    """A reward site: a circular zone whose value the task sets."""

    name: Name
    position: Point
    radius: Positive = 0.25


class Marker(_Model):
    """A named zone (a junction, say) that raises an input signal while the robot is inside.

    Give either ``position`` and ``radius`` (a disc) or ``polygon``.
    """

    name: Name
    position: Point | None = None
    radius: Positive | None = None
    polygon: list[Point] | None = Field(None, min_length=3)

    @model_validator(mode="after")
    def _one_shape(self) -> Marker:
        disc = self.position is not None or self.radius is not None
        if disc and self.polygon is not None:
            raise ValueError("give either position and radius, or polygon, not both")
        if self.polygon is None and (self.position is None or self.radius is None):
            raise ValueError("give position and radius (a disc) or polygon")
        return self


class RangeFinders(_Model):
    angles_deg: list[Annotated[float, Field(ge=-180, le=180, allow_inf_nan=False, strict=True)]] = Field(
        default_factory=lambda: [-90.0, -45.0, -20.0, 0.0, 20.0, 45.0, 90.0, 180.0],
        max_length=64,
        description="ray directions relative to the heading, degrees (positive = left)",
    )
    max_range: Positive = Field(1.0, description="metres, measured from the body surface")
    noise: Annotated[float, Field(ge=0, le=1, allow_inf_nan=False, strict=True)] = Field(
        0.0, description="standard deviation of multiplicative Gaussian noise on each reading"
    )


class Robot(_Model):
    radius: Positive = Field(0.1, description="body radius, metres")
    wheel_base: Positive = Field(0.18, description="distance between the wheels, metres")
    max_wheel_speed: Positive = Field(0.5, description="metres per second")
    mass: Positive = Field(1.0, description="kilograms")
    motor_noise: Annotated[float, Field(ge=0, le=1, allow_inf_nan=False, strict=True)] = Field(
        0.0, description="standard deviation of multiplicative Gaussian noise on wheel commands"
    )
    range_finders: RangeFinders = Field(default_factory=RangeFinders)
    signals: list[Name] = Field(
        default_factory=lambda: ["home", "reward", "bias"],
        description="zone signals received, in observation order: home, reward, bias or a marker name",
    )

    @field_validator("signals")
    @classmethod
    def _unique_signals(cls, signals: list[str]) -> list[str]:
        seen = set()
        for s in signals:
            if s in seen:
                raise ValueError(f"signal '{s}' is listed twice")
            seen.add(s)
        return signals


class Relocation(_Model):
    """A change of site values between trials.

    ``swap`` exchanges the values of the named sites (two or more, rotated in order);
    ``set`` assigns ``values``. It happens after trial ``after_trial`` (trials count
    from 1), or after a trial drawn uniformly from ``window`` = [a, b] for each agent.
    """

    action: Literal["swap", "set"]
    sites: list[Name] = Field(default_factory=list)
    values: dict[Name, Finite] = Field(default_factory=dict)
    after_trial: Annotated[int, Field(ge=1, strict=True)] | None = None
    window: tuple[Annotated[int, Field(ge=1, strict=True)], Annotated[int, Field(ge=1, strict=True)]] | None = None

    @model_validator(mode="after")
    def _consistent(self) -> Relocation:
        if (self.after_trial is None) == (self.window is None):
            raise ValueError("give exactly one of after_trial or window")
        if self.window is not None and self.window[0] > self.window[1]:
            raise ValueError(f"window [{self.window[0]}, {self.window[1]}] has its start after its end")
        if self.action == "swap":
            if len(self.sites) < 2:
                raise ValueError("a swap names two or more sites")
            if len(set(self.sites)) != len(self.sites):
                raise ValueError("a swap names each site once")
            if self.values:
                raise ValueError("a swap takes sites, not values")
        else:
            if not self.values:
                raise ValueError("a set gives values for one or more sites")
            if self.sites:
                raise ValueError("a set takes values, not sites")
        return self

    def named_sites(self) -> list[str]:
        return list(self.sites) if self.action == "swap" else list(self.values)

    def apply(self, values: dict[str, float]) -> dict[str, float]:
        """Site values after this event. A swap passes each named site's value on to the
        next site in the list (the last one's to the first); a set assigns ``values``."""
        out = dict(values)
        if self.action == "swap":
            for k, name in enumerate(self.sites):
                out[self.sites[(k + 1) % len(self.sites)]] = values[name]
        else:
            out.update(self.values)
        return out

    @property
    def earliest_trial(self) -> int:
        """The first trial after which this event may happen."""
        return self.after_trial if self.after_trial is not None else self.window[0]

    @property
    def latest_trial(self) -> int:
        """The last trial after which this event may happen."""
        return self.after_trial if self.after_trial is not None else self.window[1]


class Scoring(_Model):
    crash_penalty: Finite = Field(-0.4, description="added to fitness on a wall contact")
    crash_ends_trial: StrictBool = True
    timeout_penalty: Finite = Field(-0.3, description="added when a trial runs out of time unfinished")
    return_home: StrictBool = Field(True, description="a trial ends at home after visiting a site")
    home_bonus: Finite = Field(0.0, description="added when the robot gets back home")


class Stall(_Model):
    """End a trial early when the robot stands still: its centre has stayed within
    ``distance`` metres of one spot for ``seconds`` (outbound or homing). The trial counts
    as a timeout, with the timeout penalty. A common rule in evolutionary robotics (no
    single source); it saves the time a stuck controller would spend until the limit."""

    distance: Positive = Field(description="metres the centre must move to count as moving")
    seconds: Positive = Field(description="how long the robot may stay within that distance")


class Task(_Model):
    trials: Annotated[int, Field(ge=1, le=100_000, strict=True)] = 100
    time_limit_s: Positive = Field(30.0, description="per trial, seconds")
    site_values: dict[Name, Finite] = Field(description="value of each site at the first trial")
    relocations: list[Relocation] = Field(default_factory=list)
    scoring: Scoring = Field(default_factory=Scoring)
    reward_signal_steps: Annotated[int, Field(ge=1, le=10_000, strict=True)] = Field(
        5, description="control steps the reward signal holds the value collected"
    )
    stall: Stall | None = Field(None, description="end a trial early when the robot stands still (off by default)")


class Physics(_Model):
    time_step_s: Annotated[float, Field(gt=0, le=0.1, allow_inf_nan=False, strict=True)] = 0.05
    control_period_s: Annotated[float, Field(gt=0, le=1.0, allow_inf_nan=False, strict=True)] = 0.1

    @model_validator(mode="after")
    def _whole_substeps(self) -> Physics:
        ratio = self.control_period_s / self.time_step_s
        if ratio < 1 - 1e-9 or abs(ratio - round(ratio)) > 1e-6:
            raise ValueError(
                f"control_period_s ({self.control_period_s}) must be a whole multiple of "
                f"time_step_s ({self.time_step_s})"
            )
        return self

    @property
    def substeps(self) -> int:
        return max(1, round(self.control_period_s / self.time_step_s))


class WorldSpec(_Model):
    """A whole world file."""

    schema_ref: str | None = Field(None, alias="$schema", description="editor schema hint")
    format: Literal["neurodrome-world"]
    version: StrictInt
    name: Name
    description: str = Field("", max_length=4000)
    corridors: list[Corridor] = Field(min_length=1)
    walls: list[Wall] = Field(default_factory=list)
    obstacles: list[Obstacle] = Field(default_factory=list)
    home: Home
    sites: list[Site] = Field(min_length=1)
    markers: list[Marker] = Field(default_factory=list)
    robot: Robot = Field(default_factory=Robot)
    task: Task
    physics: Physics = Field(default_factory=Physics)

    @field_validator("version")
    @classmethod
    def _known_version(cls, version: int) -> int:
        if version != WORLD_VERSION:
            raise ValueError(
                f"world format version {version} is not supported; this neurodrome reads version {WORLD_VERSION}"
            )
        return version

    @model_validator(mode="after")
    def _names(self) -> WorldSpec:
        # Cross-references are reported at the exact JSON path of the offending entry.
        bad: list[tuple[tuple, str, object]] = []
        site_names = [s.name for s in self.sites]
        known = ", ".join(dict.fromkeys(site_names))
        for k, n in enumerate(site_names):
            if n in site_names[:k]:
                bad.append((("sites", k, "name"), "a site name not used before", n))
        marker_names = [m.name for m in self.markers]
        for k, n in enumerate(marker_names):
            if n in marker_names[:k]:
                bad.append((("markers", k, "name"), "a marker name not used before", n))
            elif n in BUILTIN_SIGNALS:
                bad.append((("markers", k, "name"),
                            f"a name other than the built-in signals ({', '.join(BUILTIN_SIGNALS)})", n))
        for k, sig in enumerate(self.robot.signals):
            if sig not in BUILTIN_SIGNALS and sig not in marker_names:
                bad.append((("robot", "signals", k),
                            f"a built-in signal ({', '.join(BUILTIN_SIGNALS)}) or a marker name "
                            f"({', '.join(marker_names) or 'none defined'})", sig))
        for n in self.task.site_values:
            if n not in site_names:
                bad.append((("task", "site_values", n), f"a site name ({known})", n))
        missing = [n for n in site_names if n not in self.task.site_values]
        if missing:
            bad.append((("task", "site_values"), f"a value for every site (missing: {', '.join(missing)})",
                        list(self.task.site_values)))
        for k, event in enumerate(self.task.relocations):
            field, names = ("sites", list(event.sites)) if event.action == "swap" else ("values", list(event.values))
            for j, n in enumerate(names):
                if n not in site_names:
                    loc = ("task", "relocations", k, field, j if field == "sites" else n)
                    bad.append((loc, f"a site name ({known})", n))
        if bad:
            raise ValidationError.from_exception_data("WorldSpec", [
                InitErrorDetails(type=PydanticCustomError("reference", expected), loc=loc, input=found)
                for loc, expected, found in bad
            ])
        return self

    # -- derived facts used across the package -------------------------------------
    def observation_channels(self) -> list[str]:
        """Names of the observation vector's entries, in order: ``range_0..`` then signals."""
        rays = [f"range_{k}" for k in range(len(self.robot.range_finders.angles_deg))]
        return rays + list(self.robot.signals)

    def all_points(self) -> list[tuple[float, float]]:
        pts = [p for c in self.corridors for p in c.path]
        pts += [w.start for w in self.walls] + [w.end for w in self.walls]
        pts += [p for o in self.obstacles for p in o.polygon]
        pts += [self.home.position] + [s.position for s in self.sites]
        return pts


def world_json_schema() -> dict:
    """The JSON Schema of the world file (draft 2020-12), as editors consume it."""
    schema = WorldSpec.model_json_schema(by_alias=True)
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["$id"] = f"https://neurodrome.invalid/schema/world-v{WORLD_VERSION}.json"
    schema["title"] = f"neurodrome world file, version {WORLD_VERSION}"
    return schema
