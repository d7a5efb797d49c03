"""Held notes: the one rule that cuts a stream of readings into notes.

Every consumer that works note by note -- the held-note summaries of ``bench analyze`` and of
unattended runs, the captures (register margins), the blowing curve -- follows the same
:class:`NoteSegmenter`, so a note starts and ends at the same reading for all of them.

The rule (constants below, in seconds):

* a *held note* is a stream of voiced readings with the same fingered note
  (:attr:`bench.reading.Reading.held_midi`: the locked note when one is locked; a jumped
  reading keeps the note it broke from) under the same settings;
* it ends when the sound stops for longer than :data:`GAP_S` beyond the spacing of the
  readings (a frame log thinned to a few rows a second has no gaps), or when another fingered
  note lasts :data:`STRAY_S`; readings of another note that stop sooner are *stray* (an octave
  slip, a cracked frame) and belong to no note;
* the new note then starts at its first reading, and its first :data:`ATTACK_S` are its attack;
* a held note shorter than :data:`MIN_NOTE_S` is a blip, not a note.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Hashable
from dataclasses import dataclass

from bench.reading import Reading, SettingsKey

__all__ = ["ATTACK_S", "GAP_S", "MIN_NOTE_S", "STRAY_S", "NoteSegmenter", "NoteStep", "held_note_key"]

GAP_S = 0.06
"""Silence (beyond the readings' spacing) that ends a held note, seconds."""
STRAY_S = 0.06
"""How long another fingered note must last to end the held note, seconds."""
ATTACK_S = 0.15
"""Start of a held note left out of its statistics (the attack), seconds."""
MIN_NOTE_S = 0.08
"""Held notes shorter than this are blips, not notes, seconds."""



def held_note_key(reading: Reading) -> tuple[int, SettingsKey] | None:
    """What makes readings one held note: the fingered note and the settings (None: unvoiced)."""
    held = reading.held_midi
    if not reading.voiced or held is None:
        return None
    return (held, reading.key)


@dataclass(frozen=True, slots=True)
class NoteStep:
    """What one reading did to the held-note segmentation.

    Attributes
    ----------
    ended : bool
        The held note before this reading is over (it ended at or before this reading).
    note_id : int or None
        Number of the held note this reading belongs to (1, 2 ...); None when unvoiced or
        stray.
    started : bool
        This reading starts held note ``note_id``.
    start_s : float, seconds
        Start of held note ``note_id`` (its first reading: a stray run that became the new
        note started before this reading).
    """

    ended: bool
    note_id: int | None
    started: bool
    start_s: float


_UNVOICED = NoteStep(False, None, False, math.nan)


class NoteSegmenter:
    """Follow held notes one reading at a time (see the module docstring for the rule).

    Parameters
    ----------
    key : callable(Reading) -> hashable or None
        What readings of one note share (None for a reading that belongs to no note);
        :func:`held_note_key` by default. The captures cut a held note further by its
        sounding note and mode with the same rule and constants.

    Examples
    --------
    >>> from bench.reading import make_reading
    >>> from bench.tuning import TuningSettings
    >>> from dsp.frame import Frame
    >>> def r(t, f0):
    ...     frame = Frame(t, t, f0, 0.9 if f0 else 0.0, -20.0, False, None, None,
    ...                   "steady" if f0 else None, None, f0)
    ...     return make_reading(frame, TuningSettings())
    >>> seg = NoteSegmenter()
    >>> [seg.push(r(i * 0.01, 440.0)).note_id for i in range(3)]
    [1, 1, 1]
    >>> seg.push(r(0.03, 880.0)).note_id is None  # one stray frame an octave up
    True
    >>> [seg.push(r(0.04 + i * 0.01, 440.0)).note_id for i in range(2)]
    [1, 1]
    >>> [seg.push(r(0.06 + i * 0.01, None)).ended for i in range(14)].count(True)  # silence
    1
    >>> step = seg.push(r(0.2, 440.0))  # the same note again: a new held note
    >>> step.ended, step.note_id, step.started
    (False, 2, True)
    """

    def __init__(self, key: Callable[[Reading], Hashable | None] = held_note_key) -> None:
        self._key_of = key
        self.reset()

    def reset(self) -> None:
        """Back to the state after construction."""
        self._key: Hashable | None = None
        self._note_id = 0
        self._start_s = math.nan
        self._last_voiced_s = -math.inf
        self._prev_time_s = math.inf
        self._stray_key: Hashable | None = None
        self._stray_start_s = math.nan

    @property
    def open(self) -> bool:
        """A held note is going on."""
        return self._key is not None

    def push(self, reading: Reading) -> NoteStep:
        """Place one reading; see :class:`NoteStep`."""
        time_s = reading.time_s
        step_s = max(0.0, time_s - self._prev_time_s)  # the readings' own spacing
        self._prev_time_s = time_s
        key = self._key_of(reading)
        if key is None:
            if self._key is not None and time_s - self._last_voiced_s > GAP_S:
                self._close()
                return NoteStep(True, None, False, math.nan)
            return _UNVOICED
        gap = time_s - self._last_voiced_s > GAP_S + step_s
        self._last_voiced_s = time_s
        if self._key is not None and not gap and key != self._key:
            if key != self._stray_key:
                self._stray_key, self._stray_start_s = key, time_s
            if time_s - self._stray_start_s < STRAY_S - 1e-9:
                return NoteStep(False, None, False, math.nan)
            start_s = self._stray_start_s
            self._close()
            self._open(key, start_s)
            return NoteStep(True, self._note_id, True, start_s)
        self._stray_key = None
        if self._key is None or gap:
            ended = self._key is not None
            self._close()
            self._open(key, time_s)
            return NoteStep(ended, self._note_id, True, time_s)
        return NoteStep(False, self._note_id, False, self._start_s)

    def finish(self) -> bool:
        """End of the stream: True when a held note was going on (it is over now)."""
        was_open = self._key is not None
        self._close()
        return was_open

    def _open(self, key: Hashable, start_s: float) -> None:
        self._key, self._start_s = key, start_s
        self._note_id += 1

    def _close(self) -> None:
        self._key, self._stray_key = None, None
