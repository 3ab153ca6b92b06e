"""Lockstep stepping of a batch of agents through their own trials.

One :class:`Batch` is one world, N agents and their controllers. Each control step:

1. *act*: each controller group maps its slice of the last observations to wheel
   commands; non-finite commands (or a controller that raises) stop that agent and record
   a fault;
2. *move*: the arena advances one control period (``substeps`` physics steps, wall
   contacts found by a compiled kernel after each);
3. *score*: one compiled kernel advances every agent's trial machine (crash, site, home,
   stall, timeout), writes the records of the trials that ended and restarts the agents
   that go on; Python only relocates sites (a few times per lifetime), puts restarted
   robots at home in one bulk write and resets their controllers by mask;
4. *observe*: one compiled kernel casts the range finders and reads the zone signals of
   every live agent, as :class:`Layout` says.

So per control step Python calls pymunk (``space.step`` and the bulk body I/O) and the
kernels, whatever N is; agents that have finished leave the physics, the kernels and the
network step, so a batch's cost falls with its live agents.

The step API (``step``, ``positions``, ``angles``, ``ray_points``, ``phase``, ``events``
...) is what the viewer and recorder read; they never re-simulate. ``events=False`` skips
building :class:`Event` objects, for headless evaluation.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import shapely
from numba import njit

from ..control.protocol import Controller, Layout, combine_runs
from ..world.geometry import Geometry, build_geometry
from ..world.spec import WorldSpec
from .arena import MAX_AGENTS, Arena
from .seeding import CONTROLLER_STREAM, agent_generator, agent_key, normals
from .sensors import WallGrid, Zones, cast_one_inline, ray_directions
from .task import CRASHED, NO_SITE, AgentResult, Phase, RelocationRecord, TrialRecord, draw_schedule

_SENSOR_SALT = 1
_MOTOR_SALT = 2

#: Signal sources in the compiled observation plan.
_HOME, _REWARD, _BIAS, _DISC, _POLYGON = range(5)

#: Flags the trial kernel sets per agent (bit masks).
CRASH, ARRIVE, HOME, TIMEOUT, ENDED, FINISHED, STARTING, STALLED, RELOCATE = (1 << k for k in range(9))

_NEVER = np.iinfo(np.int64).max
_FINISHED = int(Phase.FINISHED)


@dataclass(frozen=True)
class Event:
    """Something that happened to one agent during the last control step.

    ``kind``: ``trial-start``, ``site``, ``crash``, ``home``, ``timeout``, ``trial-end``,
    ``relocation``, ``fault`` or ``finished``.
    """

    agent: int
    kind: str
    trial: int
    detail: dict


class _Records:
    """Every agent's trial records as columns, (N, capacity) each, row k's first
    ``count[k]`` entries filled; capacity doubles as trials go on."""

    FIELDS = (("site", np.int64), ("value", np.float64), ("crashes", np.int64), ("returned", np.bool_),
              ("timed_out", np.bool_), ("stalled", np.bool_), ("steps", np.int64), ("score", np.float64),
              ("end_x", np.float64), ("end_y", np.float64), ("outcome", np.int64))

    def __init__(self, n: int, trials: int) -> None:
        self.capacity = max(1, min(trials, 64))
        self.columns = {name: np.zeros((n, self.capacity), dtype=t) for name, t in self.FIELDS}
        self.arrays = tuple(self.columns[name] for name, _ in self.FIELDS)  # in the kernel's order

    def ensure(self, trials_started: int) -> None:
        if trials_started > self.capacity:
            grow = max(trials_started, 2 * self.capacity)
            for name, col in self.columns.items():
                wider = np.zeros((col.shape[0], grow), dtype=col.dtype)
                wider[:, : self.capacity] = col
                self.columns[name] = wider
            self.capacity = grow
            self.arrays = tuple(self.columns[name] for name, _ in self.FIELDS)


class Batch:
    """N agents of one world stepping in lockstep; see the module docstring."""

    def __init__(
        self,
        spec: WorldSpec,
        controllers: Sequence[Controller],
        *,
        seed: int = 0,
        agent_ids: Sequence[int] | None = None,
        geometry: Geometry | None = None,
        trials: int | None = None,
        labels: Sequence[str] | None = None,
        events: bool = True,
    ) -> None:
        self.spec = spec
        self.geometry = geometry if geometry is not None else build_geometry(spec)
        self.layout = Layout.of(spec)
        self.groups: list[tuple[slice, Controller]] = []
        start = 0
        for ctrl in combine_runs(list(controllers)):
            self.groups.append((slice(start, start + ctrl.n_agents), ctrl))
            start += ctrl.n_agents
        self.n = start
        if not 1 <= self.n <= MAX_AGENTS:
            raise ValueError(f"a batch holds 1 to {MAX_AGENTS} agents, not {self.n}")
        self.agent_ids = np.arange(self.n) if agent_ids is None else np.asarray(agent_ids, dtype=np.int64)
        if self.agent_ids.shape != (self.n,):
            raise ValueError(f"agent_ids has {self.agent_ids.size} entries for {self.n} agents")
        self.labels = list(labels) if labels is not None else [""] * self.n
        self.seed = int(seed)
        self.record_events = bool(events)
        self.n_trials = int(trials) if trials is not None else spec.task.trials
        robot = spec.robot
        self.arena = Arena(spec, self.geometry, self.n)
        self.reach = robot.radius + robot.range_finders.max_range
        self.grid = WallGrid(self.geometry.walls, self.reach)
        self._grid_args = self.grid.kernel_args
        self.zones = Zones(spec)
        self.site_names = [s.name for s in spec.sites]
        self.ray_angles = np.radians(np.asarray(robot.range_finders.angles_deg, dtype=float))
        self.step_limit = max(1, math.ceil(spec.task.time_limit_s / spec.physics.control_period_s - 1e-9))
        self.control_period = spec.physics.control_period_s
        stall = spec.task.stall
        self._stall_distance = stall.distance if stall is not None else -1.0
        self._stall_steps = max(1, math.ceil(stall.seconds / self.control_period - 1e-9)) if stall is not None else 0
        scoring = spec.task.scoring
        self._fparams = np.array([scoring.crash_penalty, scoring.timeout_penalty, scoring.home_bonus,
                                  self._stall_distance], dtype=np.float64)
        self._iparams = np.array([int(scoring.crash_ends_trial), int(scoring.return_home),
                                  spec.task.reward_signal_steps, self.step_limit, self._stall_steps, self.n_trials],
                                 dtype=np.int64)
        self._motor_noise = robot.motor_noise
        self._sensor_noise = robot.range_finders.noise
        self._max_speed, self._wheel_base = robot.max_wheel_speed, robot.wheel_base
        self._radius, self._max_range = robot.radius, robot.range_finders.max_range
        self._faulted_now = False
        self._plan_signals()
        # groups whose act() takes the active mask (compiled networks) skip finished agents
        self._fast = [bool(getattr(type(ctrl), "steps_active", False)) for _, ctrl in self.groups]
        self._single_fast = len(self.groups) == 1 and self._fast[0]
        self.reset()

    # -- set-up -------------------------------------------------------------------
    def _plan_signals(self) -> None:
        """The compiled observation plan: per signal channel (source kind, disc centre and
        squared radius); polygon markers are read with shapely after the kernel."""
        markers = {m.name: m for m in self.spec.markers}
        kinds, centres, radii2, self._polygons = [], [], [], []
        n_rays = len(self.ray_angles)
        for k, name in enumerate(self.spec.robot.signals):
            centre, r2 = (0.0, 0.0), 0.0
            if name in ("home", "reward", "bias"):
                kind = {"home": _HOME, "reward": _REWARD, "bias": _BIAS}[name]
            elif markers[name].polygon is None:
                kind, centre, r2 = _DISC, tuple(markers[name].position), markers[name].radius**2
            else:
                kind = _POLYGON
                self._polygons.append((n_rays + k, shapely.Polygon(markers[name].polygon)))
            kinds.append(kind)
            centres.append(centre)
            radii2.append(r2)
        self._sig_kind = np.asarray(kinds, dtype=np.int64)
        self._sig_centre = np.asarray(centres, dtype=np.float64).reshape(-1, 2)
        self._sig_r2 = np.asarray(radii2, dtype=np.float64)

    def reset(self) -> None:
        """Start the evaluation over: lifetime reset of every controller, trial 1 for all."""
        self.arena.revive()
        n = self.n
        ids = self.agent_ids.tolist()
        self._rngs = [agent_generator(self.seed, a) for a in ids]
        self._noise_keys = np.array([agent_key(self.seed, a) for a in ids], dtype=np.uint64)
        ctrl_seeds = np.array([agent_key(self.seed, a, CONTROLLER_STREAM) for a in ids], dtype=np.uint64)
        self._schedules = [draw_schedule(self.spec, rng) for rng in self._rngs]
        self._next_relocation = np.array([sch[0][0] if sch else _NEVER for sch in self._schedules], dtype=np.int64)
        initial = np.array([self.spec.task.site_values[name] for name in self.site_names], dtype=float)
        self.site_values = np.tile(initial, (n, 1))  # (N, S)
        self.fitness = np.zeros(n)
        self.trial = np.ones(n, dtype=np.int64)
        self.phase = np.full(n, Phase.OUTBOUND, dtype=np.int64)
        self.steps_in_trial = np.zeros(n, dtype=np.int64)
        self.agent_steps = np.zeros(n, dtype=np.int64)
        self.crashes = np.zeros(n, dtype=np.int64)
        self.trial_score = np.zeros(n)
        self.site_reached = np.full(n, NO_SITE, dtype=np.int64)
        self.collected = np.zeros(n)
        self.reward_value = np.zeros(n)
        self.reward_timer = np.zeros(n, dtype=np.int64)
        self.settle_timer = np.zeros(n, dtype=np.int64)
        self.returned = np.zeros(n, dtype=np.bool_)
        self._anchor = np.zeros((n, 2))  # where the stall rule last saw the robot move
        self._anchor_step = np.zeros(n, dtype=np.int64)
        self._flags = np.zeros(n, dtype=np.int64)
        self._records = _Records(n, self.n_trials)
        self.faults: list[str | None] = [None] * n
        self.relocation_log: list[list[RelocationRecord]] = [[] for _ in range(n)]
        self.steps_taken = 0
        self.events: list[Event] = []
        self.wheels = np.zeros((n, 2))
        self.obs = np.zeros((n, self.layout.size))
        self.ray_distances = np.full((n, len(self.ray_angles)), np.inf)
        for sl, ctrl in self.groups:
            ctrl.reset_lifetime(ctrl_seeds[sl])
        everyone = np.ones(n, dtype=bool)
        self._place_home(everyone)
        self._reset_controllers(everyone)
        self.observe()

    def _place_home(self, mask: np.ndarray) -> None:
        agents = np.flatnonzero(mask)
        home = self.spec.home
        pos = np.tile(np.array(home.position, dtype=float), (len(agents), 1))
        ang = np.full(len(agents), math.radians(home.heading_deg))
        if home.jitter > 0 or home.heading_jitter_deg > 0:
            for row, k in enumerate(agents.tolist()):
                u = self._rngs[k].random(3)
                r = home.jitter * math.sqrt(u[0])
                pos[row] += (r * math.cos(2 * math.pi * u[1]), r * math.sin(2 * math.pi * u[1]))
                ang[row] += math.radians(home.heading_jitter_deg) * (2 * u[2] - 1)
        self.arena.place(agents, pos, ang)
        self._anchor[agents] = pos
        self._anchor_step[agents] = 0

    def _reset_controllers(self, mask: np.ndarray) -> None:
        for sl, ctrl in self.groups:
            sub = mask[sl]
            if sub.any():
                ctrl.reset_trial(sub.copy())

    # -- reading the state -------------------------------------------------------
    @property
    def positions(self) -> np.ndarray:
        """(N, 2) robot centres in world-file coordinates, metres."""
        return self.arena.positions

    @property
    def angles(self) -> np.ndarray:
        """(N,) headings, radians anticlockwise from +x."""
        return self.arena.angles

    @property
    def done(self) -> bool:
        return not len(self.arena._live_idx) or bool((self.phase == _FINISHED).all())

    @property
    def records(self) -> list[list[TrialRecord]]:
        """Per agent, the records of its trials so far."""
        return [self._agent_records(k) for k in range(self.n)]

    def ray_points(self) -> np.ndarray:
        """(N, R, 2) end points of the range-finder rays of the last observation (a hit
        point, or the end of the range)."""
        dist = np.minimum(self.ray_distances, self.reach)
        dirs = ray_directions(self.angles, self.ray_angles)
        return self.positions[:, None, :] + dirs * dist[..., None]

    def zone_states(self) -> dict[str, np.ndarray]:
        """Per zone an (N,) bool array: ``home``, each site name, each marker name."""
        pos = self.positions
        out = {"home": self.zones.at_home(pos)}
        sites = self.zones.at_sites(pos)
        out.update({name: sites[:, k] for k, name in enumerate(self.site_names)})
        markers = self.zones.in_markers(pos)
        out.update({name: markers[:, k] for k, name in enumerate(self.zones.marker_names)})
        return out

    def observe(self) -> np.ndarray:
        """Refresh and return ``obs`` (N, C) for the live agents (finished agents keep
        their last observation); see :class:`Layout` for the channels."""
        arena = self.arena
        _observe_kernel(arena.state, arena.origins, arena.live, self.ray_angles, self.reach, self._radius,
                        self._max_range, self._sig_kind, self._sig_centre, self._sig_r2, self.zones.home,
                        self.zones.home_r2, self.reward_timer, self.reward_value, self.ray_distances, self.obs,
                        *self._grid_args)
        if self._sensor_noise > 0 or self._polygons:
            live = arena.live
            r = len(self.ray_angles)
            if self._sensor_noise > 0:
                prox = self.obs[live, :r]
                noise = normals(self._noise_keys[live], self.agent_steps[live], r, _SENSOR_SALT)
                self.obs[live, :r] = np.clip(prox * (1.0 + self._sensor_noise * noise), 0.0, 1.0)
            pos = self.positions[live]
            for channel, polygon in self._polygons:
                self.obs[live, channel] = shapely.contains_xy(polygon, pos[:, 0], pos[:, 1])
        return self.obs

    # -- stepping ---------------------------------------------------------------------
    def step(self) -> list[Event]:
        """Advance every unfinished agent by one control step; returns this step's events."""
        self.events = []
        arena = self.arena
        if not len(arena._live_idx):  # unfinished agents are exactly the live ones here
            return self.events
        active = arena.live.copy()
        wheels = self._act(self.obs, active)
        if self._faulted_now:
            active = self.phase != _FINISHED  # faults found while acting finish agents
            wheels[~active] = 0.0
        if self._motor_noise > 0:
            noise = normals(self._noise_keys, self.agent_steps, 2, _MOTOR_SALT)
            wheels = np.clip(wheels * (1.0 + self._motor_noise * noise), -1, 1)
        self.wheels = wheels
        arena.contact_begun.fill(False)
        arena.step(wheels, self._max_speed, self._wheel_base)
        self.steps_taken += 1
        if self._score(active):
            finished = (self.phase == _FINISHED) & arena.live
            if finished.any():
                arena.retire(np.flatnonzero(finished))
        self.observe()
        return self.events

    def _act(self, obs: np.ndarray, active: np.ndarray) -> np.ndarray:
        self._faulted_now = False
        if self._single_fast:  # one compiled network group drives every agent
            ctrl = self.groups[0][1]
            out = ctrl.step_active(obs, active)  # type: ignore[attr-defined]
            if ctrl.bad_count:  # type: ignore[attr-defined]
                self._bad_commands(out, 0, active)
                out = np.where(np.isfinite(out).all(axis=1)[:, None], out, 0.0)
            return out.copy()
        wheels = np.zeros((self.n, 2))
        for (sl, ctrl), fast in zip(self.groups, self._fast):
            sub = active[sl]
            if not sub.any():
                continue
            try:
                if fast:  # a compiled network: steps only its active agents, never raises on NaN
                    out = ctrl.step_active(obs[sl], sub)  # type: ignore[attr-defined]
                    if not ctrl.bad_count:  # type: ignore[attr-defined]
                        wheels[sl] = out
                        continue
                else:
                    out = np.asarray(ctrl.act(obs[sl]), dtype=float)
                    if out.shape != (sl.stop - sl.start, 2):
                        raise ValueError(f"act() returned shape {out.shape}; expected {(sl.stop - sl.start, 2)}")
            except Exception as exc:  # a user's controller may raise anything: fail only its agents
                for k in range(sl.start, sl.stop):
                    if active[k]:
                        self._fault(k, f"controller raised {type(exc).__name__}: {exc}")
                continue
            bad = self._bad_commands(out, sl.start, active)
            if bad is not None:
                out = np.where(bad[:, None], 0.0, out)
            wheels[sl] = out if fast else np.clip(out, -1.0, 1.0)
        return wheels

    def _bad_commands(self, out: np.ndarray, first: int, active: np.ndarray) -> np.ndarray | None:
        """Fault the active agents whose commands in ``out`` (rows from agent ``first``)
        are not finite; returns the bad-row mask, or None when all are finite."""
        bad = ~np.isfinite(out).all(axis=1)
        if not bad.any():
            return None
        for k in (np.flatnonzero(bad) + first).tolist():
            if active[k]:
                self._fault(k, f"non-finite wheel command {out[k - first].tolist()}")
        return bad

    def _fault(self, k: int, reason: str) -> None:
        self._faulted_now = True
        self.faults[k] = reason
        self.phase[k] = _FINISHED
        self.events.append(Event(k, "fault", int(self.trial[k]), {"reason": reason}))

    def _score(self, active: np.ndarray) -> bool:
        """Advance the trial machines; True when something happened that may finish an agent."""
        arena = self.arena
        flags = self._flags
        records = self._records
        summary, most = _trial_kernel(
            active, arena.contact_begun, arena.state, arena.origins, self.zones.site_pos, self.zones.site_r2,
            self.zones.home, self.zones.home_r2, self.site_values, self._fparams, self._iparams,
            self._next_relocation, self.phase, self.trial, self.steps_in_trial, self.agent_steps, self.crashes,
            self.fitness, self.trial_score, self.site_reached, self.collected, self.reward_value,
            self.reward_timer, self.settle_timer, self.returned, self._anchor, self._anchor_step, flags,
            records.capacity, *records.arrays,
        )
        if summary == 0:
            return self._faulted_now
        if self.record_events:
            self._emit(flags)
        elif summary & RELOCATE:
            for k in np.flatnonzero(flags & RELOCATE).tolist():
                self._relocate(k, int(self.trial[k]) - (1 if flags[k] & STARTING else 0))
        if summary & STARTING:
            starting = (flags & STARTING) != 0
            self._place_home(starting)
            self._reset_controllers(starting)
            self._records.ensure(most)
            if self.record_events:
                for k in np.flatnonzero(starting).tolist():
                    self.events.append(Event(k, "trial-start", int(self.trial[k]), {}))
        return bool(summary & FINISHED) or self._faulted_now

    def _emit(self, flags: np.ndarray) -> None:
        """This step's events in the order the viewer and replays expect: crashes, sites,
        homes, timeouts, then per ended trial its end, relocations and finish."""
        ev = self.events
        flagged = np.flatnonzero(flags).tolist()
        cols = self._records.columns
        ended_trial = {k: int(self.trial[k]) - (1 if flags[k] & STARTING else 0) for k in flagged}
        for k in flagged:
            if flags[k] & CRASH:
                ev.append(Event(k, "crash", ended_trial[k], {}))
        for k in flagged:
            if flags[k] & ARRIVE:
                t = ended_trial[k]
                if flags[k] & ENDED:
                    site, value = int(cols["site"][k, t - 1]), float(cols["value"][k, t - 1])
                else:
                    site, value = int(self.site_reached[k]), float(self.collected[k])
                ev.append(Event(k, "site", t, {"site": self.site_names[site], "value": value}))
        for k in flagged:
            if flags[k] & HOME:
                ev.append(Event(k, "home", ended_trial[k], {}))
        for k in flagged:
            if flags[k] & TIMEOUT:
                ev.append(Event(k, "timeout", ended_trial[k], {"stalled": True} if flags[k] & STALLED else {}))
        for k in flagged:
            if flags[k] & ENDED:
                t = ended_trial[k]
                ev.append(Event(k, "trial-end", t, {"outcome": int(cols["outcome"][k, t - 1]),
                                                    "score": float(cols["score"][k, t - 1])}))
                if flags[k] & RELOCATE:
                    self._relocate(k, t)
                if flags[k] & FINISHED:
                    ev.append(Event(k, "finished", t, {"fitness": float(self.fitness[k])}))

    def _relocate(self, k: int, trial: int) -> None:
        schedule = self._schedules[k]
        while schedule and schedule[0][0] == trial:
            _, index = schedule.pop(0)
            event = self.spec.task.relocations[index]
            before = dict(zip(self.site_names, self.site_values[k].tolist()))
            after = event.apply(before)
            self.site_values[k] = [after[name] for name in self.site_names]
            moved = event.named_sites()
            rec = RelocationRecord(after_trial=trial, action=event.action, sites=moved, before=before, after=after)
            self.relocation_log[k].append(rec)
            if self.record_events:
                self.events.append(Event(k, "relocation", trial, {"sites": moved, "after": rec.after}))
        # events scheduled after a trial that already passed (a schedule past the trial
        # count) never apply; lint warns about them
        while schedule and schedule[0][0] < trial:
            schedule.pop(0)
        self._next_relocation[k] = schedule[0][0] if schedule else _NEVER

    # -- running and results ----------------------------------------------------------
    def run(self, max_steps: int | None = None) -> list[AgentResult]:
        """Step until every agent has finished its trials (or ``max_steps``)."""
        limit = max_steps if max_steps is not None else self.n_trials * (self.step_limit + 1) + 1
        while not self.done and self.steps_taken < limit:
            self.step()
        return self.results()

    def _agent_records(self, k: int) -> list[TrialRecord]:
        cols = self._records.columns
        count = int(self.trial[k]) - (0 if self.phase[k] == Phase.FINISHED and self.faults[k] is None else 1)
        count = min(count, self._records.capacity)
        if count <= 0:
            return []
        row = {name: col[k, :count].tolist() for name, col in cols.items()}
        times = np.round(cols["steps"][k, :count] * self.control_period, 9).tolist()
        return [
            TrialRecord(
                trial=t + 1,
                site=self.site_names[row["site"][t]] if row["site"][t] >= 0 else None,
                value=row["value"][t],
                crashed=row["crashes"][t] > 0,
                crashes=row["crashes"][t],
                returned_home=row["returned"][t],
                timed_out=row["timed_out"][t],
                steps=row["steps"][t],
                time_s=times[t],
                score=row["score"][t],
                end_position=(row["end_x"][t], row["end_y"][t]),
                outcome=row["outcome"][t],
                stalled=row["stalled"][t],
            )
            for t in range(count)
        ]

    def results(self) -> list[AgentResult]:
        return [
            AgentResult(
                agent=int(self.agent_ids[k]),
                fitness=float(self.fitness[k]),
                trials=self._agent_records(k),
                relocations=list(self.relocation_log[k]),
                steps=int(self.agent_steps[k]),
                fault=self.faults[k],
                controller=self.labels[k],
            )
            for k in range(self.n)
        ]


