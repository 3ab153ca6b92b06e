"""Task rules: relocation schedules, per-trial records and results.

Trials count from 1. A relocation event ``after_trial = k`` changes the site values once
trial k has ended, so trial k + 1 is the first to see them. Window events draw k uniformly
from [a, b] (inclusive) with the agent's own task stream.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from enum import IntEnum

import numpy as np

from ..world.spec import WorldSpec


class Phase(IntEnum):
    """Where an agent is in its current trial."""

    OUTBOUND = 0  #: leaving home, no site reached yet
    HOMING = 1  #: site reached, heading back home (tasks with return_home)
    SETTLING = 2  #: site reached in a task without homing: holding the reward signal
    FINISHED = 3  #: all trials done (or the controller faulted)


#: Outcome codes in behaviour descriptors: a site index >= 0, or one of these.
NO_SITE = -1
CRASHED = -2


@dataclass
class TrialRecord:
    trial: int
    site: str | None  #: site reached, if any
    value: float  #: value collected at that site (0 if none)
    crashed: bool
    crashes: int  #: wall contacts begun during the trial
    returned_home: bool
    timed_out: bool
    steps: int  #: control steps
    time_s: float
    score: float  #: this trial's contribution to fitness
    end_position: tuple[float, float]
    outcome: int  #: site index reached, else CRASHED if the trial ended in a crash, else NO_SITE
    stalled: bool = False  #: the timeout came from the world's stall rule, not the time limit


@dataclass
class RelocationRecord:
    after_trial: int
    action: str
    sites: list[str]
    before: dict[str, float]
    after: dict[str, float]


@dataclass
class AgentResult:
    """One controller's evaluation: fitness, per-trial records, relocations, faults."""

    agent: int
    fitness: float | None  #: None when the controller could not be built (see fault)
    trials: list[TrialRecord] = field(default_factory=list)
    relocations: list[RelocationRecord] = field(default_factory=list)
    steps: int = 0  #: robot control steps simulated
    fault: str | None = None
    controller: str = ""

    @property
    def outcomes(self) -> list[int]:
        """Behaviour descriptor: per trial the site index reached, or NO_SITE / CRASHED."""
        return [t.outcome for t in self.trials]

    def to_dict(self) -> dict:
        """Plain JSON data: controller, fitness, steps, fault, trials, relocations, behaviour."""
        return {
            "controller": self.controller,
            "agent": self.agent,
            "fitness": self.fitness,
            "steps": self.steps,
            "fault": self.fault,
            "trials": [asdict(t) for t in self.trials],
            "relocations": [asdict(r) for r in self.relocations],
            "behaviour": {
                "outcomes": self.outcomes,
                "end_positions": [list(t.end_position) for t in self.trials],
            },
        }


def draw_schedule(spec: WorldSpec, rng: np.random.Generator) -> list[tuple[int, int]]:
    """(after_trial, event index) pairs for one agent, in the order they apply."""
    out = []
    for k, ev in enumerate(spec.task.relocations):
        trial = ev.after_trial if ev.after_trial is not None else int(rng.integers(ev.window[0], ev.window[1] + 1))
        out.append((trial, k))
    out.sort()
    return out
