"""One line on every view: automatic capture on or off, captures taken, the last one, the
session label, the instrument and how many of its notes are still unchecked."""

from __future__ import annotations

from typing import ClassVar

from rich.text import Text
from textual.reactive import reactive

from bench.ui.lineview import LineView


class CaptureLine(LineView):
    """The capture state of the session (the app sets every field)."""

    DEFAULT_CSS = "CaptureLine { height: 1; }"
    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "capture-line--label",
        "capture-line--value",
        "capture-line--on",
        "capture-line--off",
        "capture-line--alarm",
    }

    auto: reactive[bool] = reactive(True)
    """Automatic capture of settled notes."""
    taken: reactive[int] = reactive(0)
    """Captures of the session so far."""
    last: reactive[str] = reactive("")
    """The newest capture in a few words ("F4 R1 +3 c"), or ""."""
    label: reactive[str] = reactive("")
    """Session label put on new captures."""
    instrument: reactive[str] = reactive("")
    """Instrument profile name."""
    unchecked: reactive[int] = reactive(0)
    """Notes of the compass without a capture."""
    compass: reactive[int] = reactive(0)
    """Notes of the compass."""
    problem: reactive[str] = reactive("")
    """Why captures are not written to file ("" while all is well)."""

    def render(self) -> Text:
        # Whole items only: on a narrow line the instrument goes first, then the label is
        # shortened, then "unchecked" -- never a word cut in two.
        width = self.content_size.width
        label = repr(self.label) if self.label else "(no label)"
        short_label = label if len(label) <= 16 else repr(self.label[:12] + "\u2026")
        for instrument, pass_label, unchecked in (
            (True, label, True),
            (False, label, True),
            (False, short_label, True),
            (False, short_label, False),
        ):
            text = self._line(instrument, pass_label, unchecked)
            if text.cell_len <= width:
                return text
        return text

    def _line(self, instrument: bool, pass_label: str, unchecked: bool) -> Text:
        label = self.get_component_rich_style("capture-line--label")
        value = self.get_component_rich_style("capture-line--value")
        alarm = self.get_component_rich_style("capture-line--alarm")
        text = Text(no_wrap=True, overflow="ellipsis")
        text.append("capture ", label)
        if self.auto:
            text.append(" AUTO ", self.get_component_rich_style("capture-line--on"))
        else:
            text.append(" BY KEY ", self.get_component_rich_style("capture-line--off"))
        text.append("  taken ", label)
        text.append(str(self.taken), value)
        if self.last:
            text.append("  last ", label)
            text.append(self.last, value)
        if unchecked:
            text.append("  unchecked ", label)
            text.append(f"{self.unchecked}/{self.compass}", value)
        text.append("  pass ", label)
        text.append(pass_label, value)
        if self.problem:
            text.append("  ")
            text.append(f" captures not saved: {self.problem} ", alarm)
        if instrument:
            text.append("  instrument ", label)
            text.append(self.instrument or "?", value)
        return text


__all__ = ["CaptureLine"]
