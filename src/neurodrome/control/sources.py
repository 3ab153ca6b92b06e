"""Where controllers come from: names, files, in-memory descriptions, user code.

A *controller source* is any of:

- a bundled agent name (``courier-memory``; see :data:`reference.BUNDLED`);
- a path to a network file (``*.json``, format ``neurodrome-network``);
- a network description as a dict (what an evolver builds in memory) or a
  :class:`~neurodrome.control.spec.NetworkSpec`;
- ``module:attribute`` naming a user's factory (a class or function called with the
  world's :class:`Layout`) — **this imports and runs the user's code**;
- a factory callable or a ready controller object (in-process use only).

Sources that are plain data (names, paths, dicts, specs, ``module:attribute``) can be
sent to worker processes and cluster workers; the others cannot.
"""

from __future__ import annotations

import importlib
import sys
from pathlib import Path
from typing import Any, Sequence

from ..errors import ControllerFileError, Problem
from .network import NetworkController
from .protocol import Controller, Layout, PerAgentAdapter
from .reference import BUNDLED, bundled_factory
from .spec import NetworkSpec, check_against_layout, load_network, network_from_data


def is_portable(source: Any) -> bool:
    """True when the source is plain data that can be sent to another process."""
    return isinstance(source, (str, Path, dict, NetworkSpec))


def label(source: Any) -> str:
    """A short human name for a source, for tables and results."""
    if isinstance(source, (str, Path)):
        return str(source)
    if isinstance(source, NetworkSpec):
        return source.name or "network"
    if isinstance(source, dict):
        return str(source.get("name") or "network")
    return getattr(source, "name", None) or getattr(source, "__name__", None) or type(source).__name__


def load_spec(source: Any) -> NetworkSpec | None:
    """The network spec of a source that describes a network, else None."""
    if isinstance(source, NetworkSpec):
        return source
    if isinstance(source, dict):
        return network_from_data(source, f"<network {label(source)}>")
    if isinstance(source, (str, Path)) and str(source) not in BUNDLED and _looks_like_file(str(source)):
        return load_network(source)
    return None


def _looks_like_file(text: str) -> bool:
    return text.endswith(".json") or Path(text).exists() or "/" in text


def import_attribute(spec: str) -> Any:
    """Import ``module:attribute`` (this runs the module's code)."""
    module_name, _, attr = spec.partition(":")
    if not module_name or not attr:
        raise ControllerFileError(Problem(spec, "module:attribute", spec))
    if "" not in sys.path and str(Path.cwd()) not in sys.path:
        sys.path.insert(0, str(Path.cwd()))
    try:
        module = importlib.import_module(module_name)
    except ImportError as exc:
        raise ControllerFileError(Problem(spec, f"an importable module '{module_name}'", str(exc))) from None
    obj: Any = module
    for part in attr.split("."):
        if not hasattr(obj, part):
            raise ControllerFileError(Problem(spec, f"an attribute '{attr}' in module '{module_name}'", "no such attribute"))
        obj = getattr(obj, part)
    return obj


def _from_factory(factory: Any, layout: Layout, name: str) -> Controller:
    made = factory(layout)
    if hasattr(made, "act") and hasattr(made, "n_agents"):
        return made
    if callable(made):
        return PerAgentAdapter(made, name)
    raise ControllerFileError(
        Problem(name, "a factory returning a controller (n_agents, reset_lifetime, reset_trial, act) or a policy callable", type(made).__name__)
    )


def _is_controller(source: Any) -> bool:
    """A ready controller object (a controller class is a factory, not a controller)."""
    return not isinstance(source, type) and hasattr(source, "act") and hasattr(source, "n_agents")


def resolve(source: Any, layout: Layout) -> Controller:
    """Build the controller a source describes, for a world's observation layout."""
    if _is_controller(source):
        return source
    spec = load_spec(source)
    if spec is not None:
        check_against_layout(spec, layout, label(source))
        return NetworkController([spec], layout)
    if isinstance(source, (str, Path)):
        text = str(source)
        if text in BUNDLED:
            return bundled_factory(text)(layout)
        if ":" in text:
            return _from_factory(import_attribute(text), layout, text)
        raise ControllerFileError(
            Problem(text, f"a bundled agent ({', '.join(BUNDLED)}), a network file or module:attribute", "none of these")
        )
    if callable(source):
        return _from_factory(source, layout, label(source))
    raise ControllerFileError(Problem(label(source), "a controller source", type(source).__name__))


def resolve_all(sources: Sequence[Any], layout: Layout) -> list[Controller]:
    """Resolve many sources; consecutive network descriptions compile into one batch."""
    out: list[Controller] = []
    pending: list[NetworkSpec] = []
    for source in sources:
        spec = load_spec(source) if not _is_controller(source) else None
        if spec is not None:
            check_against_layout(spec, layout, label(source))
            pending.append(spec)
            continue
        if pending:
            out.append(NetworkController(pending, layout))
            pending = []
        out.append(resolve(source, layout))
    if pending:
        out.append(NetworkController(pending, layout))
    return out
