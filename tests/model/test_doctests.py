"""The examples in the model's docstrings run and give what they show."""

from __future__ import annotations

import doctest
import importlib

import pytest


@pytest.mark.parametrize(
    "module",
    ["bench.model.acoustics", "bench.model.geometry", "bench.model.instrument", "bench.model.predict", "bench.model.demo"],
)
def test_docstring_examples(module):
    result = doctest.testmod(importlib.import_module(module))
    assert result.attempted > 0
    assert result.failed == 0
