"""The blowing curve on screen: cents against level while a crescendo is played, the slope
in cents per dB in block digits, and the level at which the note broke into the next register."""

from __future__ import annotations

import math
from typing import ClassVar

from rich.style import Style
from rich.text import Text
from textual.reactive import reactive

from bench.ui.glyphs import GLYPH_ROWS, glyph_width, render_big, text_from_cells
from bench.ui.lineview import LineView
from bench.workflow.blowing import BlowingCurve

_BRAILLE_BASE = 0x2800
# Dot bits of a braille cell by (column 0..1, row 0..3), Unicode braille patterns block.
_DOT_BITS = ((0x01, 0x02, 0x04, 0x40), (0x08, 0x10, 0x20, 0x80))
_LABEL_W = 5
MIN_CENTS_SPAN = 20.0
"""Smallest cents span of the plot: a flat curve is not blown up into noise."""
MIN_LEVEL_SPAN_DB = 6.0
"""Smallest level span of the plot, dB."""
SLOPE_SPAN_DB = 3.0
"""Level span a curve must cover before its slope is shown, dB: over a steady level the fit
is all noise (common practice: a crescendo of a few dB at least)."""


def shown_slope(curve: BlowingCurve | None) -> float | None:
    """The curve's slope in cents/dB when its level span is wide enough to show it, else None."""
    if curve is None or curve.slope_cents_per_db is None or curve.level_range_db < SLOPE_SPAN_DB:
        return None
    return curve.slope_cents_per_db


def slope_text(slope_cents_per_db: float | None) -> str:
    """The slope as the block figure shows it, two decimals and a sign.

    >>> slope_text(0.7), slope_text(-0.123), slope_text(None)
    ('+0.70', '-0.12', '--')
    """
    if slope_cents_per_db is None or not math.isfinite(slope_cents_per_db):
        return "--"
    return f"{slope_cents_per_db:+.2f}"


def _span(lo: float, hi: float, least: float) -> tuple[float, float]:
    """(lo, hi) widened about its middle to at least ``least``, with a little room."""
    if hi - lo < least:
        mid = (lo + hi) / 2
        lo, hi = mid - least / 2, mid + least / 2
    pad = 0.05 * (hi - lo)
    return lo - pad, hi + pad


