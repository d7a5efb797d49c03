"""Held-note summaries for ``bench analyze`` and unattended runs: one line per held note
(cut by :class:`bench.segment.NoteSegmenter`) with its median cents, spread, level and register
events.
"""

from __future__ import annotations

import math
import statistics
from collections.abc import Callable
from dataclasses import dataclass, field, replace

from bench.reading import Reading
from bench.segment import ATTACK_S, MIN_NOTE_S, NoteSegmenter


@dataclass(frozen=True, slots=True)
class RegisterEvent:
    """A register change seen during a held note."""

    time_s: float
    kind: str  # "overblown" | "vented" | "weakening" | "cracked" (the attack spoke an upper register)
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
        Median corrected offset over the note's first-register readings after the attack.
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
                _describe_event(e) for e in self.events
            )
        return text


def _describe_event(e: RegisterEvent) -> str:
    """One register event in a held note's line."""
    if e.kind == "weakening":
        return f"weakening at {e.time_s:.2f} s"
    if e.kind == "cracked":
        return f"cracked attack (found at {e.time_s:.2f} s)"
    return f"{e.kind} at {e.time_s:.2f} s to {e.sounding_note}"


@dataclass(slots=True)
class _Open:
    note: str
    start_s: float
    last_voiced_s: float
    cents: list[float] = field(default_factory=list)
    attack_cents: list[float] = field(default_factory=list)
    levels: list[float] = field(default_factory=list)
    events: list[RegisterEvent] = field(default_factory=list)
    last_register: str | None = None


class HeldNoteTracker:
    """Fed one reading at a time; returns each held note when it ends.

    Notes start and end as :class:`bench.segment.NoteSegmenter` says; a note's cents are its
    first-register readings after the attack (:data:`bench.segment.ATTACK_S`), or all of them
    for a note too short to have any after it.
    """

    def __init__(self) -> None:
        self._segmenter = NoteSegmenter()
        self._open: _Open | None = None

    def reset(self) -> None:
        """Back to the state after construction."""
        self._segmenter.reset()
        self._open = None

    def push(self, reading: Reading) -> HeldNote | None:
        """Add a reading; return the note that this reading ended, if any."""
        step = self._segmenter.push(reading)
        finished = self._close() if step.ended else None
        if step.note_id is None or reading.mapping is None:
            return finished
        if step.started or self._open is None:
            self._open = _Open(reading.held_note, step.start_s, reading.time_s)
        note = self._open
        note.last_voiced_s = reading.time_s
        sounding = reading.note
        if math.isfinite(reading.level_dbfs):
            note.levels.append(reading.level_dbfs)
        register = reading.register_state
        if register == "jumped":
            if note.last_register != "jumped":
                note.events.append(RegisterEvent(reading.time_s, reading.jump or "jump", sounding))
            elif note.events[-1].sounding_note == note.note != sounding:
                # a jump is often seen before the pitch has moved (it is judged on the
                # newest half window): name the note it went to once the pitch reads it
                note.events[-1] = replace(note.events[-1], sounding_note=sounding)
        else:
            if reading.jump == "cracked" and all(e.kind != "cracked" for e in note.events):
                # the note is the settled fundamental; its attack spoke an upper register
                note.events.append(RegisterEvent(reading.time_s, "cracked", sounding))
            if register == "weakening" and (not note.events or note.events[-1].kind != "weakening"):
                # one early warning per approach to a jump: flicker in a live room is not news
                note.events.append(RegisterEvent(reading.time_s, "weakening", sounding))
            assert reading.cents is not None
            if reading.time_s - note.start_s >= ATTACK_S:
                note.cents.append(reading.cents)
            else:
                note.attack_cents.append(reading.cents)
        note.last_register = register
        return finished

    def finish(self) -> HeldNote | None:
        """End of input: the note still open, if any."""
        self._segmenter.finish()
        return self._close()

    def _close(self) -> HeldNote | None:
        note, self._open = self._open, None
        if note is None:
            return None
        duration = note.last_voiced_s - note.start_s
        if duration < MIN_NOTE_S:
            return None
        cents = note.cents or note.attack_cents
        median = spread = None
        if cents:
            median = statistics.median(cents)
            if len(cents) >= 4:
                q1, _, q3 = statistics.quantiles(cents, n=4)
                spread = (q3 - q1) / 2
            else:
                spread = 0.0
        level = statistics.median(note.levels) if note.levels else -math.inf
        return HeldNote(note.start_s, duration, note.note, median, spread, level, tuple(note.events))


class HeldNoteCollector:
    """A consumer of the engine's readings that keeps every held note (``bench analyze``,
    unattended runs).

    Parameters
    ----------
    on_note : callable(HeldNote), optional
        Called (on the feeding thread) with each held note as it ends.
    """

    def __init__(self, on_note: Callable[[HeldNote], None] | None = None) -> None:
        self._tracker = HeldNoteTracker()
        self.on_note = on_note
        self.notes: list[HeldNote] = []

    def take(self, reading: Reading) -> None:
        """Feed one reading."""
        self._keep(self._tracker.push(reading))

    def close(self) -> None:
        """End of the stream: the note still sounding is kept too."""
        self._keep(self._tracker.finish())

    def _keep(self, note: HeldNote | None) -> None:
        if note is not None:
            self.notes.append(note)
            if self.on_note is not None:
                self.on_note(note)
