"""The one per-frame record: a :class:`Reading` is an analysis frame mapped onto the tuning.

Every consumer of frames -- the frame log, held-note summaries, captures, the blowing curve,
register margins, the naming of jump events, the screen -- takes a :class:`Reading`, and a
frame log read back gives the same :class:`Reading` again (:func:`bench.framelog.iter_readings`).
:func:`make_reading` is the mapping step of the flow::

    source -> analyser (Frame) -> make_reading (Reading) -> consumers -> screen

It maps both the sounding pitch and the held (fingered) pitch the register monitor follows,
each in the temperament, tonic, pitch standard and air in force, so that no consumer has to
map a frequency again.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from bench.tuning import NoteMapping, TuningSettings, map_frequency
from dsp.frame import Frame

__all__ = ["Reading", "SettingsKey", "make_reading", "map_or_none", "mode_of"]

_NO_HARMONICS: tuple[float | None, ...] = (None,) * 8


@dataclass(frozen=True, slots=True)
class SettingsKey:
    """The tuning settings a reading was mapped under, as the frame log records them.

    Hashable and comparable: frames of one held note or one capture share a key.

    Attributes
    ----------
    temperament : str
    tonic : str
    a4_hz : float, Hz
    temp_c, ref_temp_c : float, degC
    rh_percent : float or None, percent (None: dry air)
    """

    temperament: str = "equal"
    tonic: str = "C"
    a4_hz: float = 440.0
    temp_c: float = 20.0
    ref_temp_c: float = 20.0
    rh_percent: float | None = None

    @classmethod
    def of(cls, settings: TuningSettings) -> SettingsKey:
        """The key of a :class:`~bench.tuning.TuningSettings`.

        The same settings object gives the same key object, so that the readings of a held
        note compare their keys by identity (consumers compare keys on every reading).
        """
        global _KEY_CACHE
        cached = _KEY_CACHE  # one tuple, read and replaced whole: safe from any thread
        if cached is not None and cached[0] is settings:
            return cached[1]
        key = cls(
            settings.temperament, settings.tonic, settings.a4_hz, settings.temp_c,
            settings.ref_temp_c, settings.rh_percent,
        )  # fmt: skip
        _KEY_CACHE = (settings, key)
        return key


_KEY_CACHE: tuple[TuningSettings, SettingsKey] | None = None


def map_or_none(freq_hz: float | None, settings: TuningSettings, locked_midi: int | None = None) -> NoteMapping | None:
    """:func:`bench.tuning.map_frequency`, or None for no pitch or one that names no note."""
    if freq_hz is None or not freq_hz > 0:
        return None
    try:
        return map_frequency(freq_hz, settings, locked_midi)
    except (ValueError, ArithmeticError):
        return None


@dataclass(frozen=True, slots=True)
class Reading:
    """One analysis frame with its note, its fingered note and the settings it was mapped under.

    Attributes
    ----------
    frame : Frame
        The analyser's output.
    mapping : NoteMapping or None
        Sounding note, target and cents (against the locked note when one is locked); None
        when unvoiced.
    held : NoteMapping or None
        The held (fingered) note the register monitor follows, mapped like ``mapping`` (so
        the locked note when one is locked); equals ``mapping`` while the note has not
        jumped. None when unvoiced.
    settings : TuningSettings
        Settings in force when the frame was measured.
    key : SettingsKey
        Their key as the frame log records it.
    locked_midi : int or None
        Target note the user locked, if any.
    locked_note : str or None
        Its name (as the log spells it).
    dropped_blocks : int
        Input blocks lost so far (overflows and full buffer); 0 for a reading read from a log.
    log_path : str or None
        File the session log is being written to; None when logging is off.
    """

    frame: Frame
    mapping: NoteMapping | None
    held: NoteMapping | None
    settings: TuningSettings
    key: SettingsKey
    locked_midi: int | None = None
    locked_note: str | None = None
    dropped_blocks: int = 0
    log_path: str | None = None

    # -- the fields every consumer reads (one name each) ------------------------------------

    @property
    def stream_time_s(self) -> float:
        """Input time of the frame, seconds (``frame.time_s``)."""
        return self.frame.time_s

    @property
    def time_s(self) -> float:
        """Input time of the frame, seconds."""
        return self.frame.time_s

    @property
    def voiced(self) -> bool:
        """A pitch was found and named a note."""
        return self.mapping is not None and self.frame.f0_hz is not None

    @property
    def f0_hz(self) -> float | None:
        """Sounding fundamental, Hz (None when unvoiced)."""
        return self.frame.f0_hz if self.voiced else None

    @property
    def midi(self) -> int | None:
        """Note the sounding pitch was mapped to (the locked one when locked)."""
        return self.mapping.midi if self.mapping is not None else None

    @property
    def note(self) -> str:
        """Its name ("" when unvoiced)."""
        return self.mapping.note if self.mapping is not None else ""

    @property
    def target_hz(self) -> float | None:
        """Target of the note in the reference air, Hz."""
        return self.mapping.target_hz if self.mapping is not None else None

    @property
    def cents_raw(self) -> float | None:
        """Offset from the target, uncorrected, cents."""
        return self.mapping.cents_raw if self.mapping is not None else None

    @property
    def cents(self) -> float | None:
        """Offset corrected to the reference temperature, cents."""
        return self.mapping.cents if self.mapping is not None else None

    @property
    def level_dbfs(self) -> float:
        """RMS level, dBFS (-inf for digital silence)."""
        return self.frame.level_dbfs

    @property
    def register_state(self) -> str:
        """"steady" | "weakening" | "jumped" | "" (unvoiced)."""
        return (self.frame.register or "") if self.voiced else ""

    @property
    def jump(self) -> str:
        """"overblown" | "vented" while jumped; "cracked" on the first frames of a note whose
        attack spoke its octave or twelfth before its fundamental (the register is then
        "steady" and the held note the fundamental: the note is not broken, see
        :mod:`dsp.register`); else ""."""
        if not self.voiced:
            return ""
        kind = self.frame.jump or ""
        return kind if self.frame.register == "jumped" or kind == "cracked" else ""

    @property
    def odd_even_db(self) -> float | None:
        """Odd/even harmonic balance, dB."""
        return self.frame.odd_even_db if self.voiced else None

    @property
    def harmonics_db(self) -> tuple[float | None, ...]:
        """H1..H8 in dB re the strongest (8 entries; None where unknown)."""
        h = self.frame.harmonics_db
        if not self.voiced or h is None:
            return _NO_HARMONICS
        return tuple(h) + _NO_HARMONICS[len(h):]

    @property
    def held_f0_hz(self) -> float | None:
        """Fundamental of the held (fingered) note, Hz."""
        return self.frame.held_f0_hz if self.voiced else None

    @property
    def held_midi(self) -> int | None:
        """The fingered note (MIDI): the held note's, else the sounding one."""
        if self.held is not None:
            return self.held.midi
        return self.midi

    @property
    def held_note(self) -> str:
        """The fingered note's name ("" when unvoiced)."""
        if self.held is not None:
            return self.held.note
        return self.note

    @property
    def mode(self) -> int | None:
        """Sounding mode of the held note's tube (1 fundamental, 2 octave, 3 twelfth ...).

        From the ratio of the sounding to the held fundamental when both are known and the
        ratio lies within 50 cents of a whole number; None otherwise.
        """
        return mode_of(self.f0_hz, self.held_f0_hz)


