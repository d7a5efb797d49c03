"""A widget drawn line by line from Rich text, skipping Textual's general content pipeline.

The bench screen redraws several views up to 30 times a second; building their lines as
segments directly costs a fraction of converting a renderable each time.

Two savings per screen update (measured with ``benchmarks/bench_ui.py``):

- a view's component styles are looked up once per style change, not once per repaint
  (Textual clears its own cache on every repaint);
- a plain repaint request (a reactive changed) is checked first: when the view would draw
  the very same text, in the same style and size, nothing is redrawn. A figure that changes
  below what the view can show (a harmonic moving within one bar cell, the deviation marker
  within one column) costs one comparison instead of a repaint.
"""

from __future__ import annotations

from collections.abc import Collection
from typing import Self

from rich.segment import Segment
from rich.style import Style
from rich.text import Text
from textual.geometry import Region, Size
from textual.strip import Strip
from textual.widget import Widget

_Drawn = tuple[Text, str | Style, Style, Size]
"""What a view shows: its text, the text's own style, the widget's style, the content size."""


class LineView(Widget):
    """Base of the bench's views: subclasses implement ``render()`` returning one Rich
    ``Text`` (lines separated by newlines); lines are turned into strips once per refresh.
    """

    skip_unchanged = True
    """Check a plain repaint against what is shown and skip it when nothing would change
    (class switch, so a benchmark can compare both ways)."""

    def __init__(
        self,
        *children: Widget,
        name: str | None = None,
        id: str | None = None,
        classes: str | None = None,
        disabled: bool = False,
        markup: bool = True,
    ) -> None:
        super().__init__(*children, name=name, id=id, classes=classes, disabled=disabled, markup=markup)
        self._strips: list[Strip] | None = None
        self._strips_width = -1
        self._base_style: Style | None = None  # the widget's own Rich style, found once per style change
        self._component_rich_styles: dict[tuple[tuple[str, ...], bool], Style] = {}
        self._shown: _Drawn | None = None  # last drawn
        self._fresh: _Drawn | None = None  # the same, rendered by the check, not yet drawn
        self._check_pending = False

    def refresh(self, *regions: Region, repaint: bool = True, layout: bool = False, recompose: bool = False) -> Self:
        if (
            self.skip_unchanged
            and repaint
            and not (regions or layout or recompose)
            and self.is_mounted
            and self._shown is not None
        ):
            if not self._check_pending:
                self._check_pending = True
                self.call_next(self._repaint_if_changed)
            return self
        self._strips = None
        self._shown = self._fresh = None
        return super().refresh(*regions, repaint=repaint, layout=layout, recompose=recompose)

    def _repaint_if_changed(self) -> None:
        """Repaint only when the text, style or size to draw differ from what is shown."""
        self._check_pending = False
        text = self._render_text()
        fresh = (text, text.style, self._base(), self.content_size)
        if fresh == self._shown:  # Text equality: same characters and spans
            return
        self._strips = None
        self._fresh = fresh
        super().refresh()

    def notify_style_update(self) -> None:
        self._strips = None
        self._base_style = None
        self._component_rich_styles.clear()
        self._shown = self._fresh = None
        super().notify_style_update()

    def get_component_rich_style(self, *names: str, partial: bool = False, default: Style | None = None) -> Style:
        key = (names, partial)
        style = self._component_rich_styles.get(key)
        if style is None:
            style = super().get_component_rich_style(*names, partial=partial, default=default)
            if default is None or style is not default:
                self._component_rich_styles[key] = style
        return style

    def show_one_class(self, chosen: str, choices: Collection[str]) -> None:
        """Put class ``chosen`` on the widget in place of the others of ``choices``, in one
        restyle (one ``set_class`` per name restyled the widget up to twice a change)."""
        want = {c for c in self.classes if c not in choices}
        want.add(chosen)
        if want != set(self.classes):
            self.set_classes(want)

    def _base(self) -> Style:
        """The widget's Rich style (colour and background from CSS), cached."""
        if self._base_style is None:
            self._base_style = self.rich_style
        return self._base_style

    def _render_text(self) -> Text:
        text = self.render()
        return text if isinstance(text, Text) else Text(str(text))

    def _build_strips(self, width: int) -> list[Strip]:
        """Strips of ``render()``, each cropped or padded to ``width`` cells."""
        base = self._base()
        console = self.app.console
        fresh = self._fresh
        if fresh is not None and fresh[2] == base and fresh[3] == self.content_size:
            text = fresh[0]
        else:
            text = self._render_text()
        self._fresh = None
        self._shown = (text.copy(), text.style, base, self.content_size)
        strips: list[Strip] = []
        for line in text.split("\n", allow_blank=True):
            line.no_wrap = True
            line.end = ""
            segments = Segment.apply_style(line.render(console), style=base)
            strips.append(Strip(segments).adjust_cell_length(width, base))
        return strips

    def render_line(self, y: int) -> Strip:
        width = self.content_size.width
        if self._strips is None or self._strips_width != width:
            self._strips = self._build_strips(width)
            self._strips_width = width
        if 0 <= y < len(self._strips):
            return self._strips[y]
        return Strip.blank(width, self._base())
