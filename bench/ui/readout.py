"""The two big figures: the note being played and its offset in cents."""

from __future__ import annotations

from rich.text import Text
from textual.reactive import reactive

from bench.ui.glyphs import GLYPH_ROWS, glyph_width, render_big
from bench.ui.lineview import LineView

ON_TARGET_CENTS = 5.0
"""Half-width of the "on target" window, cents.

Builders aim for about +-5 c on principal notes (from memory) and 5 c is a commonly quoted
pitch discrimination step (common practice); see /work/shared/REFERENCES.md section 5.
"""


def offset_side(cents: float | None) -> str:
    """Which side of the target an offset lies on: "flat", "sharp", "centred" or "none".

    >>> offset_side(-12.0), offset_side(4.9), offset_side(5.1), offset_side(None)
    ('flat', 'centred', 'sharp', 'none')
    """
    if cents is None:
        return "none"
    if abs(cents) <= ON_TARGET_CENTS:
        return "centred"
    return "flat" if cents < 0 else "sharp"


def _largest_scale(text: str, width: int, most: int) -> int:
    """Widest block scale (1..most) at which ``text`` fits in ``width`` cells."""
    for scale in range(most, 1, -1):
        if glyph_width(text, scale) <= width:
            return scale
    return 1


def _big(text: str, width: int, height: int) -> Text:
    """Block glyphs of ``text`` centred in ``width`` x ``height`` cells.

    A terminal cell is about twice as tall as wide, so glyphs stay about square at two
    cells across per row down; taller boxes repeat each row.
    """
    tall = max(1, min(height // GLYPH_ROWS, 3))
    lines = render_big(text, _largest_scale(text, width, 2 * tall))
    lines = [line for line in lines for _ in range(tall)]
    return Text("\n".join(line.center(width) for line in lines), no_wrap=True, overflow="crop")


class NoteFace(LineView):
    """The note name in block letters, e.g. ``F#5``; dimmed while nothing sounds."""

    DEFAULT_CSS = "NoteFace { height: 5; }"

    note: reactive[str | None] = reactive(None)
    """Note in scientific pitch notation (``C#4``, ``Bb3``); None before the first note."""
    sounding: reactive[bool] = reactive(False)
    """False while unvoiced: the last note stays, dimmed."""

    def watch_sounding(self, sounding: bool) -> None:
        self.set_class(not sounding, "-stale")

    def render(self) -> Text:
        return _big(self.note or "-", *self.content_size)


class CentsFace(LineView):
    """The offset from the target in whole cents, block digits, coloured and classed by side."""

    DEFAULT_CSS = "CentsFace { height: 5; }"

    cents: reactive[float | None] = reactive(None)
    """Offset shown, cents (the screen gives whole cents); None before the first note."""
    sounding: reactive[bool] = reactive(False)

    def watch_cents(self, cents: float | None) -> None:
        self.show_one_class(f"-{offset_side(cents)}", ("-flat", "-sharp", "-centred", "-none"))

    def watch_sounding(self, sounding: bool) -> None:
        self.set_class(not sounding, "-stale")

    def render(self) -> Text:
        if self.cents is None:
            return _big("--", *self.content_size)
        whole = round(self.cents)
        text = "0" if whole == 0 else f"{whole:+d}"
        return _big(text, *self.content_size)


__all__ = ["GLYPH_ROWS", "ON_TARGET_CENTS", "CentsFace", "NoteFace", "offset_side"]
