"""Reading world files: JSON to a validated :class:`WorldSpec`, with clear errors."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from ..errors import WorldFileError
from ..jsonio import check_header, dump_json, read_json_file, validate, write_atomic
from .spec import WORLD_FORMAT, WORLD_VERSION, WorldSpec


def world_from_data(data: Any, source: str = "<world>") -> WorldSpec:
    """Validate already-parsed JSON data as a world; checks format and version first."""
    check_header(data, source, WorldFileError, WORLD_FORMAT, WORLD_VERSION)
    return validate(WorldSpec, data, source, WorldFileError)


def load_world(path: str | Path) -> WorldSpec:
    """Read and validate a world file; raises :class:`WorldFileError` on any problem."""
    return world_from_data(read_json_file(path, WorldFileError), str(path))


def world_to_data(spec: WorldSpec) -> dict:
    return spec.model_dump(mode="json", by_alias=True, exclude_none=True)


def save_world(spec: WorldSpec, path: str | Path) -> None:
    write_atomic(path, dump_json(world_to_data(spec)))
