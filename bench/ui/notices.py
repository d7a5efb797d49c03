"""The notice line: the screen's answers and warnings on a line of their own, newest first.

Pop-up notices covered the trail and the tuning panel; here every notice (a key's answer, a
capture, a jump, a lost input) takes its turn on one line under the capture line, coloured by
its severity and kept for a few seconds, so nothing ever hides a reading.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar, Literal

from rich.text import Text
from textual.reactive import reactive

from bench.ui.lineview import LineView

Severity = Literal["information", "warning", "error"]

KEEP_S: dict[Severity, float] = {"information": 4.0, "warning": 6.0, "error": 10.0}
"""How long a notice stays on the line, seconds, by severity (an error longest)."""


@dataclass(frozen=True, slots=True)
class ShownNotice:
    """One notice on the line: its text, severity and when it goes (monotonic seconds)."""

    text: str
    severity: Severity
    until_s: float


class NoticeLine(LineView):
    """The notices of the moment, newest first, separated by a dot; empty when all is quiet."""

    DEFAULT_CSS = "NoticeLine { height: 1; }"
    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "notice-line--information",
        "notice-line--warning",
        "notice-line--error",
        "notice-line--quiet",
    }

    notices: reactive[tuple[ShownNotice, ...]] = reactive(())
    """Notices to show, newest first (the app keeps and expires them)."""

    def render(self) -> Text:
        text = Text(no_wrap=True, overflow="ellipsis")
        if not self.notices:
            text.append("\u2014", self.get_component_rich_style("notice-line--quiet"))
            return text
        width = self.content_size.width
        for i, notice in enumerate(self.notices):
            if i and text.cell_len + 5 + len(notice.text) > width:
                break  # older notices only where they fit whole (the newest may be cut at the end)
            if i:
                text.append("  \u00b7  ", self.get_component_rich_style("notice-line--quiet"))
            text.append(notice.text, self.get_component_rich_style(f"notice-line--{notice.severity}"))
        return text


__all__ = ["KEEP_S", "NoticeLine", "ShownNotice"]