def mode_of(f0_hz: float | None, held_f0_hz: float | None) -> int | None:
    """Mode (1, 2, 3 ...) of a held note ``held_f0_hz`` that a sound at ``f0_hz`` is, Hz.

    The nearest whole ratio when it lies within 50 cents; None otherwise or when either is
    unknown.

    >>> mode_of(880.0, 440.0), mode_of(660.0, 440.0), mode_of(None, 440.0)
    (2, None, None)
    """
    if not f0_hz or not held_f0_hz:
        return None
    ratio = f0_hz / held_f0_hz
    n = round(ratio)
    if n < 1 or abs(1200.0 * math.log2(ratio / n)) > 50.0:
        return None
    return int(n)


def make_reading(
    frame: Frame,
    settings: TuningSettings,
    *,
    locked_midi: int | None = None,
    locked_note: str | None = None,
    dropped_blocks: int = 0,
    log_path: str | None = None,
) -> Reading:
    """Map a frame onto the tuning in force: the mapping step of the flow.

    Parameters
    ----------
    frame : Frame
        The analyser's output.
    settings : TuningSettings
        Settings in force.
    locked_midi : int or None
        Judge the sounding pitch against this note (MIDI number).
    locked_note : str or None
        Its name, as the log spells it.
    dropped_blocks : int >= 0
        Input blocks lost so far.
    log_path : str or None
        Session log being written.

    Examples
    --------
    >>> from dsp.frame import Frame
    >>> f = Frame(1.0, 1.04, 880.0, 0.99, -20.0, False, (0.0,) * 8, 3.0, "jumped", "overblown", 440.0)
    >>> r = make_reading(f, TuningSettings())
    >>> r.note, r.held_note, r.mode, r.jump
    ('A5', 'A4', 2, 'overblown')
    """
    mapping = map_or_none(frame.f0_hz, settings, locked_midi)
    held: NoteMapping | None = None
    if mapping is not None:
        # locked: the user named the fingering, so the held note is the locked one
        held_hz = frame.held_f0_hz
        if held_hz is None or held_hz == frame.f0_hz:
            held = mapping
        else:
            held = map_or_none(held_hz, settings, locked_midi)
    return Reading(
        frame=frame,
        mapping=mapping,
        held=held,
        settings=settings,
        key=SettingsKey.of(settings),
        locked_midi=locked_midi,
        locked_note=locked_note,
        dropped_blocks=dropped_blocks,
        log_path=log_path,
    )
