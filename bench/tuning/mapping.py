"""INTERFACE STUB (equal temperament only) -- to be replaced by the full tuning model.

The public names and fields below are the contract other modules code against.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

_NAMES_SHARP = ("C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B")


@dataclass(frozen=True, slots=True)
class TuningSettings:
    """Settings in force: pitch standard, temperament, tonic, air."""

    a4_hz: float = 440.0
    temperament: str = "equal"  # identifier; the full model resolves it
    tonic: str = "C"  # pitch class name
    temp_c: float = 20.0  # measured air, degC
    ref_temp_c: float = 20.0  # temperature the instrument is to be in tune at, degC
    rh_percent: float | None = None  # relative humidity, percent; None = dry air
    flats: bool = False  # spell output with flats


@dataclass(frozen=True, slots=True)
class NoteMapping:
    """A frequency mapped onto the nearest note of the tuning."""

    midi: int
    note: str  # scientific pitch notation, e.g. "C#4"
    target_hz: float
    cents_raw: float  # measured vs target, uncorrected
    cents: float  # corrected to the reference temperature


def map_frequency(
    freq_hz: float, settings: TuningSettings, locked_midi: int | None = None
) -> NoteMapping:
    """Map a frequency to the nearest note (or to ``locked_midi``) of ``settings``."""
    m = 69 + 12 * math.log2(freq_hz / settings.a4_hz)
    midi = round(m) if locked_midi is None else locked_midi
    target = settings.a4_hz * 2 ** ((midi - 69) / 12)
    raw = 1200 * math.log2(freq_hz / target)
    name = f"{_NAMES_SHARP[midi % 12]}{midi // 12 - 1}"
    return NoteMapping(midi, name, target, raw, raw)
