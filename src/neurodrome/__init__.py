"""neurodrome: corridor mazes, batched 2D robot physics and plastic neural controllers.

The public API: load a world, describe controllers, evaluate them headless.

>>> from neurodrome import evaluate, load_world
>>> world = load_world("worlds/clinic-junction.json")
>>> [round(r.fitness, 1) for r in evaluate(world, ["courier-memory", "courier-same-arm"], trials=4)]
[3.2, 0.8]
"""

from ._version import __version__
from .control.network import NetworkController
from .control.protocol import Controller, Layout, PerAgentAdapter
from .control.spec import NetworkSpec, load_network, network_from_data
from .errors import ConfigError, ControllerFileError, NeurodromeError, WorldFileError
from .evaluate import evaluate, write_replay
from .executors import LocalPool
from .sim.batch import Batch
from .sim.task import AgentResult, TrialRecord
from .world import WorldSpec, build_geometry, load_world, world_from_data

__all__ = [
    "AgentResult",
    "Batch",
    "ConfigError",
    "Controller",
    "ControllerFileError",
    "Layout",
    "LocalPool",
    "NetworkController",
    "NetworkSpec",
    "NeurodromeError",
    "PerAgentAdapter",
    "TrialRecord",
    "WorldFileError",
    "WorldSpec",
    "__version__",
    "build_geometry",
    "evaluate",
    "load_network",
    "load_world",
    "network_from_data",
    "world_from_data",
    "write_replay",
]
