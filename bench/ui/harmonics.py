"""Harmonic balance H1..H8 as vertical bars: odd ones solid, even ones hatched."""

from __future__ import annotations

from typing import ClassVar

from rich.text import Text
from textual.reactive import reactive

from bench.ui.lineview import LineView

FLOOR_DB = -40.0
"""Bottom of the bar scale, dB relative to the strongest harmonic."""

_ODD_INK, _EVEN_INK = "\u2588", "\u2592"  # solid block, medium shade
_BAR_WIDTH = 2


class HarmonicBars(LineView):
    """Bars of H1..H8 in dB relative to the strongest, with the odd/even balance figure.

    Odd harmonics are drawn solid and labelled with their number in one colour; even ones
    hatched in another, so the pattern tells them apart without colour. The last two lines
    hold the harmonic numbers and ``odd/even`` in dB.
    """

    COMPONENT_CLASSES: ClassVar[set[str]] = {"harmonic-bars--odd", "harmonic-bars--even", "harmonic-bars--axis"}

    harmonics_db: reactive[tuple[float, ...] | None] = reactive(None)
    """H1..H8, dB relative to the strongest (0 dB); None when unvoiced."""
    odd_even_db: reactive[float | None] = reactive(None)
    """``10 log10(sum odd / sum even)`` of the harmonic powers, dB; None when unvoiced."""

    def render(self) -> Text:
        odd = self.get_component_rich_style("harmonic-bars--odd")
        even = self.get_component_rich_style("harmonic-bars--even")
        axis = self.get_component_rich_style("harmonic-bars--axis")
        width = self.content_size.width
        bar_rows = max(self.content_size.height - 2, 1)
        bar_width = max(2, (width - 4 - 8) // 8)
        levels = self.harmonics_db or ()
        labels = {round(-db / -FLOOR_DB * bar_rows): f"{db:3d}" for db in range(0, int(FLOOR_DB), -10)}
        lines: list[Text] = []
        for row in range(bar_rows):
            # Row ``row`` (0 = top) is inked when the bar reaches its lower edge.
            edge_db = FLOOR_DB * (row + 1) / bar_rows
            line = Text(labels.get(row, "   ") + "\u2502", style=axis)
            for n in range(1, 9):
                level = levels[n - 1] if len(levels) >= n else None
                inked = level is not None and level > edge_db - 1e-9
                ink = _ODD_INK if n % 2 else _EVEN_INK
                line.append(" ")
                line.append((ink if inked else " ") * bar_width, odd if n % 2 else even)
            lines.append(line)
        numbers = Text("   \u2514", style=axis)
        for n in range(1, 9):
            numbers.append(" ")
            numbers.append(f"{n}{'o' if n % 2 else 'e'}".ljust(bar_width), odd if n % 2 else even)
        lines.append(numbers)
        roomy = width >= 32
        balance = Text()
        balance.append(f"{_ODD_INK} odd " if roomy else f"{_ODD_INK}odd ", odd)
        balance.append(f"{_EVEN_INK} even " if roomy else f"{_EVEN_INK}even ", even)
        figure = "--" if self.odd_even_db is None else f"{self.odd_even_db:+.1f} dB"
        balance.append(f" odd/even {figure}" if roomy else f"odd/even {figure}", axis)
        lines.append(balance)
        return Text("\n").join(lines)
