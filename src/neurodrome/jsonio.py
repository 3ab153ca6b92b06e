"""Strict JSON reading and writing shared by every file format of the project.

Reading rejects what the JSON standard rejects (NaN, Infinity, duplicate keys), reports
syntax errors with line and column, and turns pydantic validation errors into
:class:`~neurodrome.errors.Problem` lists with JSON paths. Writing is atomic: a crash never
leaves a half-written file.
"""

from __future__ import annotations

import json
import os
import re
import tempfile
from pathlib import Path
from typing import Any, TypeVar

from pydantic import BaseModel, ValidationError

from .errors import NeurodromeError, Problem

M = TypeVar("M", bound=BaseModel)


def _no_constants(name: str) -> Any:
    raise ValueError(f"{name} is not valid JSON; write a finite number")


def _no_duplicates(pairs: list[tuple[str, Any]]) -> dict:
    out: dict = {}
    for key, value in pairs:
        if key in out:
            raise ValueError(f"key '{key}' appears twice in one object")
        out[key] = value
    return out


#: A JSON string (skipped) or one of the non-standard constants Python's parser accepts.
_CONSTANT = re.compile(r'"(?:\\.|[^"\\])*"|(-?Infinity|NaN)')


def _constant_position(text: str) -> tuple[int, int]:
    """Line and column (from 1) of the first NaN/Infinity outside a string, or (0, 0)."""
    for m in _CONSTANT.finditer(text):
        if m.group(1):
            line = text.count("\n", 0, m.start(1)) + 1
            return line, m.start(1) - (text.rfind("\n", 0, m.start(1)) + 1) + 1
    return 0, 0


_TOKEN = re.compile(r'"(?:\\.|[^"\\])*"|[{}\[\]:]')


def _duplicate_position(text: str) -> tuple[int, int]:
    """Line and column (from 1) of the first key repeated within one object, or (0, 0).

    Called only after the parser has accepted the text's syntax, so a light scan of
    strings and brackets is enough.
    """
    stack: list[set[str] | None] = []
    last_string: tuple[str, int] | None = None
    for m in _TOKEN.finditer(text):
        tok = m.group(0)
        if tok == "{":
            stack.append(set())
        elif tok == "[":
            stack.append(None)
        elif tok in "}]":
            if stack:
                stack.pop()
        elif tok == ":":
            if last_string is not None and stack and stack[-1] is not None:
                key, pos = last_string
                if key in stack[-1]:
                    line = text.count("\n", 0, pos) + 1
                    return line, pos - (text.rfind("\n", 0, pos) + 1) + 1
                stack[-1].add(key)
        last_string = (tok, m.start()) if tok.startswith('"') else None
    return 0, 0


def parse_json_text(text: str, source: str, error: type[NeurodromeError]) -> Any:
    """Parse JSON text strictly; raise ``error`` naming ``source``, line and column."""
    try:
        return json.loads(text, parse_constant=_no_constants, object_pairs_hook=_no_duplicates)
    except json.JSONDecodeError as exc:
        raise error(
            Problem(f"{source}:{exc.lineno}:{exc.colno}", "valid JSON", exc.msg), source=source
        ) from None
    except ValueError as exc:  # from the hooks above, or an integer too long to convert
        where = source
        message = str(exc)
        line = col = 0
        if "not valid JSON" in message:
            line, col = _constant_position(text)
        elif "appears twice" in message:
            line, col = _duplicate_position(text)
        where = f"{source}:{line}:{col}" if line else source
        raise error(Problem(where, "valid JSON", message), source=source) from None
    except RecursionError:
        raise error(Problem(source, "valid JSON", "nesting too deep"), source=source) from None


def read_json_file(path: str | Path, error: type[NeurodromeError]) -> Any:
    path = Path(path)
    source = str(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise error(Problem(source, "an existing file", "no such file"), source=source) from None
    except IsADirectoryError:
        raise error(Problem(source, "a file", "a directory"), source=source) from None
    except OSError as exc:
        raise error(Problem(source, "a readable file", exc.strerror or str(exc)), source=source) from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise error(Problem(source, "UTF-8 text", f"undecodable byte at offset {exc.start}"), source=source) from None
    return parse_json_text(text, source, error)


def json_path(loc: tuple) -> str:
    """``('task', 'relocations', 0, 'window')`` -> ``$.task.relocations[0].window``."""
    out = "$"
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        elif part in ("function-after", "function-before", "function-wrap") or "[" in str(part):
            continue
        else:
            out += f".{part}"
    return out


def _found(value: Any) -> str:
    text = json.dumps(value, default=str) if not isinstance(value, str) else repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def problems_from_validation(exc: ValidationError, source: str) -> list[Problem]:
    problems = []
    for err in exc.errors(include_url=False):
        loc = tuple(p for p in err["loc"] if not (isinstance(p, str) and p.startswith(("function-", "tagged-union"))))
        where = f"{source} {json_path(loc)}" if source else json_path(loc)
        kind = err["type"]
        msg = err["msg"]
        if msg.startswith("Value error, "):
            msg = msg[len("Value error, "):]
        if kind == "extra_forbidden":
            problems.append(Problem(where, "no such field (check the spelling)", f"unknown field {loc[-1]!r}"))
        elif kind == "missing":
            problems.append(Problem(where, "this required field", "nothing"))
        elif kind == "value_error":
            problems.append(Problem(where, msg))
        else:
            found = "" if kind == "missing" else _found(err.get("input"))
            problems.append(Problem(where, msg[0].lower() + msg[1:], found))
    return problems


def check_header(data: Any, source: str, error: type[NeurodromeError], fmt: str, version: int) -> dict:
    """The checks every file format starts with: a JSON object naming ``fmt`` and exactly
    ``version`` (an integer), so a file of another kind or version is refused clearly."""
    if not isinstance(data, dict):
        raise error(Problem(f"{source} $", "a JSON object", type(data).__name__), source=source)
    found = data.get("format")
    if found != fmt:
        raise error(Problem(f"{source} $.format", f"\"{fmt}\"", repr(found) if found is not None else "no format field"), source=source)
    found = data.get("version")
    if type(found) is not int or found != version:
        raise error(
            Problem(f"{source} $.version", f"version {version} (the version this neurodrome reads)",
                    repr(found) if found is not None else "no version field"),
            source=source,
        )
    return data


def validate(model: type[M], data: Any, source: str, error: type[NeurodromeError]) -> M:
    try:
        return model.model_validate(data)
    except ValidationError as exc:
        raise error(problems_from_validation(exc, source), source=source) from None


def write_atomic(path: str | Path, data: bytes | str) -> None:
    """Write ``data`` to ``path`` through a temporary file and a rename."""
    path = Path(path)
    payload = data.encode("utf-8") if isinstance(data, str) else data
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(payload)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise


def dump_json(obj: Any) -> str:
    return json.dumps(obj, indent=2, allow_nan=False) + "\n"
