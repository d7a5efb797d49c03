"""Small text panels: the input and session line, the settings in force, the detail line."""

from __future__ import annotations

import math
from pathlib import Path
from typing import ClassVar

from rich.style import Style
from rich.text import Text
from textual.reactive import reactive

from bench.tuning import TuningSettings
from bench.ui.lineview import LineView


def _signed(value: float | None, unit: str, digits: int = 1) -> str:
    """``+12.3 c`` style text, or a dash."""
    return "--" if value is None else f"{value:+.{digits}f} {unit}"


class SessionBar(LineView):
    """One line: the source and its state, input level and clipping, dropped input, log file,
    the analysis thread's load, the held view."""

    DEFAULT_CSS = "SessionBar { height: 1; }"
    COMPONENT_CLASSES: ClassVar[set[str]] = {
        "session-bar--label",
        "session-bar--value",
        "session-bar--alarm",
        "session-bar--on",
    }

    source: reactive[str] = reactive("")
    """Source description from the engine, e.g. "demo", "mic: USB Audio", "file: a.wav"."""
    state: reactive[str] = reactive("")
    """Source state from the engine, e.g. "running", "ended", "lost"."""
    level_dbfs: reactive[float | None] = reactive(None)
    """RMS input level, dBFS; None before the first frame."""
    clipped: reactive[bool] = reactive(False)
    """True when the newest frame reached full scale."""
    dropped_blocks: reactive[int] = reactive(0)
    """Input blocks lost so far."""
    analysis_load_pct: reactive[float | None] = reactive(None)
    """Share of one CPU core the analysis thread used over the last seconds, percent."""
    log_path: reactive[str | None] = reactive(None)
    """File being logged to; None when logging is off."""
    held: reactive[bool] = reactive(False)
    """True while the user holds the view still."""
    problem: reactive[str] = reactive("")
    """The engine's last word on why input stopped or failed ("" while all is well)."""
    clock_ppm: reactive[float | None] = reactive(None)
    """The input clock's error taken out of every reading, ppm; None when not calibrated."""
    tone: reactive[str] = reactive("")
    """The reference tone, e.g. "tone A4 440.00 Hz -18 dB" ("" while it is off)."""
    tone_short: reactive[str] = reactive("")
    """The same without its frequency, e.g. "tone A4 -18 dB", for a narrow line."""

    def render(self) -> Text:
        # Short, vital items first (state, level, drops, log, tone); the long source
        # description last. On a narrow line: the log's file name for its path, then the
        # source's first words, then no source at all, then no dsp load, then REC without the
        # log's name, then the tone without its frequency -- whole items, never a word cut in two.
        width = self.content_size.width
        log_name = Path(self.log_path).name if self.log_path else None
        rec = "" if self.log_path else None  # REC, no name
        source = self.source or "?"
        short_source = source.split(",")[0].split(" (")[0].split(":")[0]
        tone, short_tone = self.tone, self.tone_short or self.tone
        for log_shown, source_shown, tone_shown, dsp in (
            (self.log_path, source, tone, True),
            (log_name, source, tone, True),
            (log_name, short_source, tone, True),
            (log_name, None, tone, True),
            (log_name, None, tone, False),
            (rec, None, tone, False),
            (rec, None, short_tone, False),
        ):
            text = self._line(log_shown, source_shown, tone_shown, dsp)
            if text.cell_len <= width:
                return text
        return text

    def _line(self, log_shown: str | None, source_shown: str | None, tone: str = "", dsp: bool = True) -> Text:
        label = self.get_component_rich_style("session-bar--label")
        value = self.get_component_rich_style("session-bar--value")
        alarm = self.get_component_rich_style("session-bar--alarm")
        on = self.get_component_rich_style("session-bar--on")
        text = Text(no_wrap=True, overflow="ellipsis")
        if self.held:
            text.append(" HELD ", alarm)
            text.append(" ")
        state_ok = self.state in ("running", "")
        text.append(self.state or "--", value if state_ok else alarm)
        if self.problem and not state_ok:
            text.append(f" {self.problem}", alarm)
        text.append("  in ", label)
        if self.level_dbfs is None or not math.isfinite(self.level_dbfs):
            text.append("silent" if self.level_dbfs is not None else "--", value)
        else:
            text.append(f"{self.level_dbfs:5.1f} dBFS", value)
        if self.clipped:
            text.append(" ")
            text.append(" CLIPPING ", alarm)
        text.append("  dropped ", label)
        text.append(str(self.dropped_blocks), alarm if self.dropped_blocks else value)
        text.append("  log ", label)
        if log_shown is not None and self.log_path:
            text.append(" REC ", on)
            if log_shown:
                text.append(f" {log_shown}", value)
        else:
            text.append("off", value)
        if self.clock_ppm is not None:
            text.append("  clock ", label)
            text.append(f"{self.clock_ppm:+.1f} ppm", value)
        if tone:
            text.append("  ")
            text.append(tone, on)
        if self.analysis_load_pct is not None and dsp:
            # near a whole core, input will soon be dropped
            text.append("  dsp ", label)
            text.append(f"{self.analysis_load_pct:.0f} %", alarm if self.analysis_load_pct >= 80.0 else value)
        if source_shown is not None:
            text.append("  source ", label)
            text.append(source_shown, value)
        return text


