"""Tuning model: notes, pitch standards, temperaments, air temperature correction.

Pure, like ``dsp``: no files are read here except by the explicit custom-temperament loader
(:func:`load_temperament`).
"""

from bench.tuning.air import correction_cents, speed_of_sound, water_vapour_fraction
from bench.tuning.custom import load_temperament, parse_temperament
from bench.tuning.mapping import (
    NoteMapping,
    TuningSettings,
    air_correction_cents,
    map_frequency,
    resolve_temperament,
    target_hz,
    target_hz_at_air,
    target_offsets_cents,
)
from bench.tuning.notes import (
    note_name,
    parse_note,
    parse_pitch_class,
    pitch_class_name,
)
from bench.tuning.standards import (
    PITCH_STANDARDS,
    PitchStandard,
    parse_a4,
    standard_name,
)
from bench.tuning.temperaments import (
    TEMPERAMENT_ALIASES,
    TEMPERAMENT_IDS,
    Temperament,
    get_temperament,
    offsets_from_a,
    offsets_on,
)

__all__ = [
    "PITCH_STANDARDS",
    "TEMPERAMENT_ALIASES",
    "TEMPERAMENT_IDS",
    "NoteMapping",
    "PitchStandard",
    "Temperament",
    "TuningSettings",
    "air_correction_cents",
    "correction_cents",
    "get_temperament",
    "load_temperament",
    "map_frequency",
    "note_name",
    "offsets_from_a",
    "offsets_on",
    "parse_a4",
    "parse_note",
    "parse_pitch_class",
    "parse_temperament",
    "pitch_class_name",
    "resolve_temperament",
    "speed_of_sound",
    "standard_name",
    "target_hz",
    "target_hz_at_air",
    "target_offsets_cents",
    "water_vapour_fraction",
]
