"""The settings in force and the one function that maps a frequency onto a note.

Everything that depends only on the settings (the twelve target offsets, the air correction)
is computed once per settings object and cached, so :func:`map_frequency` costs one logarithm
and a few comparisons per analysis frame.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass

from bench.errors import SettingsError
from bench.tuning.air import check_rh, check_temp, correction_cents
from bench.tuning.notes import canonical_pitch_class, note_name, parse_pitch_class
from bench.tuning.standards import check_a4
from bench.tuning.temperaments import (
    Temperament,
    canonical_temperament_id,
    get_temperament,
    offsets_from_a,
    offsets_on,
)

__all__ = [
    "NoteMapping",
    "TuningSettings",
    "air_correction_cents",
    "map_frequency",
    "resolve_temperament",
    "target_hz",
    "target_hz_at_air",
    "target_offsets_cents",
]


@dataclass(frozen=True, slots=True)
class TuningSettings:
    """Settings in force: pitch standard, temperament, tonic, air.

    Values are checked and normalised on construction (temperament aliases become the
    identifier, ``"bb"`` becomes ``"Bb"``); a bad value raises SettingsError. Replace the whole
    object (``dataclasses.replace``) to change a setting.

    Attributes
    ----------
    a4_hz : float, 300..500, Hz
        Pitch standard: A4 sounds at this frequency in every temperament and on every tonic.
    temperament : str
        Built-in identifier (see ``TEMPERAMENT_IDS``) or the id of ``custom_temperament``;
        written to the log.
    tonic : str
        Pitch class the temperament is laid on, e.g. ``"C"``, ``"F#"``, ``"Bb"``.
    temp_c : float, -10..45, degC
        Measured air temperature.
    ref_temp_c : float, -10..45, degC
        Temperature the instrument is to be in tune at.
    rh_percent : float or None, 0..100, percent
        Relative humidity of the air (both measured and reference); None means dry air.
    flats : bool
        Spell note names with flats.
    custom_temperament : Temperament or None
        A temperament read from a file; its id must equal ``temperament``.
    """

    a4_hz: float = 440.0
    temperament: str = "equal"
    tonic: str = "C"
    temp_c: float = 20.0
    ref_temp_c: float = 20.0
    rh_percent: float | None = None
    flats: bool = False
    custom_temperament: Temperament | None = None

    def __post_init__(self) -> None:
        put = functools.partial(object.__setattr__, self)
        put("a4_hz", check_a4(self.a4_hz))
        custom = self.custom_temperament
        if custom is not None:
            if not isinstance(custom, Temperament):
                raise SettingsError(
                    f"custom_temperament {custom!r} is not a Temperament; load it with "
                    "bench.tuning.load_temperament"
                )
            if self.temperament != custom.id:
                raise SettingsError(
                    f"temperament {self.temperament!r} does not match the custom temperament's "
                    f"id {custom.id!r}; set temperament={custom.id!r}"
                )
        else:
            put("temperament", canonical_temperament_id(str(self.temperament)))
        try:
            put("tonic", canonical_pitch_class(str(self.tonic)))
        except SettingsError:
            raise SettingsError(
                f"tonic {self.tonic!r} is not a pitch class; use C, C#, Db, D ... B"
            ) from None
        put("temp_c", check_temp(self.temp_c, "air temperature"))
        put("ref_temp_c", check_temp(self.ref_temp_c, "reference temperature"))
        if self.rh_percent is not None:
            put("rh_percent", check_rh(self.rh_percent))
        put("flats", bool(self.flats))


@dataclass(frozen=True, slots=True)
class NoteMapping:
    """A frequency mapped onto the nearest note of the tuning.

    Attributes
    ----------
    midi : int
        MIDI number of the note (60 = C4).
    note : str
        Scientific pitch notation, e.g. ``"C#4"``.
    target_hz : float, Hz
        Where the note should sound in the reference air.
    cents_raw : float, cents
        Measured frequency against ``target_hz``, uncorrected.
    cents : float, cents
        Corrected to the reference temperature: ``cents_raw + correction``.
    """

    midi: int
    note: str
    target_hz: float
    cents_raw: float
    cents: float


@dataclass(frozen=True, slots=True)
class _Tables:
    offsets_cents: tuple[float, ...]  # on the tonic, A = 0
    base_semitones: tuple[float, ...]  # on the tonic, tonic = 0 (|x| <= 0.5 for a search window)
    a_shift_semitones: float  # base A offset / 100
    correction_cents: float


def resolve_temperament(settings: TuningSettings) -> Temperament:
    """The Temperament that ``settings`` names (the custom one, or a built-in)."""
    if settings.custom_temperament is not None:
        return settings.custom_temperament
    return get_temperament(settings.temperament)


@functools.lru_cache(maxsize=64)
def _tables(settings: TuningSettings) -> _Tables:
    base = offsets_on(resolve_temperament(settings), parse_pitch_class(settings.tonic))
    rh = 0.0 if settings.rh_percent is None else settings.rh_percent
    return _Tables(
        offsets_cents=offsets_from_a(base),
        base_semitones=tuple(x / 100.0 for x in base),
        a_shift_semitones=base[9] / 100.0,
        correction_cents=correction_cents(settings.temp_c, settings.ref_temp_c, rh),
    )


def target_offsets_cents(settings: TuningSettings) -> tuple[float, ...]:
    """Deviation from equal temperament (same A4) of the targets of C, C♯ … B; A is 0.

    Examples
    --------
    >>> s = TuningSettings(temperament="kellner")
    >>> [round(x, 2) for x in target_offsets_cents(s)][:3]
    [8.21, -1.56, 2.74]
    """
    return _tables(settings).offsets_cents


def air_correction_cents(settings: TuningSettings) -> float:
    """Cents added to raw readings: ``1200 log2(c(ref_temp_c) / c(temp_c))``.

    Examples
    --------
    >>> round(air_correction_cents(TuningSettings(temp_c=26.0, ref_temp_c=20.0)), 1)
    -17.5
    """
    return _tables(settings).correction_cents


def target_hz(midi: int, settings: TuningSettings) -> float:
    """Frequency a note should sound at in the reference air.

    Parameters
    ----------
    midi : int
        MIDI note number.
    settings : TuningSettings

    Returns
    -------
    float, Hz
        ``a4_hz * 2**((midi - 69 + offset/100) / 12)`` with the note's offset from
        :func:`target_offsets_cents`.

    Examples
    --------
    >>> round(target_hz(60, TuningSettings(a4_hz=415.0)), 4)
    246.7605
    """
    off = _tables(settings).offsets_cents[midi % 12]
    return settings.a4_hz * math.exp2((midi - 69 + off / 100.0) / 12.0)


def target_hz_at_air(midi: int, settings: TuningSettings) -> float:
    """Frequency an instrument in tune at ``ref_temp_c`` plays the note at in the measured air.

    Examples
    --------
    >>> s = TuningSettings(temp_c=26.0, ref_temp_c=20.0)
    >>> round(1200 * math.log2(target_hz_at_air(69, s) / 440.0), 1)
    17.5
    """
    return target_hz(midi, settings) * math.exp2(-_tables(settings).correction_cents / 1200.0)


def map_frequency(
    freq_hz: float, settings: TuningSettings, locked_midi: int | None = None
) -> NoteMapping:
    """Map a frequency to the nearest note (or to ``locked_midi``) of ``settings``.

    "Nearest" is nearest in the temperament, judged on the corrected pitch (how the
    instrument will sound in the reference air), so ``abs(cents)`` is at most half the widest
    step of the temperament; ``cents_raw`` is the same reading without the air correction.

    Parameters
    ----------
    freq_hz : float > 0, Hz
        Measured frequency.
    settings : TuningSettings
    locked_midi : int or None
        Measure against this note instead of the nearest one.

    Returns
    -------
    NoteMapping

    Raises
    ------
    ValueError
        If ``freq_hz`` is not a positive finite number.

    Examples
    --------
    >>> m = map_frequency(442.0, TuningSettings())
    >>> m.note, round(m.target_hz, 2), round(m.cents, 2)
    ('A4', 440.0, 7.85)
    """
    if not 0.0 < freq_hz < math.inf:
        raise ValueError(f"freq_hz {freq_hz!r} must be a positive finite frequency")
    tables = _tables(settings)
    # Position in equal-tempered semitones, corrected to the reference air.
    x = 69.0 + 12.0 * math.log2(freq_hz / settings.a4_hz) + tables.correction_cents / 100.0
    if locked_midi is None:
        # Search in the frame where the tonic-based offsets lie within +-50 cents, so the
        # nearest note is one of three neighbours.
        y = x + tables.a_shift_semitones
        r = round(y)
        base = tables.base_semitones
        midi = r
        best = abs(y - r - base[r % 12])
        for k in (r - 1, r + 1):
            d = abs(y - k - base[k % 12])
            if d < best:
                midi, best = k, d
    else:
        midi = int(locked_midi)
    position = midi + tables.offsets_cents[midi % 12] / 100.0
    cents = 100.0 * (x - position)
    return NoteMapping(
        midi=midi,
        note=note_name(midi, settings.flats),
        target_hz=settings.a4_hz * math.exp2((position - 69.0) / 12.0),
        cents_raw=cents - tables.correction_cents,
        cents=cents,
    )

