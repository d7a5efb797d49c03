"""A short pitch history: the offset in cents over the last seconds, drawn in braille dots."""

from __future__ import annotations

from typing import ClassVar

from rich.text import Text
from textual.reactive import reactive

from bench.ui.glyphs import text_from_cells
from bench.ui.lineview import LineView

TRAIL_HALF_CENTS = 25.0
"""The trail spans -25..+25 cents; points beyond are pinned to the edge row."""

_BRAILLE_BASE = 0x2800
# Dot bits of a braille cell by (column 0..1, row 0..3), Unicode braille patterns block.
_DOT_BITS = ((0x01, 0x02, 0x04, 0x40), (0x08, 0x10, 0x20, 0x80))


class PitchTrail(LineView):
    """Offset in cents against time; newest on the right, ``window_s`` seconds wide.

    Each terminal cell holds 2 x 4 braille dots. Gaps where nothing sounded stay blank.
    The zero line is dotted faintly; the left axis is labelled in cents.
    """

    COMPONENT_CLASSES: ClassVar[set[str]] = {"pitch-trail--trace", "pitch-trail--axis", "pitch-trail--zero"}

    points: reactive[tuple[tuple[float, float | None], ...]] = reactive(())
    """(stream time, seconds; offset, cents or None when unvoiced), oldest first."""
    window_s: reactive[float] = reactive(10.0)
    """Seconds of history across the plot."""

    def render(self) -> Text:
        trace = self.get_component_rich_style("pitch-trail--trace")
        axis = self.get_component_rich_style("pitch-trail--axis")
        zero = self.get_component_rich_style("pitch-trail--zero")
        label_w = 4
        rows = max(self.content_size.height - 1, 1)
        cols = max(self.content_size.width - label_w - 1, 1)
        dots_x, dots_y = cols * 2, rows * 4
        grid = [[0] * cols for _ in range(rows)]
        if self.points:
            newest_s = self.points[-1][0]
            for time_s, cents in self.points:
                if cents is None:
                    continue
                x = dots_x - 1 - int((newest_s - time_s) / self.window_s * dots_x)
                if x < 0:
                    continue
                frac = (TRAIL_HALF_CENTS - cents) / (2 * TRAIL_HALF_CENTS)  # 0 top, 1 bottom
                y = min(dots_y - 1, max(0, int(frac * dots_y)))
                grid[y // 4][x // 2] |= _DOT_BITS[x % 2][y % 4]
        zero_row = rows // 2
        lines = []
        for r in range(rows):
            if r == 0:
                label = f"{TRAIL_HALF_CENTS:+3.0f}"
            elif r == zero_row:
                label = "  0"
            elif r == rows - 1:
                label = f"{-TRAIL_HALF_CENTS:+3.0f}"
            else:
                label = ""
            chars = [f"{label:>{label_w - 1}} \u2502"]
            styles = [axis]
            for c in range(cols):
                bits = grid[r][c]
                if bits:
                    chars.append(chr(_BRAILLE_BASE + bits))
                    styles.append(trace)
                elif r == zero_row:
                    chars.append("\u2508")
                    styles.append(zero)
                else:
                    chars.append(" ")
                    styles.append(axis)
            lines.append(text_from_cells(chars, styles))
        foot = f"-{self.window_s:.0f} s".ljust(cols - 2) + "now"
        lines.append(Text(" " * label_w + foot, style=axis, no_wrap=True, overflow="crop"))
        return Text("\n").join(lines)