# -- compiled kernels ---------------------------------------------------------------------
@njit(cache=True, nogil=True)
def _observe_kernel(state, origins, live, ray_angles, reach, radius, max_range, sig_kind, sig_centre, sig_r2, home,
                    home_r2, reward_timer, reward_value, dist, obs, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls,
                    start, edge):  # pragma: no cover - compiled
    """Range finders (distance from the centre to the first wall along each ray, then
    proximity 1 - d/range with d from the body surface, 0 when nothing is in range) and
    the zone signals, for every live agent, in world-file coordinates."""
    n_rays = ray_angles.shape[0]
    for k in range(state.shape[0]):
        if not live[k]:
            continue
        px = state[k, 0] - origins[k, 0]
        py = state[k, 1] - origins[k, 1]
        heading = state[k, 2]
        for j in range(n_rays):
            d = cast_one_inline(px, py, heading + ray_angles[j], reach, gx0, gy0, gcell, gnx, gny, cell_start, cell_walls,
                         start, edge)
            dist[k, j] = d
            if np.isfinite(d):
                s = d - radius
                s = 0.0 if s < 0.0 else (max_range if s > max_range else s)
                obs[k, j] = 1.0 - s / max_range
            else:
                obs[k, j] = 0.0
        for c in range(sig_kind.shape[0]):
            kind = sig_kind[c]
            if kind == 0:  # home
                dx = px - home[0]
                dy = py - home[1]
                obs[k, n_rays + c] = 1.0 if dx**2 + dy**2 <= home_r2 else 0.0
            elif kind == 1:  # reward
                obs[k, n_rays + c] = reward_value[k] if reward_timer[k] > 0 else 0.0
            elif kind == 2:  # bias
                obs[k, n_rays + c] = 1.0
            elif kind == 3:  # disc marker
                dx = px - sig_centre[c, 0]
                dy = py - sig_centre[c, 1]
                obs[k, n_rays + c] = 1.0 if dx**2 + dy**2 <= sig_r2[c] else 0.0


