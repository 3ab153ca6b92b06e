"""Reading world files: JSON to a validated :class:`WorldSpec`, with clear errors."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ..errors import Problem, WorldFileError
from ..jsonio import dump_json, read_json_file, validate, write_atomic
from .spec import WORLD_FORMAT, WORLD_VERSION, WorldSpec


def world_from_data(data: Any, source: str = "<world>") -> WorldSpec:
    """Validate already-parsed JSON data as a world; checks format and version first."""
    if not isinstance(data, dict):
        raise WorldFileError(Problem(f"{source} $", "a JSON object", type(data).__name__), source=source)
    fmt = data.get("format")
    if fmt != WORLD_FORMAT:
        raise WorldFileError(
            Problem(f"{source} $.format", f"\"{WORLD_FORMAT}\"", repr(fmt) if fmt is not None else "no format field"),
            source=source,
        )
    version = data.get("version")
    if type(version) is not int or version != WORLD_VERSION:
        raise WorldFileError(
            Problem(
                f"{source} $.version",
                f"version {WORLD_VERSION} (the version this neurodrome reads)",
                repr(version) if version is not None else "no version field",
            ),
            source=source,
        )
    return validate(WorldSpec, data, source, WorldFileError)


def load_world(path: str | Path) -> WorldSpec:
    """Read and validate a world file; raises :class:`WorldFileError` on any problem."""
    return world_from_data(read_json_file(path, WorldFileError), str(path))


def world_to_data(spec: WorldSpec) -> dict:
    return spec.model_dump(mode="json", by_alias=True, exclude_none=True)


def save_world(spec: WorldSpec, path: str | Path) -> None:
    write_atomic(path, dump_json(world_to_data(spec)))
