"""The run directory: what one evolutionary run leaves on disk, and how reports read it.

Format ``neurodrome-run``, version 1::

    RUN_DIR/run.json    {"format": "neurodrome-run", "version": 1, "treatment": str,
                         "seed": int, "world": str, "config": {...}}
    RUN_DIR/log.jsonl   one JSON object per generation, in order, generation 0 first:
                        {"generation": g, "best": f, "median": f, "mean": f,
                         "species": k, "eval_seconds": s, "best_so_far": f}

``best``, ``median`` and ``mean`` are the fitness of the generation's population;
``best_so_far`` is the best fitness of generations 0..g (it never decreases);
``eval_seconds`` the wall time spent evaluating that generation. Both files may carry extra
keys (an evolver can record more); readers ignore them. The evolver writes the files,
``neurodrome report`` reads them; other files in the directory are the evolver's own.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

import numpy as np
from pydantic import BaseModel, ConfigDict, Field, StrictInt, StrictStr

from ..errors import Problem, RunFileError
from ..jsonio import dump_json, parse_json_text, read_json_file, validate, write_atomic

RUN_FORMAT = "neurodrome-run"
RUN_VERSION = 1
HEADER_NAME = "run.json"
LOG_NAME = "log.jsonl"


class RunHeader(BaseModel):
    """Contents of ``run.json``."""

    model_config = ConfigDict(extra="allow", allow_inf_nan=False)

    format: Literal["neurodrome-run"]
    version: Literal[1]
    treatment: StrictStr = Field(min_length=1)
    seed: StrictInt
    world: StrictStr
    config: dict[str, Any]


class LogRecord(BaseModel):
    """One line of ``log.jsonl``."""

    model_config = ConfigDict(extra="allow", allow_inf_nan=False)

    generation: StrictInt = Field(ge=0)
    best: float
    median: float
    mean: float
    species: StrictInt = Field(ge=0)
    eval_seconds: float = Field(ge=0)
    best_so_far: float


@dataclass(frozen=True)
class Run:
    """One run read from disk; every array is (G,) over generations 0..G-1."""

    path: Path
    header: RunHeader
    best: np.ndarray
    median: np.ndarray
    mean: np.ndarray
    species: np.ndarray
    eval_seconds: np.ndarray
    best_so_far: np.ndarray

    @property
    def treatment(self) -> str:
        return self.header.treatment

    @property
    def group(self) -> str:
        """What a report groups by: the study arm's name, else the treatment."""
        arm = (self.header.model_extra or {}).get("arm")
        return arm if isinstance(arm, str) and arm else self.header.treatment

    @property
    def study(self) -> str | None:
        """The study the run belongs to (``neurodrome study``), or ``None``."""
        name = (self.header.model_extra or {}).get("study")
        return name if isinstance(name, str) else None

    @property
    def world_key(self) -> str:
        """Which task the run evolved on: its world, or a curriculum's list of stage worlds."""
        stages = (self.header.model_extra or {}).get("stages")
        return " -> ".join(map(str, stages)) if isinstance(stages, list) and stages else self.header.world

    def head(self, generations: int) -> Run:
        """The run's first ``generations`` generations (for a study still running)."""
        cut = slice(0, generations)
        return Run(path=self.path, header=self.header, best=self.best[cut], median=self.median[cut],
                   mean=self.mean[cut], species=self.species[cut], eval_seconds=self.eval_seconds[cut],
                   best_so_far=self.best_so_far[cut])

    @property
    def generations(self) -> int:
        return int(self.best.size)


def _read_header(path: Path) -> RunHeader:
    source = str(path)
    data = read_json_file(path, RunFileError)
    if not isinstance(data, dict):
        raise RunFileError(Problem(source, "a JSON object", type(data).__name__), source=source)
    if data.get("format") != RUN_FORMAT:
        raise RunFileError(Problem(f"{source} $.format", f"{RUN_FORMAT!r}", repr(data.get("format"))), source=source)
    if data.get("version") != RUN_VERSION:
        raise RunFileError(Problem(f"{source} $.version", f"{RUN_VERSION} (the run format this neurodrome reads)",
                                   repr(data.get("version"))), source=source)
    return validate(RunHeader, data, source, RunFileError)