@njit(cache=True, nogil=True)
def _trial_kernel(active, begun, state, origins, site_pos, site_r2, home, home_r2, site_values, fparams, iparams,
                  next_relocation, phase, trial, steps_in_trial, agent_steps, crashes, fitness,
                  trial_score, site_reached, collected, reward_value, reward_timer, settle_timer, returned, anchor,
                  anchor_step, flags, capacity, r_site, r_value, r_crashes, r_returned, r_timed_out, r_stalled,
                  r_steps, r_score, r_end_x, r_end_y, r_outcome):  # pragma: no cover - compiled
    """One control step of every agent's trial machine (see :class:`Phase`).

    Per active agent, in this order: a wall contact that began is a crash (penalty; ends
    the trial if the world says so); arriving in a site while outbound collects its value
    and starts homing (or settling); reaching home while homing ends the trial; settling
    counts down; a trial still running at the time limit, or whose robot stayed within the
    stall distance for the stall time, times out (penalty unless it was settling). An
    ended trial is recorded; the agent finishes after its last trial, otherwise its
    per-trial state restarts and ``STARTING`` asks the caller to put it at home.
    Returns (the OR of all flags, the highest trial number now started)."""
    crash_penalty, timeout_penalty, home_bonus, stall_distance = fparams[0], fparams[1], fparams[2], fparams[3]
    crash_ends_trial, return_home = iparams[0] != 0, iparams[1] != 0
    hold, step_limit, stall_steps, n_trials = iparams[2], iparams[3], iparams[4], iparams[5]
    summary = 0
    most = 0
    S = site_pos.shape[0]
    for k in range(active.shape[0]):
        reward_timer[k] = reward_timer[k] - 1 if reward_timer[k] > 1 else 0
        flags[k] = 0
        if not active[k]:
            continue
        f = 0
        agent_steps[k] += 1
        steps_in_trial[k] += 1
        px = state[k, 0] - origins[k, 0]
        py = state[k, 1] - origins[k, 1]
        crash_end = False
        if begun[k]:
            f |= CRASH
            crashes[k] += 1
            fitness[k] += crash_penalty
            trial_score[k] += crash_penalty
            crash_end = crash_ends_trial
        ended = crash_end
        arrived = False
        if not crash_end:
            if phase[k] == 0:  # outbound
                site = -1
                for s in range(S):
                    dx = px - site_pos[s, 0]
                    dy = py - site_pos[s, 1]
                    if dx**2 + dy**2 <= site_r2[s]:
                        site = s
                        break
                if site >= 0:
                    arrived = True
                    f |= ARRIVE
                    value = site_values[k, site]
                    site_reached[k] = site
                    collected[k] = value
                    fitness[k] += value
                    trial_score[k] += value
                    reward_value[k] = value
                    reward_timer[k] = hold
                    if return_home:
                        phase[k] = 1
                    else:
                        phase[k] = 2
                        settle_timer[k] = hold
            if not arrived and phase[k] == 1:  # homing
                dx = px - home[0]
                dy = py - home[1]
                if dx**2 + dy**2 <= home_r2:
                    f |= HOME
                    returned[k] = True
                    fitness[k] += home_bonus
                    trial_score[k] += home_bonus
                    ended = True
            if not arrived and phase[k] == 2:  # settling
                settle_timer[k] -= 1
                if settle_timer[k] <= 0:
                    ended = True
        timed_out = False
        stalled = False
        if not ended:
            if steps_in_trial[k] >= step_limit:
                timed_out = True
            elif stall_steps > 0 and phase[k] != 2:
                dx = px - anchor[k, 0]
                dy = py - anchor[k, 1]
                if dx * dx + dy * dy > stall_distance * stall_distance:
                    anchor[k, 0] = px
                    anchor[k, 1] = py
                    anchor_step[k] = steps_in_trial[k]
                elif steps_in_trial[k] - anchor_step[k] >= stall_steps:
                    timed_out = True
                    stalled = True
                    f |= STALLED
            if timed_out:
                f |= TIMEOUT
                ended = True
        if ended:
            f |= ENDED
            t = trial[k]
            unfinished = timed_out and (phase[k] == 0 or phase[k] == 1)
            if unfinished:
                fitness[k] += timeout_penalty
                trial_score[k] += timeout_penalty
            if t - 1 < capacity:
                r = t - 1
                r_site[k, r] = site_reached[k]
                r_value[k, r] = collected[k]
                r_crashes[k, r] = crashes[k]
                r_returned[k, r] = returned[k] and return_home
                r_timed_out[k, r] = unfinished
                r_stalled[k, r] = stalled
                r_steps[k, r] = steps_in_trial[k]
                r_score[k, r] = trial_score[k]
                r_end_x[k, r] = px
                r_end_y[k, r] = py
                if site_reached[k] >= 0:
                    r_outcome[k, r] = site_reached[k]
                elif crash_end:
                    r_outcome[k, r] = CRASHED
                else:
                    r_outcome[k, r] = NO_SITE
            if next_relocation[k] <= t:
                f |= RELOCATE
            if t >= n_trials:
                phase[k] = 3
                f |= FINISHED
            else:
                f |= STARTING
                trial[k] = t + 1
                phase[k] = 0
                steps_in_trial[k] = 0
                crashes[k] = 0
                reward_timer[k] = 0
                settle_timer[k] = 0
                trial_score[k] = 0.0
                collected[k] = 0.0
                reward_value[k] = 0.0
                site_reached[k] = -1
                returned[k] = False
                if t + 1 > most:
                    most = t + 1
        flags[k] = f
        summary |= f
    return summary, most
