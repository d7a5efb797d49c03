"""Group analysed frames into held notes, for the per-note summaries of
``bench analyze`` and unattended logging.
"""

from __future__ import annotations

import math
import statistics
from dataclasses import dataclass, field, replace

from bench.tuning import NoteMapping, TuningSettings, map_frequency
from dsp.frame import Frame

ATTACK_SKIP_S = 0.06
"""Start of a note left out of its cents statistics (the attack transient), seconds."""
MIN_NOTE_S = 0.08
"""Voiced stretches shorter than this are blips, not notes, seconds."""
GAP_S = 0.05
"""Unvoiced time that ends a note, seconds."""


@dataclass(frozen=True, slots=True)
class RegisterEvent:
    """A register change seen during a held note."""

    time_s: float
    kind: str  # "overblown" | "vented" | "weakening"
    sounding_note: str


@dataclass(frozen=True, slots=True)
class HeldNote:
    """Summary of one held note.

    Attributes
    ----------
    start_s, duration_s : float, seconds
    note : str
        The held (fingered) note.
    median_cents : float or None, cents
        Median corrected offset over the note's first-register frames after the attack.
    spread_cents : float or None, cents
        Half the interquartile range of the same frames.
    level_dbfs : float, dBFS
        Median level.
    events : tuple of RegisterEvent
    """

    start_s: float
    duration_s: float
    note: str
    median_cents: float | None
    spread_cents: float | None
    level_dbfs: float
    events: tuple[RegisterEvent, ...]

    def describe(self) -> str:
        """One line for a maker: start, duration, note, cents, level, register events."""
        if self.median_cents is None:
            cents = "   (only jumped)"
        else:
            cents = f"{self.median_cents:+7.1f} c ±{self.spread_cents:4.1f}"
        text = (
            f"{self.start_s:8.2f} s  {self.duration_s:5.2f} s  {self.note:<4} {cents}"
            f"  {self.level_dbfs:6.1f} dBFS"
        )
        if self.events:
            text += "  " + ", ".join(
                f"{e.kind} at {e.time_s:.2f} s" + (f" to {e.sounding_note}" if e.kind != "weakening" else "")
                for e in self.events
            )
        return text


@dataclass(slots=True)
class _Open:
    note: str
    start_s: float
    last_voiced_s: float
    cents: list[float] = field(default_factory=list)
    levels: list[float] = field(default_factory=list)
    events: list[RegisterEvent] = field(default_factory=list)
    last_register: str | None = None


class HeldNoteTracker:
    """Fed (frame, mapping, settings) one frame at a time; returns each held note when it ends."""

    def __init__(self) -> None:
        self._open: _Open | None = None

    def reset(self) -> None:
        self._open = None

    def push(
        self, frame: Frame, mapping: NoteMapping | None, settings: TuningSettings
    ) -> HeldNote | None:
        """Add a frame; return the note that this frame ended, if any."""
        voiced = frame.f0_hz is not None and mapping is not None
        finished: HeldNote | None = None
        if not voiced:
            if self._open is not None and frame.time_s - self._open.last_voiced_s > GAP_S:
                finished = self._close()
            return finished
        assert mapping is not None
        held_hz = frame.held_f0_hz or frame.f0_hz
        assert held_hz is not None
        held_note = mapping.note
        if held_hz != frame.f0_hz:
            try:
                held_note = map_frequency(held_hz, settings).note
            except (ValueError, ArithmeticError):  # a held pitch that names no note: keep the sounding one
                pass
        if self._open is not None and (
            held_note != self._open.note or frame.time_s - self._open.last_voiced_s > GAP_S
        ):
            finished = self._close()
        if self._open is None:
            self._open = _Open(held_note, frame.time_s, frame.time_s)
        note = self._open
        note.last_voiced_s = frame.time_s
        if math.isfinite(frame.level_dbfs):
            note.levels.append(frame.level_dbfs)
        if frame.register == "jumped":
            if note.last_register != "jumped":
                note.events.append(RegisterEvent(frame.time_s, frame.jump or "jump", mapping.note))
            elif note.events[-1].sounding_note == held_note != mapping.note:
                # a jump is often seen before the pitch has moved (it is judged on the
                # newest half window): name the note it went to once the pitch reads it
                note.events[-1] = replace(note.events[-1], sounding_note=mapping.note)
        elif frame.register == "weakening":
            # one early warning per approach to a jump: flicker in a live room is not news
            if not note.events or note.events[-1].kind != "weakening":
                note.events.append(RegisterEvent(frame.time_s, "weakening", mapping.note))
        if frame.register != "jumped" and frame.time_s - note.start_s >= ATTACK_SKIP_S:
            note.cents.append(mapping.cents)
        note.last_register = frame.register
        return finished

    def finish(self) -> HeldNote | None:
        """End of input: the note still open, if any."""
        return self._close()

    def _close(self) -> HeldNote | None:
        note, self._open = self._open, None
        if note is None:
            return None
        duration = note.last_voiced_s - note.start_s
        if duration < MIN_NOTE_S:
            return None
        median = spread = None
        if note.cents:
            median = statistics.median(note.cents)
            if len(note.cents) >= 4:
                q1, _, q3 = statistics.quantiles(note.cents, n=4)
                spread = (q3 - q1) / 2
            else:
                spread = 0.0
        level = statistics.median(note.levels) if note.levels else -math.inf
        return HeldNote(note.start_s, duration, note.note, median, spread, level, tuple(note.events))
