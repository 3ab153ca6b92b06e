"""neurodrome: corridor mazes, batched 2D robot physics and plastic neural controllers."""

from ._version import __version__
from .errors import ConfigError, ControllerFileError, NeurodromeError, WorldFileError
from .evaluate import evaluate
from .world import WorldSpec, build_geometry, load_world

__all__ = [
    "ConfigError",
    "ControllerFileError",
    "NeurodromeError",
    "WorldFileError",
    "WorldSpec",
    "__version__",
    "build_geometry",
    "evaluate",
    "load_world",
]