class SettingsPanel(LineView):
    """The tuning in force: temperament and tonic, A4 and its standard, air and reference
    temperature with the correction they make, and the target lock."""

    COMPONENT_CLASSES: ClassVar[set[str]] = {"settings-panel--label", "settings-panel--value"}

    settings: reactive[TuningSettings | None] = reactive(None)
    """Settings the engine applies now."""
    temperament_name: reactive[str] = reactive("")
    """Readable name of ``settings.temperament``."""
    standard_name: reactive[str] = reactive("")
    """Name of the pitch standard ``settings.a4_hz`` matches, or ""."""
    correction_cents: reactive[float | None] = reactive(None)
    """Cents taken out for the air (corrected minus raw), from the newest reading."""
    locked_note: reactive[str | None] = reactive(None)
    """Note the target is locked to, or None when it follows the nearest note."""

    def render(self) -> Text:
        label = self.get_component_rich_style("settings-panel--label")
        value = self.get_component_rich_style("settings-panel--value")
        s = self.settings
        lines: list[Text] = []

        def row(name: str, text: str) -> None:
            line = Text(f"{name:<7}", style=label, no_wrap=True, overflow="ellipsis")
            line.append(text, value)
            lines.append(line)

        if s is None:
            row("tuning", "--")
            return Text("\n").join(lines)
        lines.append(Text(self.temperament_name or s.temperament, style=value + Style(bold=True)))
        row("tonic", s.tonic + ("   spelt with flats" if s.flats else ""))
        room = self.content_size.width - 7  # what a row holds after its name
        a4 = f"{s.a4_hz:.1f} Hz"
        standard = f"  {self.standard_name}" if self.standard_name else ""
        row("A4", a4 + standard if len(a4 + standard) <= room else a4)  # the name only where it fits whole
        air = f"{s.temp_c:.1f}\u00b0C tuned {s.ref_temp_c:.1f}\u00b0C"
        if s.rh_percent is not None and len(air + f"  {s.rh_percent:.0f}%RH") <= room:
            air += f"  {s.rh_percent:.0f}%RH"  # (a narrow panel keeps its rows for fix and target)
        row("air", air)
        row("fix", f"{_signed(self.correction_cents, 'c')} for the air")
        row("target", f"LOCKED {self.locked_note}" if self.locked_note else "nearest note")
        return Text("\n").join(lines)


class DetailLine(LineView):
    """One line under the scale: the other cents figure, heard and target frequency, lock."""

    DEFAULT_CSS = "DetailLine { height: 1; }"
    COMPONENT_CLASSES: ClassVar[set[str]] = {"detail-line--label", "detail-line--value", "detail-line--lock"}

    main_is_raw: reactive[bool] = reactive(False)
    """True when the big figure shows raw cents (then this line shows corrected ones)."""
    cents: reactive[float | None] = reactive(None)
    """Offset corrected to the reference temperature, cents."""
    cents_raw: reactive[float | None] = reactive(None)
    """Offset as measured, cents."""
    f0_hz: reactive[float | None] = reactive(None)
    """Heard fundamental, Hz."""
    target_hz: reactive[float | None] = reactive(None)
    """Target of the note, Hz."""
    locked_note: reactive[str | None] = reactive(None)
    """Locked target note, or None."""

    def render(self) -> Text:
        label = self.get_component_rich_style("detail-line--label")
        value = self.get_component_rich_style("detail-line--value")
        lock = self.get_component_rich_style("detail-line--lock")
        text = Text(no_wrap=True, overflow="ellipsis")
        if self.main_is_raw:
            text.append("air-corrected ", label)
            text.append(_signed(self.cents, "c"), value)
        else:
            text.append("raw ", label)
            text.append(_signed(self.cents_raw, "c"), value)
        text.append("   heard ", label)
        text.append("--" if self.f0_hz is None else f"{self.f0_hz:.2f} Hz", value)
        text.append("   target ", label)
        text.append("--" if self.target_hz is None else f"{self.target_hz:.2f} Hz", value)
        if self.locked_note:
            text.append("   ")
            text.append(f" LOCKED {self.locked_note} ", lock)
        return text
