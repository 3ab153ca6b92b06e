"""World files: the spec, loading, geometry, templates and lint."""

from .geometry import Geometry, build_geometry
from .load import load_world, save_world, world_from_data, world_to_data
from .spec import WORLD_FORMAT, WORLD_VERSION, WorldSpec, world_json_schema

__all__ = [
    "WORLD_FORMAT",
    "WORLD_VERSION",
    "Geometry",
    "WorldSpec",
    "build_geometry",
    "load_world",
    "save_world",
    "world_from_data",
    "world_json_schema",
    "world_to_data",
]
