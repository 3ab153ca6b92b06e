"""The examples in the public modules' docstrings run as written."""

from __future__ import annotations

import doctest
from pathlib import Path

import pytest

import neurodrome
import neurodrome.env
import neurodrome.evaluate

ROOT = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize("module", [neurodrome, neurodrome.evaluate, neurodrome.env], ids=lambda m: m.__name__)
def test_docstring_examples(module, monkeypatch):
    """Doctests pass from the repository root (they name bundled worlds)."""
    monkeypatch.chdir(ROOT)
    result = doctest.testmod(module, raise_on_error=False)
    assert result.attempted > 0 and result.failed == 0
