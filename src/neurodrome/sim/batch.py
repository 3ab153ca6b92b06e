"""Lockstep stepping of a batch of agents through their own trials.

One :class:`Batch` is one world, N agents and their controllers. Each control step:

1. *observe*: range finders and zone signals for every agent, as :class:`Layout` says;
2. *act*: each controller group maps its slice of observations to wheel commands;
   non-finite commands (or a controller that raises) stop that agent and record a fault;
3. *move*: the arena advances one control period (``substeps`` physics steps);
4. *score*: the trial machine of every agent advances (crash, site, home, timeout);
   agents whose trial ended are recorded, relocated, reset to home and their
   controllers' ``reset_trial`` is called — the only per-agent Python work, and only at
   trial boundaries.

The step API (``step``, ``positions``, ``angles``, ``ray_points``, ``phase``, ``events``
...) is what the viewer and recorder read; they never re-simulate.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..control.protocol import Controller, Layout, combine_runs
from ..world.geometry import Geometry, build_geometry
from ..world.spec import WorldSpec
from .arena import MAX_AGENTS, Arena
from .seeding import CONTROLLER_STREAM, agent_generator, agent_key
from .sensors import WallGrid, Zones, cast_rays, proximity, ray_directions
from .seeding import normals
from .task import CRASHED, NO_SITE, AgentResult, Phase, RelocationRecord, TrialRecord, draw_schedule

_SENSOR_SALT = 1
_MOTOR_SALT = 2


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
        self.n_trials = int(trials) if trials is not None else spec.task.trials
        robot = spec.robot
        self.arena = Arena(spec, self.geometry, self.n)
        self.reach = robot.radius + robot.range_finders.max_range
        self.grid = WallGrid(self.geometry.walls, self.reach)
        self.zones = Zones(spec)
        self.site_names = [s.name for s in spec.sites]
        self.ray_angles = np.radians(np.asarray(robot.range_finders.angles_deg, dtype=float))
        self.step_limit = max(1, math.ceil(spec.task.time_limit_s / spec.physics.control_period_s - 1e-9))
        self.control_period = spec.physics.control_period_s
        self._signal_plan = self._plan_signals()
        self.reset()

    # -- set-up -------------------------------------------------------------------
    def _plan_signals(self) -> list[tuple[int, str, int]]:
        """(channel index, source kind, marker index) for each signal channel."""
        plan = []
        markers = self.zones.marker_names
        n_rays = len(self.ray_angles)
        for k, name in enumerate(self.spec.robot.signals):
            kind = name if name in ("home", "reward", "bias") else "marker"
            plan.append((n_rays + k, kind, markers.index(name) if kind == "marker" else -1))
        return plan

    def reset(self) -> None:
        """Start the evaluation over: lifetime reset of every controller, trial 1 for all."""
        self.arena.revive()
        n, s = self.n, len(self.site_names)
        ids = self.agent_ids.tolist()
        self._rngs = [agent_generator(self.seed, a) for a in ids]
        self._noise_keys = np.array([agent_key(self.seed, a) for a in ids], dtype=np.uint64)
        ctrl_seeds = np.array([agent_key(self.seed, a, CONTROLLER_STREAM) for a in ids], dtype=np.uint64)
        self._schedules = [draw_schedule(self.spec, rng) for rng in self._rngs]
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
        self.returned = np.zeros(n, dtype=bool)
        self.faults: list[str | None] = [None] * n
        self.records: list[list[TrialRecord]] = [[] for _ in range(n)]
        self.relocation_log: list[list[RelocationRecord]] = [[] for _ in range(n)]
        self.steps_taken = 0
        self.events: list[Event] = []
        self.wheels = np.zeros((n, 2))
        for sl, ctrl in self.groups:
            ctrl.reset_lifetime(ctrl_seeds[sl])
        everyone = np.ones(n, dtype=bool)
        self._place_home(everyone)
        self._reset_controllers(everyone)
        self.obs = self.observe()

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
        return bool((self.phase == Phase.FINISHED).all())

    def ray_points(self) -> np.ndarray:
        """(N, R, 2) end points of the range-finder rays of the last observation (a hit
        point, or the end of the range)."""
        dist = np.minimum(self.ray_distances, self.reach)
        dirs = ray_directions(self._ray_heading, self.ray_angles)
        return self._ray_origin[:, None, :] + dirs * dist[..., None]

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
        """(N, C) observations for the current state; see :class:`Layout` for channels."""
        pos = self.positions
        heading = self.angles.copy()
        live = self.arena.live
        if live.all():
            dist = cast_rays(self.grid, pos, heading, self.ray_angles, self.reach)
        else:  # finished agents keep their last readings
            dist = self.ray_distances.copy()
            dist[live] = cast_rays(self.grid, pos[live], heading[live], self.ray_angles, self.reach)
        self._ray_origin, self._ray_heading, self.ray_distances = pos, heading, dist
        rf = self.spec.robot.range_finders
        prox = proximity(dist, self.spec.robot.radius, rf.max_range)
        if rf.noise > 0:
            prox = np.clip(prox * (1.0 + rf.noise * normals(self._noise_keys, self.agent_steps, prox.shape[1], _SENSOR_SALT)), 0.0, 1.0)
        obs = np.empty((self.n, self.layout.size))
        obs[:, : prox.shape[1]] = prox
        markers = self.zones.in_markers(pos) if self.zones.marker_names else None
        for channel, kind, marker in self._signal_plan:
            if kind == "home":
                obs[:, channel] = self.zones.at_home(pos)
            elif kind == "reward":
                obs[:, channel] = np.where(self.reward_timer > 0, self.reward_value, 0.0)
            elif kind == "bias":
                obs[:, channel] = 1.0
            else:
                obs[:, channel] = markers[:, marker]
        return obs

    # -- stepping ---------------------------------------------------------------------
    def step(self) -> list[Event]:
        """Advance every unfinished agent by one control step; returns this step's events."""
        self.events = []
        active = self.phase != Phase.FINISHED
        if not active.any():
            return self.events
        wheels = self._act(self.obs, active)
        active = self.phase != Phase.FINISHED  # faults found while acting finish agents
        wheels[~active] = 0.0
        sigma = self.spec.robot.motor_noise
        if sigma > 0:
            wheels = np.clip(wheels * (1.0 + sigma * normals(self._noise_keys, self.agent_steps, 2, _MOTOR_SALT)), -1, 1)
        self.wheels = wheels
        arena = self.arena
        arena.contact_begun[:] = False
        arena.step(wheels, self.spec.robot.max_wheel_speed, self.spec.robot.wheel_base)
        self.steps_taken += 1
        self.agent_steps += active
        self.steps_in_trial += active
        self.reward_timer = np.maximum(self.reward_timer - 1, 0)
        self._score(active)
        finished = (self.phase == Phase.FINISHED) & self.arena.live
        if finished.any():
            self.arena.retire(np.flatnonzero(finished))
        self.obs = self.observe()
        return self.events

    def _act(self, obs: np.ndarray, active: np.ndarray) -> np.ndarray:
        wheels = np.zeros((self.n, 2))
        for sl, ctrl in self.groups:
            if not active[sl].any():
                continue
            try:
                out = np.asarray(ctrl.act(obs[sl]), dtype=float)
                if out.shape != (sl.stop - sl.start, 2):
                    raise ValueError(f"act() returned shape {out.shape}; expected {(sl.stop - sl.start, 2)}")
            except Exception as exc:  # a user's controller may raise anything: fail only its agents
                for k in range(sl.start, sl.stop):
                    if active[k]:
                        self._fault(k, f"controller raised {type(exc).__name__}: {exc}")
                continue
            bad = ~np.isfinite(out).all(axis=1)
            if bad.any():
                for k in (np.flatnonzero(bad) + sl.start).tolist():
                    if active[k]:
                        self._fault(k, f"non-finite wheel command {out[k - sl.start].tolist()}")
                out = np.where(bad[:, None], 0.0, out)
            wheels[sl] = np.clip(out, -1.0, 1.0)
        return wheels

    def _fault(self, k: int, reason: str) -> None:
        self.faults[k] = reason
        self.phase[k] = Phase.FINISHED
        self.events.append(Event(k, "fault", int(self.trial[k]), {"reason": reason}))

    def _score(self, active: np.ndarray) -> None:
        scoring = self.spec.task.scoring
        pos = self.positions
        begun = self.arena.contact_begun & active
        if begun.any():
            self.crashes += begun
            self.fitness += np.where(begun, scoring.crash_penalty, 0.0)
            self.trial_score += np.where(begun, scoring.crash_penalty, 0.0)
            for k in np.flatnonzero(begun).tolist():
                self.events.append(Event(k, "crash", int(self.trial[k]), {}))
        crash_end = begun if scoring.crash_ends_trial else np.zeros(self.n, dtype=bool)
        running = active & ~crash_end

        at_sites = self.zones.at_sites(pos)
        arrive = running & (self.phase == Phase.OUTBOUND) & at_sites.any(axis=1)
        if arrive.any():
            hold = self.spec.task.reward_signal_steps
            for k in np.flatnonzero(arrive).tolist():
                site = int(np.argmax(at_sites[k]))
                value = float(self.site_values[k, site])
                self.site_reached[k] = site
                self.collected[k] = value
                self.fitness[k] += value
                self.trial_score[k] += value
                self.reward_value[k] = value
                self.reward_timer[k] = hold
                if scoring.return_home:
                    self.phase[k] = Phase.HOMING
                else:
                    self.phase[k] = Phase.SETTLING
                    self.settle_timer[k] = hold
                self.events.append(Event(k, "site", int(self.trial[k]), {"site": self.site_names[site], "value": value}))

        home = running & ~arrive & (self.phase == Phase.HOMING) & self.zones.at_home(pos)
        if home.any():
            self.returned |= home
            self.fitness += np.where(home, scoring.home_bonus, 0.0)
            self.trial_score += np.where(home, scoring.home_bonus, 0.0)
            for k in np.flatnonzero(home).tolist():
                self.events.append(Event(k, "home", int(self.trial[k]), {}))

        settling = running & ~arrive & (self.phase == Phase.SETTLING)
        self.settle_timer = np.where(settling, self.settle_timer - 1, self.settle_timer)
        settled = settling & (self.settle_timer <= 0)

        ended = crash_end | home | settled
        timeout = active & ~ended & (self.steps_in_trial >= self.step_limit)
        if timeout.any():
            unfinished = timeout & ((self.phase == Phase.OUTBOUND) | (self.phase == Phase.HOMING))
            self.fitness += np.where(unfinished, scoring.timeout_penalty, 0.0)
            self.trial_score += np.where(unfinished, scoring.timeout_penalty, 0.0)
            for k in np.flatnonzero(timeout).tolist():
                self.events.append(Event(k, "timeout", int(self.trial[k]), {}))
        ended |= timeout
        if ended.any():
            self._end_trials(ended, crash_end, timeout)

    def _end_trials(self, ended: np.ndarray, crashed: np.ndarray, timeout: np.ndarray) -> None:
        who = np.flatnonzero(ended)
        pos = self.positions[who]
        unfinished = timeout[who] & ((self.phase[who] == Phase.OUTBOUND) | (self.phase[who] == Phase.HOMING))
        site = self.site_reached[who]
        outcome = np.where(site >= 0, site, np.where(crashed[who], CRASHED, NO_SITE))
        returned = self.returned[who] & self.spec.task.scoring.return_home
        steps = self.steps_in_trial[who]
        columns = zip(
            who.tolist(), self.trial[who].tolist(), site.tolist(), outcome.tolist(), self.collected[who].tolist(),
            self.crashes[who].tolist(), returned.tolist(), unfinished.tolist(), steps.tolist(),
            np.round(steps * self.control_period, 9).tolist(), self.trial_score[who].tolist(), pos.tolist(),
        )
        starting = np.zeros(self.n, dtype=bool)
        for k, trial, site_k, outcome_k, value, crashes, home, late, n_steps, time_s, score, end in columns:
            record = TrialRecord(
                trial=trial,
                site=self.site_names[site_k] if site_k >= 0 else None,
                value=value,
                crashed=crashes > 0,
                crashes=crashes,
                returned_home=home,
                timed_out=late,
                steps=n_steps,
                time_s=time_s,
                score=score,
                end_position=(end[0], end[1]),
                outcome=outcome_k,
            )
            self.records[k].append(record)
            self.events.append(Event(k, "trial-end", trial, {"outcome": outcome_k, "score": score}))
            if self._schedules[k]:
                self._relocate(k, trial)
            if trial >= self.n_trials:
                self.phase[k] = Phase.FINISHED
                self.events.append(Event(k, "finished", trial, {"fitness": float(self.fitness[k])}))
                continue
            starting[k] = True
        self.trial[starting] += 1
        if starting.any():
            self.phase[starting] = Phase.OUTBOUND
            for name in ("steps_in_trial", "crashes", "reward_timer", "settle_timer"):
                getattr(self, name)[starting] = 0
            self.trial_score[starting] = 0.0
            self.collected[starting] = 0.0
            self.reward_value[starting] = 0.0
            self.site_reached[starting] = NO_SITE
            self.returned[starting] = False
            self._place_home(starting)
            self._reset_controllers(starting)
            for k in np.flatnonzero(starting).tolist():
                self.events.append(Event(k, "trial-start", int(self.trial[k]), {}))

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
            self.events.append(Event(k, "relocation", trial, {"sites": moved, "after": rec.after}))
        # events scheduled after a trial that already passed (a schedule past the trial
        # count) never apply; lint warns about them
        while schedule and schedule[0][0] < trial:
            schedule.pop(0)

    # -- running and results ----------------------------------------------------------
    def run(self, max_steps: int | None = None) -> list[AgentResult]:
        """Step until every agent has finished its trials (or ``max_steps``)."""
        limit = max_steps if max_steps is not None else self.n_trials * (self.step_limit + 1) + 1
        while not self.done and self.steps_taken < limit:
            self.step()
        return self.results()

    def results(self) -> list[AgentResult]:
        return [
            AgentResult(
                agent=int(self.agent_ids[k]),
                fitness=float(self.fitness[k]),
                trials=list(self.records[k]),
                relocations=list(self.relocation_log[k]),
                steps=int(self.agent_steps[k]),
                fault=self.faults[k],
                controller=self.labels[k],
            )
            for k in range(self.n)
        ]