class BlowingPlot(LineView):
    """Cents (up) against level in dBFS (across) of the held note; dots are frames, the
    dashed trace is the fitted line, ┊ marks the break level.

    The app sets :attr:`curve` (a :class:`bench.workflow.blowing.BlowingCurve` or None) and
    :attr:`last_break` (the newest curve that ended in a break, shown when the held note has
    not broken).
    """

    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "blowing-plot--dots",
        "blowing-plot--fit",
        "blowing-plot--break",
        "blowing-plot--axis",
        "blowing-plot--figure",
        "blowing-plot--words",
    }

    curve: reactive[BlowingCurve | None] = reactive(None)
    """Blowing curve of the note sounding now (or the last one played), or None."""
    last_break: reactive[BlowingCurve | None] = reactive(None)
    """Newest curve that ended in a register break, or None."""

    def render(self) -> Text:
        st = {
            name: self.get_component_rich_style(f"blowing-plot--{name}")
            for name in ("dots", "fit", "break", "axis", "figure", "words")
        }
        width, height = self.content_size
        curve = self.curve
        lines: list[Text] = []
        lines.extend(self._heading(curve, width, st))
        plot_rows = max(height - len(lines) - 4, 3)  # + cents label, axis, scale, break
        lines.extend(self._plot(curve, width, plot_rows, st))
        lines.append(self._break_line(curve, st))
        return Text("\n").join(lines)

    def _heading(self, curve: BlowingCurve | None, width: int, st: dict[str, Style]) -> list[Text]:
        """The slope in block digits (or one line where there is no room), and its words."""
        slope = shown_slope(curve)
        figure = slope_text(slope)
        note = "--" if curve is None else curve.note
        words = Text(no_wrap=True, overflow="ellipsis")
        words.append(f"{note}  ", st["figure"])
        if curve is None:
            words.append("play a crescendo on one note: soft to loud, until it breaks", st["words"])
        elif slope is None:
            words.append(
                f"{curve.n} frames over {max(curve.level_range_db, 0.0):.1f} dB: blow softer and louder"
                f" (a slope needs {SLOPE_SPAN_DB:g} dB or more)",
                st["words"],
            )
        else:
            se = curve.slope_se_cents_per_db or 0.0
            words.append(
                f"{figure} \u00b1 {se:.2f} c/dB over {curve.level_min_dbfs:.1f}..{curve.level_max_dbfs:.1f} dBFS"
                f" ({curve.n} frames)",
                st["words"],
            )
        if self.content_size.height >= GLYPH_ROWS + 10 and glyph_width("+0.00") + 16 <= width:
            # No slope yet: blank rows, so the plot does not jump when one appears.
            big = render_big(figure, 1) if slope is not None else [" " * glyph_width(figure)] * GLYPH_ROWS
            out = []
            for i, row in enumerate(big):
                line = Text(no_wrap=True, overflow="crop")
                line.append(row, st["figure"])
                if i == GLYPH_ROWS // 2:
                    line.append("  cents per dB" if slope is not None else "cents per dB: not yet", st["words"])
                out.append(line)
            return [*out, words]
        return [words]

    def _plot(self, curve: BlowingCurve | None, width: int, rows: int, st: dict[str, Style]) -> list[Text]:
        cols = max(width - _LABEL_W - 1, 4)
        dots_x, dots_y = 2 * cols, 4 * rows
        levels = () if curve is None else curve.levels_dbfs
        cents = () if curve is None else curve.cents
        finite = [(lv, c) for lv, c in zip(levels, cents) if math.isfinite(lv) and math.isfinite(c)]
        if curve is not None and finite:
            x_lo, x_hi = _span(min(p[0] for p in finite), max(p[0] for p in finite), MIN_LEVEL_SPAN_DB)
            if curve.break_level_dbfs is not None:
                x_hi = max(x_hi, curve.break_level_dbfs + 0.5)
            y_lo, y_hi = _span(min(p[1] for p in finite), max(p[1] for p in finite), MIN_CENTS_SPAN)
        else:
            x_lo, x_hi, y_lo, y_hi = -40.0, -10.0, -MIN_CENTS_SPAN / 2, MIN_CENTS_SPAN / 2

        def dot_x(level: float) -> int:
            return min(dots_x - 1, max(0, int((level - x_lo) / (x_hi - x_lo) * dots_x)))

        def dot_y(c: float) -> int:
            return min(dots_y - 1, max(0, int((y_hi - c) / (y_hi - y_lo) * dots_y)))

        data = [[0] * cols for _ in range(rows)]
        for lv, c in finite:
            x, y = dot_x(lv), dot_y(c)
            data[y // 4][x // 2] |= _DOT_BITS[x % 2][y % 4]
        fit = [[0] * cols for _ in range(rows)]
        if curve is not None and shown_slope(curve) is not None and finite:
            lo_lv, hi_lv = curve.level_min_dbfs, curve.level_max_dbfs
            for x in range(dot_x(lo_lv), dot_x(hi_lv) + 1, 2):  # dashed: every other dot
                level = x_lo + (x + 0.5) / dots_x * (x_hi - x_lo)
                fitted = curve.cents_at(level)
                if fitted is None or not y_lo <= fitted <= y_hi:
                    continue
                y = dot_y(fitted)
                fit[y // 4][x // 2] |= _DOT_BITS[x % 2][y % 4]
        break_col = None
        if curve is not None and curve.break_level_dbfs is not None and math.isfinite(curve.break_level_dbfs):
            break_col = dot_x(curve.break_level_dbfs) // 2
        out = []
        for r in range(rows):
            y_at = y_hi - (r + 0.5) / rows * (y_hi - y_lo)
            label = f"{y_at:+4.0f}" if r in (0, rows // 2, rows - 1) else ""
            chars, styles = [f"{label:>{_LABEL_W - 1}} \u2502"], [st["axis"]]
            for col in range(cols):
                if data[r][col]:
                    chars.append(chr(_BRAILLE_BASE + data[r][col]))
                    styles.append(st["dots"])
                elif fit[r][col]:
                    chars.append(chr(_BRAILLE_BASE + fit[r][col]))
                    styles.append(st["fit"])
                elif col == break_col:
                    chars.append("\u250a")
                    styles.append(st["break"])
                else:
                    chars.append(" ")
                    styles.append(st["axis"])
            out.append(text_from_cells(chars, styles))
        axis = " " * (_LABEL_W - 1) + "\u2514" + "\u2500" * cols
        out.append(Text(axis, style=st["axis"], no_wrap=True, overflow="crop"))
        left, right = f"{x_lo:.0f}", f"{x_hi:.0f} dBFS"
        middle = "level"
        gap = max(cols - len(left) - len(right) - len(middle), 2)
        scale = " " * _LABEL_W + left + " " * (gap // 2) + middle + " " * (gap - gap // 2) + right
        out.append(Text(scale, style=st["axis"], no_wrap=True, overflow="crop"))
        out.insert(0, Text("cents", style=st["axis"], no_wrap=True))
        return out

    def _break_line(self, curve: BlowingCurve | None, st: dict[str, Style]) -> Text:
        line = Text(no_wrap=True, overflow="ellipsis")
        if curve is not None and curve.break_level_dbfs is not None:
            line.append(
                f" BROKE ({curve.jump_kind or 'jump'}) at {curve.break_level_dbfs:.1f} dBFS ", st["break"]
            )
            line.append("  the level where the note left its register", st["words"])
            return line
        line.append("no break on this note yet", st["words"])
        brk = self.last_break
        if brk is not None and brk.break_level_dbfs is not None:
            slope = shown_slope(brk)
            line.append(
                f"   last break: {brk.note} ({brk.jump_kind or 'jump'}) at {brk.break_level_dbfs:.1f} dBFS"
                + ("" if slope is None else f", {slope_text(slope)} c/dB"),
                st["words"],
            )
        return line


__all__ = ["MIN_CENTS_SPAN", "MIN_LEVEL_SPAN_DB", "SLOPE_SPAN_DB", "BlowingPlot", "shown_slope", "slope_text"]
