"""The examples in the public modules' docstrings run as written."""

from __future__ import annotations

import doctest
import importlib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize("name", ["neurodrome", "neurodrome.evaluate", "neurodrome.env"])
def test_docstring_examples(name, monkeypatch):
    """Doctests pass from the repository root (they name bundled worlds)."""
    module = importlib.import_module(name)  # the package's `evaluate` attribute is the function
    monkeypatch.chdir(ROOT)
    result = doctest.testmod(module, raise_on_error=False)
    assert result.attempted > 0 and result.failed == 0
