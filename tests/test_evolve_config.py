"""The evolver configuration: documented defaults, overrides, and clear errors (project rules)."""

from __future__ import annotations

import pytest

from neurodrome.errors import ConfigError
from neurodrome.evolve.config import EvolveConfig, config_from_data, config_json_schema, with_overrides


def _leaf_properties(schema: dict) -> list[tuple[str, dict]]:
    defs = schema.get("$defs", {})
    out = []
    for model in [schema, *defs.values()]:
        for name, prop in model.get("properties", {}).items():
            if "$ref" not in prop and "allOf" not in prop:
                out.append((name, prop))
    return out


def test_every_field_documents_its_default():
    """Each leaf field of the JSON Schema carries a default (the issue: documented defaults)."""
    leaves = _leaf_properties(config_json_schema())
    assert len(leaves) > 40
    undocumented = [name for name, prop in leaves if "default" not in prop]
    assert undocumented == []
    described = [name for name, prop in leaves if prop.get("description")]
    assert len(described) >= len(leaves) - 3  # format, version, description explain themselves


def test_empty_config_is_the_defaults():
    """{} validates to the documented defaults."""
    assert config_from_data({}) == EvolveConfig()


def test_overrides_are_validated():
    """Command-line overrides go through the same validation (a population of 0 is refused)."""
    assert with_overrides(EvolveConfig(), population=12, generations=None).population == 12
    with pytest.raises(ConfigError) as info:
        with_overrides(EvolveConfig(), population=0)
    assert info.value.problems[0].where.endswith("$.population")


def test_not_an_object_is_refused():
    """A JSON array instead of an object is a ConfigError naming the root."""
    with pytest.raises(ConfigError):
        config_from_data([1, 2])
