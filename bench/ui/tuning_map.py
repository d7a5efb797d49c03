"""The tuning map: every note of the instrument's compass, per register, as a column that
rises when the latest capture is sharp, falls when it is flat, sits on the line when it is on
target, is hatched grey while the note is unchecked, and is a column of red crosses when the
latest capture broke into another register (overblown "ob", vented "vt": not a measurement of
the note).

The map is made to give the shape of the whole instrument's tuning from a metre or two away:
the side of each note is told by colour *and* by shape (a column up with a ▲ tip, down with a
▼ tip, a block on the line, a hatched column).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import ClassVar

from rich.style import Style
from rich.text import Text
from textual.geometry import Size
from textual.reactive import reactive

from bench.ui.glyphs import text_from_cells
from bench.ui.lineview import LineView
from bench.ui.readout import ON_TARGET_CENTS, offset_side
from bench.workflow.chart import ChartEntry, TuningChart

_Put = Callable[[int, str, Style], None]
"""Appends (row, text, style) to the rows being drawn."""

ZONE_EDGES_CENTS = (ON_TARGET_CENTS, 12.0, 25.0)
"""Edges of the map's rows either side of the target, cents: within ±5 c a note sits on the
line; up to 12 c, 25 c and beyond, its column reaches one, two or three rows up (or down)."""

_LABEL_W = 5
_REGISTER_GAP = 2
_AXIS = {
    3: ("\u25b2>25", " +25", " +12", "  \u00b15", " -12", " -25", "\u25bc<25"),  # ▲ ±5 ▼
    2: ("\u25b2>12", " +12", "  \u00b15", " -12", "\u25bc<12"),
}
ROOMY_ROWS = 34
"""Terminal rows from which the map draws three rows each side of the line even when the
registers need two lines (below, two rows: beyond 12 c share the outer row)."""
_LEGEND = (
    ("\u25b2 sharp", "sharp"),
    ("\u25bc flat", "flat"),
    ("\u2588 within \u00b15 c", "centred"),
    ("\u2591 not yet checked", "unchecked"),
    ("\u2573 broke: not a measurement", "broken"),
)


def zone_of(cents: float) -> int:
    """Rows from the target line a capture's column reaches: 0 on target, +1..+3 sharp,
    -1..-3 flat.

    >>> zone_of(0.0), zone_of(5.0), zone_of(-5.1), zone_of(12.5), zone_of(-40.0)
    (0, 0, -1, 2, -3)
    """
    size = abs(cents)
    steps = sum(1 for edge in ZONE_EDGES_CENTS if size > edge)
    return steps if cents > 0 else -steps


@dataclass(frozen=True, slots=True)
class _Group:
    register: int
    entries: tuple[ChartEntry, ...]


def _groups(entries: Sequence[ChartEntry]) -> list[_Group]:
    """Entries by register, each register rising by note."""
    by_reg: dict[int, list[ChartEntry]] = {}
    for e in entries:
        by_reg.setdefault(e.register, []).append(e)
    return [_Group(reg, tuple(sorted(es, key=lambda e: e.midi))) for reg, es in sorted(by_reg.items())]


def _cell_width(groups: list[_Group], width: int) -> int:
    """4 cells a note where the widest register fits, else 3."""
    widest = max((len(g.entries) for g in groups), default=0)
    return 4 if _LABEL_W + 4 * widest <= width else 3


def _bands(groups: list[_Group], width: int, cell_w: int) -> list[list[_Group]]:
    """Registers packed side by side into lines of at most ``width`` cells."""
    bands: list[list[_Group]] = []
    used = width + 1
    for g in groups:
        need = len(g.entries) * cell_w
        if bands and used + _REGISTER_GAP + need <= width:
            bands[-1].append(g)
            used += _REGISTER_GAP + need
        else:
            bands.append([g])
            used = _LABEL_W + need
    return bands


def _layout(entries: Sequence[ChartEntry], width: int, screen_rows: int) -> tuple[list[_Group], int, list[list[_Group]], int]:
    """(registers, cells a note, lines of registers, gauge rows each side of the line)."""
    groups = _groups(entries)
    cell_w = _cell_width(groups, width)
    bands = _bands(groups, width, cell_w)
    half = 3 if len(bands) <= 1 or screen_rows >= ROOMY_ROWS else 2
    return groups, cell_w, bands, half


def map_height(entries: Sequence[ChartEntry], width: int, screen_rows: int = ROOMY_ROWS) -> int:
    """Lines the map needs at ``width`` cells on a terminal ``screen_rows`` high: a legend,
    then per line of registers a title, the gauge rows, the note names and the cents."""
    groups, _, bands, half = _layout(entries, width, screen_rows)
    if not groups:
        return 2
    return 1 + (2 * half + 4) * len(bands)


class TuningMap(LineView):
    """The instrument's compass per register against the target (see the module docstring).

    The app sets :attr:`chart` (a :class:`bench.workflow.chart.TuningChart`); the map only
    draws it. Under each column: the note name (written pitch when the profile transposes,
    with the sounding note in the summary line) and the cents of the latest capture, or ``?``.
    """

    DEFAULT_CSS = "TuningMap { height: auto; }"
    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "tuning-map--sharp",
        "tuning-map--flat",
        "tuning-map--centred",
        "tuning-map--unchecked",
        "tuning-map--broken",
        "tuning-map--axis",
        "tuning-map--line",
        "tuning-map--note",
        "tuning-map--title",
    }

    chart: reactive[TuningChart | None] = reactive(None, layout=True)
    """The tuning chart shown (``TuningChart``), or None before the workflow starts."""

    def get_content_height(self, container: Size, viewport: Size, width: int) -> int:
        entries = self.chart.entries if self.chart is not None else ()
        return map_height(entries, width, viewport.height)

    def _styles(self) -> dict[str, Style]:
        return {
            name: self.get_component_rich_style(f"tuning-map--{name}")
            for name in ("sharp", "flat", "centred", "unchecked", "broken", "axis", "line", "note", "title")
        }

    def render(self) -> Text:
        st = self._styles()
        width = self.content_size.width
        legend = Text(no_wrap=True, overflow="crop")
        legend.append(" " * _LABEL_W)
        for words, kind in _LEGEND:
            legend.append(words, st[kind])
            legend.append("   ")
        chart = self.chart
        if chart is None:
            return Text("\n").join([legend, Text("no chart yet", style=st["axis"])])
        _, cell_w, bands, half = _layout(chart.entries, width, self.app.size.height)
        transposed = chart.profile.written_offset_semitones != 0
        lines = [legend]
        for band in bands:
            lines.extend(self._band(band, cell_w, half, transposed, st))
        return Text("\n").join(lines)

    def _band(self, band: list[_Group], cell_w: int, half: int, transposed: bool, st: dict[str, Style]) -> list[Text]:
        """The lines of one line of registers: title, 2 * half + 1 gauge rows, names, cents."""
        n_rows = 2 * half + 4
        rows: list[tuple[list[str], list[Style]]] = [([], []) for _ in range(n_rows)]

        def put(row: int, text: str, style: Style) -> None:
            rows[row][0].append(text)
            rows[row][1].append(style)

        for r in range(n_rows):
            label = _AXIS[half][r - 1] if 1 <= r <= 2 * half + 1 else ""
            put(r, f"{label:<{_LABEL_W}}", st["axis"])
        for gi, group in enumerate(band):
            if gi:
                for r in range(n_rows):
                    put(r, " " * _REGISTER_GAP, st["axis"])
            span = len(group.entries) * cell_w
            planned = [e for e in group.entries if e.expected] or list(group.entries)
            first, last = planned[0], planned[-1]  # the register's own notes, not extras
            names = (first.written, last.written) if transposed else (first.note, last.note)
            title = f"R{group.register} {names[0]}\u2013{names[1]}"
            put(0, f"{title[:span]:<{span}}", st["title"])
            for e in group.entries:
                self._column(e, cell_w, half, transposed, st, put)
        return [text_from_cells(chars, styles) for chars, styles in rows]

    @staticmethod
    def _column(e: ChartEntry, cell_w: int, half: int, transposed: bool, st: dict[str, Style], put: _Put) -> None:
        """One note: gauge rows 1..2*half+1 (half+1 is the target line), then name and cents."""
        ink_w = cell_w - 1
        pad = " "
        cap = e.capture
        gauge = range(1, 2 * half + 2)
        if cap is None:
            for r in gauge:
                put(r, "\u2591" * ink_w + pad, st["unchecked"])
            figure = "?"
            figure_style = st["unchecked"]
        elif e.status == "broken":
            # the note broke into another register: crosses, never a column that reads as cents
            for r in gauge:
                put(r, "\u2573" * ink_w + pad, st["broken"])
            figure = "ob" if cap.jump == "overblown" else "vt" if cap.jump == "vented" else "brk"
            figure_style = st["broken"]
        else:
            zone = max(-half, min(half, zone_of(cap.cents)))
            side = offset_side(cap.cents)
            style = st[side] if side in st else st["axis"]
            for r in gauge:
                offset = half + 1 - r  # +half at the top row, -half at the bottom
                if zone == 0:
                    cell = "\u2588" * ink_w if offset == 0 else " " * ink_w
                    put(r, cell + pad, style if offset == 0 else st["line"])
                elif (zone > 0 and 0 <= offset <= zone) or (zone < 0 and zone <= offset <= 0):
                    tip = offset == zone
                    char = ("\u25b2" if zone > 0 else "\u25bc") if tip else "\u2588"
                    put(r, char * ink_w + pad, style)
                elif offset == 0:
                    put(r, "\u2500" * ink_w + pad, st["line"])
                else:
                    put(r, " " * cell_w, st["line"])
            whole = round(cap.cents)
            figure = "0" if whole == 0 else ("++" if whole > 99 else "--" if whole < -99 else f"{whole:+d}")
            figure_style = style
        name = e.written if transposed else e.note
        if not e.expected:
            name = name + "*"
        put(2 * half + 2, f"{name[:cell_w]:<{cell_w}}", st["note"] if cap is not None else st["unchecked"])
        put(2 * half + 3, f"{figure[:cell_w]:<{cell_w}}", figure_style)


__all__ = ["ROOMY_ROWS", "ZONE_EDGES_CENTS", "TuningMap", "map_height", "zone_of"]
