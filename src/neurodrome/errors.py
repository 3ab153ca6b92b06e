"""One error family for bad input.

Every error says *where* (a file, a JSON path, a line), what was *expected* and what was
*found*. They subclass :class:`ValueError` so ``except ValueError`` still works, and the
command line prints them in one or two lines with exit status 2, never a traceback.
"""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass
class Problem:
    """One thing wrong with an input: where, what was expected, what was found."""

    where: str
    expected: str
    found: str = ""

    def __str__(self) -> str:
        text = f"{self.where}: expected {self.expected}"
        return f"{text} (found {self.found})" if self.found else text


class NeurodromeError(ValueError):
    """Base class of the project's input errors; carries a list of :class:`Problem`."""

    def __init__(self, problems: list[Problem] | Problem | str, *, source: str = "") -> None:
        if isinstance(problems, str):
            problems = [Problem(source or "input", problems)]
        elif isinstance(problems, Problem):
            problems = [problems]
        self.problems: list[Problem] = list(problems)
        self.source = source
        super().__init__(self.render())

    def render(self, limit: int = 12) -> str:
        lines = [str(p) for p in self.problems[:limit]]
        if len(self.problems) > limit:
            lines.append(f"... and {len(self.problems) - limit} more")
        return "\n".join(lines)


class WorldFileError(NeurodromeError):
    """A world file that cannot be read or does not validate."""


class ControllerFileError(NeurodromeError):
    """A controller (network) file that cannot be read or does not validate."""


class ConfigError(NeurodromeError):
    """A configuration (evolver, experiment) that does not validate."""


class RunFileError(NeurodromeError):
    """A run directory (run.json, log.jsonl) that cannot be read or does not validate."""


class MissingExtraError(ImportError):
    """An optional dependency is missing; the message names the pip extra to install."""

    def __init__(self, extra: str, module: str, purpose: str) -> None:
        super().__init__(
            f"{purpose} needs the optional package '{module}': "
            f"install it with  pip install 'neurodrome[{extra}]'"
        )
        self.extra = extra
        self.module = module


@dataclass
class Finding:
    """A lint finding: ``level`` is ``"error"`` or ``"warning"``."""

    level: str
    where: str
    message: str
    code: str = ""
    data: dict = field(default_factory=dict)

    def __str__(self) -> str:
        return f"{self.level}: {self.where}: {self.message}"
