"""The block glyphs' helpers: every annotation resolves, and a line of cells becomes one span
per run of a style."""

from __future__ import annotations

import typing

import pytest
from rich.style import Style
from rich.text import Span, Text

from bench.ui import glyphs


@pytest.mark.parametrize("name", ["render_big", "glyph_width", "text_from_cells"])
def test_annotations_resolve(name):
    # typing.get_type_hints evaluates each annotation in the module's namespace (Python docs,
    # typing.get_type_hints): a name the module never imports raises NameError here.
    hints = typing.get_type_hints(getattr(glyphs, name))
    assert "return" in hints


def test_text_from_cells_returns_rich_text_with_one_span_per_run():
    # Rich's Text keeps styles as Span(start, end, style) over character offsets (rich.text API).
    red, blue = Style(color="red"), Style(color="blue")
    line = glyphs.text_from_cells(list("aabbba"), [red, red, blue, blue, blue, red])
    assert isinstance(line, Text)
    assert typing.get_type_hints(glyphs.text_from_cells)["return"] is Text
    assert line.plain == "aabbba"
    assert line.spans == [Span(0, 2, red), Span(2, 5, blue), Span(5, 6, red)]
    assert line.no_wrap and line.overflow == "crop"


def test_text_from_cells_of_no_cells_is_empty():
    line = glyphs.text_from_cells([], [])
    assert line.plain == "" and line.spans == []