def _read_log(path: Path, allow_empty: bool = False) -> list[LogRecord]:
    source = str(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise RunFileError(Problem(source, "an existing file", "no such file"), source=source) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise RunFileError(Problem(source, "readable UTF-8 text", str(exc)), source=source) from None
    records: list[LogRecord] = []
    lines = text.splitlines()
    for number, line in enumerate(lines, start=1):
        if not line.strip():
            continue
        where = f"{source}:{number}"
        try:
            data = parse_json_text(line, where, RunFileError)
        except RunFileError as exc:
            if number == len(lines) and not text.endswith("\n"):
                cut = Problem(where, "a complete last line", "a cut-off line: was the run stopped while writing it?")
                raise RunFileError([*exc.problems, cut], source=source) from None
            raise
        if not isinstance(data, dict):
            raise RunFileError(Problem(where, "a JSON object", type(data).__name__), source=source)
        record = validate(LogRecord, data, where, RunFileError)
        if record.generation != len(records):
            raise RunFileError(Problem(f"{where} $.generation", f"generation {len(records)} (lines in order, from 0)",
                                       str(record.generation)), source=source)
        if records and record.best_so_far < records[-1].best_so_far:
            raise RunFileError(Problem(f"{where} $.best_so_far", f"at least {records[-1].best_so_far} (it never decreases)",
                                       repr(record.best_so_far)), source=source)
        records.append(record)
    if not records and not allow_empty:
        raise RunFileError(Problem(source, "at least one generation", "an empty log"), source=source)
    return records


def read_run(run_dir: str | Path, allow_empty: bool = False) -> Run:
    """Read and validate one run directory; bad content raises :class:`RunFileError`.
    ``allow_empty``: a run that has not finished a generation yet has a missing or empty
    log (a run of a study that is starting) and gives arrays of length 0."""
    path = Path(run_dir)
    if not path.is_dir():
        raise RunFileError(Problem(str(path), "a run directory", "no such directory"), source=str(path))
    header = _read_header(path / HEADER_NAME)
    if allow_empty and not (path / LOG_NAME).is_file():
        records = []
    else:
        records = _read_log(path / LOG_NAME, allow_empty)

    def column(name: str) -> np.ndarray:
        return np.array([getattr(r, name) for r in records], dtype=float)

    return Run(path=path, header=header, best=column("best"), median=column("median"), mean=column("mean"),
               species=column("species"), eval_seconds=column("eval_seconds"), best_so_far=column("best_so_far"))


def find_run_dirs(paths: list[str | Path]) -> list[Path]:
    """Expand each path: a run directory stays; a folder of run directories gives its runs.

    The runs inside a folder are taken in sorted name order.
    """
    found: list[Path] = []
    for item in paths:
        path = Path(item)
        if (path / HEADER_NAME).is_file():
            found.append(path)
            continue
        if not path.is_dir():
            raise RunFileError(Problem(str(path), "a run directory", "no such directory"), source=str(path))
        inner = sorted(p for p in path.iterdir() if (p / HEADER_NAME).is_file())
        if not inner:
            raise RunFileError(Problem(str(path), f"a run directory (with {HEADER_NAME}) or a folder of run directories",
                                       f"no {HEADER_NAME} here or one level below"), source=str(path))
        found.extend(inner)
    return found


def write_run_header(run_dir: str | Path, *, treatment: str, seed: int, world: str,
                     config: dict[str, Any], **extra: Any) -> Path:
    """Write ``run.json`` atomically (for evolvers); returns its path."""
    path = Path(run_dir) / HEADER_NAME
    header = {"format": RUN_FORMAT, "version": RUN_VERSION, "treatment": treatment, "seed": seed,
              "world": world, "config": config, **extra}
    validate(RunHeader, header, str(path), RunFileError)
    write_atomic(path, dump_json(header))
    return path


def log_line(generation: int, *, best: float, median: float, mean: float, species: int,
             eval_seconds: float, best_so_far: float, **extra: Any) -> str:
    """One ``log.jsonl`` line (with its newline) for an evolver to append."""
    record = {"generation": generation, "best": best, "median": median, "mean": mean, "species": species,
              "eval_seconds": eval_seconds, "best_so_far": best_so_far, **extra}
    for key in ("best", "median", "mean", "eval_seconds", "best_so_far"):
        if not math.isfinite(float(record[key])):
            raise RunFileError(Problem(f"log record {key}", "a finite number", repr(record[key])))
    return json.dumps(record, allow_nan=False) + "\n"


def append_log_line(run_dir: str | Path, line: str) -> None:
    """Append one line to ``log.jsonl`` and flush it to disk."""
    with open(Path(run_dir) / LOG_NAME, "a", encoding="utf-8") as fh:
        fh.write(line)
        fh.flush()
        os.fsync(fh.fileno())
