"""A widget drawn line by line from Rich text, skipping Textual's general content pipeline.

The bench screen redraws several views up to 30 times a second; building their lines as
segments directly costs a fraction of converting a renderable each time.
"""

from __future__ import annotations

from rich.segment import Segment
from rich.text import Text
from textual.strip import Strip
from textual.widget import Widget


class LineView(Widget):
    """Base of the bench's views: subclasses implement ``render()`` returning one Rich
    ``Text`` (lines separated by newlines); lines are turned into strips once per refresh.
    """

    def __init__(self, *args, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self._strips: list[Strip] | None = None
        self._strips_width = -1
        self._base_style = None  # the widget's own Rich style, found once per style change

    def refresh(self, *regions, **kwargs):  # type: ignore[override]
        self._strips = None
        return super().refresh(*regions, **kwargs)

    def notify_style_update(self) -> None:
        self._strips = None
        self._base_style = None
        super().notify_style_update()

    def _base(self):
        """The widget's Rich style (colour and background from CSS), cached."""
        if self._base_style is None:
            self._base_style = self.rich_style
        return self._base_style

    def _build_strips(self, width: int) -> list[Strip]:
        """Strips of ``render()``, each cropped or padded to ``width`` cells."""
        base = self._base()
        console = self.app.console
        text = self.render()
        if not isinstance(text, Text):
            text = Text(str(text))
        strips = []
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
