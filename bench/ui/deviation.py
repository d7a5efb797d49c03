"""A wide horizontal scale of the offset from the target, with a marker and a bar from zero."""

from __future__ import annotations

from typing import ClassVar

from rich.style import Style
from rich.text import Text
from textual.reactive import reactive

from bench.ui.glyphs import text_from_cells
from bench.ui.lineview import LineView
from bench.ui.readout import offset_side

SCALE_HALF_CENTS = 50.0
"""The scale runs from -50 to +50 cents: half a tempered semitone either side."""


class DeviationScale(LineView):
    """Three lines: the words FLAT / SHARP, the scale with its marker, and the cent labels.

    The bar grows from the centre towards the marker, so the side can be read from its shape
    alone; the active word is lit and the marker points to it. Offsets beyond the scale pin
    the marker to the end with an arrow.
    """

    DEFAULT_CSS = "DeviationScale { height: 3; }"
    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "deviation-scale--flat",
        "deviation-scale--sharp",
        "deviation-scale--centred",
        "deviation-scale--idle",
        "deviation-scale--ticks",
    }

    cents: reactive[float | None] = reactive(None)
    """Offset shown, cents; None when nothing sounds."""

    def render(self) -> Text:
        width = max(self.content_size.width, 21)
        side = offset_side(self.cents)
        style = {
            name: self.get_component_rich_style(f"deviation-scale--{name}")
            for name in ("flat", "sharp", "centred", "idle", "ticks")
        }
        lit = style.get(side, style["idle"])
        centre = width // 2
        half = centre - 1  # cells each side of the centre

        words = Text(no_wrap=True, overflow="crop")
        left, right, middle = "\u25c0 FLAT", "SHARP \u25b6", "ON TARGET"
        words.append(left, style["flat"] if side == "flat" else style["idle"])
        gap = width - len(left) - len(right)
        mid = middle if side == "centred" else ""
        pad = max(gap - len(mid), 0)
        words.append(" " * (pad // 2))
        words.append(mid, style["centred"])
        words.append(" " * (pad - pad // 2))
        words.append(right, style["sharp"] if side == "sharp" else style["idle"])

        if self.cents is not None:
            pos = max(-half, min(half, round(self.cents / SCALE_HALF_CENTS * half)))
            at = centre + pos
            plain = words.plain
            middle_at = plain.find(middle) if mid else -1
            on_word = middle_at <= at < middle_at + len(middle) if mid else False
            if plain[at] == " " and not on_word:
                words = words[:at] + Text("\u25bc", lit) + words[at + 1 :]
        cells = ["\u2500"] * width
        for tick_cents in range(-50, 51, 10):
            cells[centre + round(tick_cents / SCALE_HALF_CENTS * half)] = "\u253c"
        cells[centre] = "\u256b"
        styles: list[Style] = [style["ticks"]] * width
        if self.cents is not None:
            pos = max(-half, min(half, round(self.cents / SCALE_HALF_CENTS * half)))
            lo, hi = sorted((centre, centre + pos))
            for i in range(lo, hi + 1):
                cells[i] = "\u2501"
                styles[i] = lit
            if abs(self.cents) > SCALE_HALF_CENTS:
                cells[centre + pos] = "\u25b6" if pos > 0 else "\u25c0"
            else:
                cells[centre + pos] = "\u2588"
            styles[centre + pos] = lit
        scale = text_from_cells(cells, styles)

        label_cells = [" "] * width
        for tick_cents in (-50, -25, 0, 25, 50):
            label = "0" if tick_cents == 0 else f"{tick_cents:+d}"
            at = centre + round(tick_cents / SCALE_HALF_CENTS * half) - len(label) // 2
            at = max(0, min(width - len(label), at))
            label_cells[at : at + len(label)] = label
        labels = Text("".join(label_cells), style=style["ticks"], no_wrap=True)
        return Text("\n").join([words, scale, labels])
