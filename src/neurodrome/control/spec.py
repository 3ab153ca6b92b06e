"""The network file: pydantic models, format and version, semantic checks, load and dump.

A network file (format ``"neurodrome-network"``, version 1) lists neurons and
connections. Field-level problems (wrong types, non-finite numbers, unknown fields) come
from pydantic; the checks that need the whole network (unknown or duplicate ids,
duplicate connections, missing wheels, connections into inputs, incomplete plasticity
rules) run afterwards and each names the neuron or connection at fault. Everything
inside the package trusts a validated :class:`NetworkSpec`.

An evolver builds networks in memory as plain dicts and calls :func:`network_from_data`;
:func:`network_to_data` gives the dict back, so a spec round-trips through JSON unchanged.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator

from ..errors import ControllerFileError, Problem
from ..jsonio import check_header, dump_json, read_json_file, validate, write_atomic

NETWORK_FORMAT = "neurodrome-network"
NETWORK_VERSION = 1

#: Weight bounds of plastic connections when the file gives none ([memory, low
#: confidence] value of the published rule, Soltoggio et al. 2008, ALife XI).
DEFAULT_BOUNDS = (-10.0, 10.0)

#: Neuron output functions; ``tanh_half`` is tanh(x/2), the published default.
ACTIVATIONS = ("tanh_half", "logistic", "linear")

WHEELS = ("left", "right")

Finite = Annotated[float, Field(allow_inf_nan=False)]
Ident = Annotated[str, Field(min_length=1, max_length=64, pattern=r"^[A-Za-z0-9][A-Za-z0-9_.:-]*$")]


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True)


class RuleParts(_Model):
    """Parameters of dw_ji = tanh(m_i/2) * eta * (A o_j o_i + B o_j + C o_i + D).

    Any field may be left out; a connection's own rule overrides the network's rule field
    by field, and a plastic connection must end up with all five.
    """

    learning_rate: Finite | None = Field(None, description="eta")
    correlation: Finite | None = Field(None, description="A, weight of o_j * o_i")
    presynaptic: Finite | None = Field(None, description="B, weight of o_j alone")
    postsynaptic: Finite | None = Field(None, description="C, weight of o_i alone")
    constant: Finite | None = Field(None, description="D, constant term")

    def merged(self, override: RuleParts | None) -> RuleParts:
        if override is None:
            return self
        mine = self.model_dump()
        mine.update({k: v for k, v in override.model_dump().items() if v is not None})
        return RuleParts(**mine)

    def missing(self) -> list[str]:
        return [k for k, v in self.model_dump().items() if v is None]


class Neuron(_Model):
    """One neuron. ``channel`` binds an input; ``wheel`` binds an output."""

    id: Ident
    role: Literal["input", "bias", "hidden", "output"]
    kind: Literal["standard", "modulatory"] = Field(
        "standard", description="standard outputs feed a_i of targets, modulatory outputs feed m_i"
    )
    channel: str | None = Field(None, description="observation channel of an input neuron")
    wheel: Literal["left", "right"] | None = Field(None, description="wheel driven by an output neuron")
    bias: Finite = 0.0
    activation: Literal["tanh_half", "logistic", "linear"] = "tanh_half"


class Connection(_Model):
    source: Ident
    target: Ident
    weight: Finite = Field(description="initial weight")
    plastic: bool = False
    rule: RuleParts | None = Field(None, description="per-connection rule fields, overriding the network's")
    bounds: tuple[Finite, Finite] | None = Field(None, description="[low, high] for this plastic connection")


class NetworkSpec(_Model):
    """A whole network file."""

    schema_ref: str | None = Field(None, alias="$schema", description="editor schema hint")
    format: Literal["neurodrome-network"]
    version: int
    name: Ident | None = None
    description: str = Field("", max_length=4000)
    rule: RuleParts = Field(default_factory=RuleParts, description="plasticity rule of the whole network")
    weight_bounds: tuple[Finite, Finite] = Field(DEFAULT_BOUNDS, description="[low, high] for plastic weights")
    neurons: list[Neuron] = Field(min_length=2, max_length=4096)
    connections: list[Connection] = Field(default_factory=list, max_length=1_000_000)

    @field_validator("version")
    @classmethod
    def _known_version(cls, version: int) -> int:
        if version != NETWORK_VERSION:
            raise ValueError(
                f"network format version {version} is not supported; this neurodrome reads version {NETWORK_VERSION}"
            )
        return version

    # -- derived facts used by the compiler -------------------------------------------
    def rule_of(self, conn: Connection) -> tuple[float, float, float, float, float]:
        """(eta, A, B, C, D) of a plastic connection (validated complete)."""
        r = self.rule.merged(conn.rule)
        return (r.learning_rate, r.correlation, r.presynaptic, r.postsynaptic, r.constant)  # type: ignore[return-value]

    def rules(self) -> list[tuple[float, float, float, float, float] | None]:
        """:meth:`rule_of` for every connection (None for fixed ones), merging once."""
        base = None
        out: list[tuple[float, float, float, float, float] | None] = []
        for conn in self.connections:
            if not conn.plastic:
                out.append(None)
            elif conn.rule is None:
                base = base or self.rule_of(conn)
                out.append(base)
            else:
                out.append(self.rule_of(conn))
        return out

    def bounds_of(self, conn: Connection) -> tuple[float, float]:
        return tuple(conn.bounds) if conn.bounds is not None else tuple(self.weight_bounds)  # type: ignore[return-value]

    def neuron_ids(self) -> list[str]:
        return [n.id for n in self.neurons]


def _label(conn: Connection) -> str:
    return f"connection {conn.source} -> {conn.target}"


def _check_bounds(bounds: tuple[float, float], where: str, problems: list[Problem]) -> bool:
    if not bounds[0] < bounds[1]:
        problems.append(Problem(where, "[low, high] with low < high", f"[{bounds[0]}, {bounds[1]}]"))
        return False
    return True


def semantic_problems(spec: NetworkSpec, source: str = "") -> list[Problem]:
    """Whole-network checks; every problem names the neuron or connection at fault."""
    at = f"{source} $" if source else "$"
    problems: list[Problem] = []
    by_id: dict[str, Neuron] = {}
    wheels: dict[str, str] = {}
    for k, n in enumerate(spec.neurons):
        where = f"{at}.neurons[{k}]"
        if n.id in by_id:
            problems.append(Problem(where, "a unique neuron id", f"neuron id '{n.id}' used twice"))
            continue
        by_id[n.id] = n
        if n.role == "input" and not n.channel:
            problems.append(Problem(where, f"an observation channel for input neuron '{n.id}'", "no channel"))
        if n.role != "input" and n.channel is not None:
            problems.append(Problem(where, f"no channel on {n.role} neuron '{n.id}' (only inputs read channels)",
                                    repr(n.channel)))
        if n.role == "output":
            if n.wheel is None:
                problems.append(Problem(where, f"a wheel ('left' or 'right') for output neuron '{n.id}'", "no wheel"))
            elif n.wheel in wheels:
                problems.append(Problem(where, "one output neuron per wheel",
                                        f"'{n.id}' and '{wheels[n.wheel]}' both drive the {n.wheel} wheel"))
            else:
                wheels[n.wheel] = n.id
        elif n.wheel is not None:
            problems.append(Problem(where, f"no wheel on {n.role} neuron '{n.id}' (only outputs drive wheels)",
                                    repr(n.wheel)))
        if n.role in ("input", "bias") and n.bias != 0.0:
            problems.append(Problem(where, f"bias 0 on {n.role} neuron '{n.id}' (its value is set, not computed)",
                                    repr(n.bias)))
    for wheel in WHEELS:
        if wheel not in wheels:
            problems.append(Problem(f"{at}.neurons", f"an output neuron with wheel '{wheel}'", "none"))
    if not _check_bounds(spec.weight_bounds, f"{at}.weight_bounds", problems):
        return problems
    seen: dict[tuple[str, str], int] = {}
    net_missing = spec.rule.missing()
    for k, c in enumerate(spec.connections):
        where = f"{at}.connections[{k}] ({_label(c)})"
        for end, nid in (("source", c.source), ("target", c.target)):
            if nid not in by_id:
                problems.append(Problem(where, f"a {end} that is a neuron id", f"unknown neuron '{nid}'"))
        if c.target in by_id and by_id[c.target].role in ("input", "bias"):
            problems.append(Problem(where, "a target that computes its value (not an input or bias neuron)",
                                    f"{by_id[c.target].role} neuron '{c.target}'"))
        key = (c.source, c.target)
        if key in seen:
            problems.append(Problem(where, "one connection per source and target",
                                    f"same as connections[{seen[key]}]"))
        else:
            seen[key] = k
        if not c.plastic:
            if c.rule is not None or c.bounds is not None:
                problems.append(Problem(where, "no rule or bounds on a fixed connection (set plastic: true)",
                                        "rule" if c.rule is not None else "bounds"))
            continue
        missing = net_missing if c.rule is None else spec.rule.merged(c.rule).missing()
        if missing:
            problems.append(Problem(where, "a complete plasticity rule (in $.rule or the connection's rule)",
                                    f"no {', '.join(missing)}"))
        bounds = spec.bounds_of(c)
        if c.bounds is not None and not _check_bounds(bounds, where + " bounds", problems):
            continue
        if not bounds[0] <= c.weight <= bounds[1]:
            problems.append(Problem(where, f"an initial weight within the bounds [{bounds[0]}, {bounds[1]}]",
                                    repr(c.weight)))
    return problems


def _name_items(problems: list[Problem], data: dict) -> list[Problem]:
    """Add the neuron id or connection ends to pydantic's JSON paths, when the raw data has them."""
    out = []
    for p in problems:
        where = p.where
        for key, label in (("neurons", lambda d: f"neuron '{d.get('id')}'"),
                           ("connections", lambda d: f"connection {d.get('source')} -> {d.get('target')}")):
            marker = f"$.{key}["
            if marker in where:
                try:
                    index = int(where.split(marker, 1)[1].split("]", 1)[0])
                    item = data[key][index]
                except (ValueError, IndexError, KeyError, TypeError):
                    continue
                if isinstance(item, dict):
                    where = f"{where} ({label(item)})"
        out.append(Problem(where, p.expected, p.found))
    return out


def network_from_data(data: Any, source: str = "<network>") -> NetworkSpec:
    """Validate parsed JSON data (or a dict built in memory) as a network."""
    check_header(data, source, ControllerFileError, NETWORK_FORMAT, NETWORK_VERSION)
    try:
        spec = validate(NetworkSpec, data, source, ControllerFileError)
    except ControllerFileError as exc:
        raise ControllerFileError(_name_items(exc.problems, data), source=source) from None
    problems = semantic_problems(spec, source)
    if problems:
        raise ControllerFileError(problems, source=source)
    return spec


def load_network(path: str | Path) -> NetworkSpec:
    """Read and validate a network file; raises :class:`ControllerFileError` on any problem."""
    return network_from_data(read_json_file(path, ControllerFileError), str(path))


def network_to_data(spec: NetworkSpec) -> dict:
    return spec.model_dump(mode="json", by_alias=True, exclude_none=True)


def save_network(spec: NetworkSpec, path: str | Path) -> None:
    write_atomic(path, dump_json(network_to_data(spec)))


def check_against_layout(spec: NetworkSpec, layout: Any, source: str = "") -> None:
    """Raise :class:`ControllerFileError` if an input reads a channel ``layout`` lacks.

    ``layout`` is a :class:`~neurodrome.control.protocol.Layout` (anything with
    ``channels``).
    """
    at = f"{source} $" if source else "$"
    label = spec.name or source or "network"
    channels = list(layout.channels)
    problems = [
        Problem(f"{at}.neurons[{k}] (neuron '{n.id}')",
                f"a channel the world provides ({', '.join(channels)})", f"channel '{n.channel}'")
        for k, n in enumerate(spec.neurons)
        if n.role == "input" and n.channel not in channels
    ]
    if problems:
        raise ControllerFileError(problems, source=source or label)


def network_json_schema() -> dict:
    """The JSON Schema of the network file (draft 2020-12), as editors consume it."""
    schema = NetworkSpec.model_json_schema(by_alias=True)
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["$id"] = f"https://neurodrome.invalid/schema/network-v{NETWORK_VERSION}.json"
    schema["title"] = f"neurodrome network file, version {NETWORK_VERSION}"
    return schema

