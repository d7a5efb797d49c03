"""Pitch standards and equal-tempered frequencies (REFERENCES.md §1)."""

from __future__ import annotations

import math

import librosa
import pytest

from bench.errors import SettingsError
from bench.tuning import PITCH_STANDARDS, TuningSettings, parse_a4, parse_note, standard_name, target_hz


def test_default_pitch_standard_is_iso_16() -> None:
    # ISO 16:1975: A4 = 440 Hz.
    assert TuningSettings().a4_hz == 440.0
    assert parse_a4("modern 440") == 440.0
    assert target_hz(69, TuningSettings()) == 440.0


@pytest.mark.parametrize(
    ("a4_hz", "note", "freq_hz"),
    [
        # REFERENCES.md §1 (exact; 415 also pytuning): 12-TET f = A4 * 2^((m - 69)/12).
        (440.0, "C4", 261.6256),
        (440.0, "F4", 349.2282),
        (440.0, "C5", 523.2511),
        (440.0, "F5", 698.4565),
        (415.0, "C4", 246.7605),
        (415.0, "F4", 329.3857),
        (415.0, "C5", 493.5210),
        (415.0, "F5", 658.7714),
    ],
)
def test_equal_tempered_values(a4_hz: float, note: str, freq_hz: float) -> None:
    got = target_hz(parse_note(note), TuningSettings(a4_hz=a4_hz))
    assert got == pytest.approx(freq_hz, abs=5e-5)  # printed to 0.1 mHz


@pytest.mark.parametrize("midi", range(21, 109))
def test_equal_temperament_against_librosa(midi: int) -> None:
    # librosa.midi_to_hz (A4 = 440 Hz, 12-TET) as an outside reference over the piano range.
    assert target_hz(midi, TuningSettings()) == pytest.approx(float(librosa.midi_to_hz(midi)), rel=1e-12)


@pytest.mark.parametrize(
    ("a4_hz", "cents"),
    # REFERENCES.md §1 "Other A4 (c vs 440)" (common practice): the nominal values are meant,
    # not 440 * 2^(k/12).
    [(392.0, -199.98), (415.0, -101.27), (430.0, -39.80), (442.0, 7.85), (443.0, 11.76), (466.0, 99.39)],
)
def test_presets_are_the_nominal_values(a4_hz: float, cents: float) -> None:
    names = [s.name for s in PITCH_STANDARDS if s.a4_hz == a4_hz]
    assert len(names) == 1
    assert parse_a4(names[0]) == a4_hz
    assert standard_name(a4_hz) == names[0]
    assert 1200 * math.log2(a4_hz / 440.0) == pytest.approx(cents, abs=0.005)


def test_preset_set() -> None:
    assert sorted(s.a4_hz for s in PITCH_STANDARDS) == [392.0, 415.0, 430.0, 440.0, 442.0, 443.0, 466.0]
    assert len({s.name for s in PITCH_STANDARDS}) == len(PITCH_STANDARDS)


@pytest.mark.parametrize(
    ("text", "a4_hz"),
    [("442", 442.0), ("415.30", 415.3), (" 430 Hz", 430.0), ("300", 300.0), ("500", 500.0),
     ("Baroque-415", 415.0), ("baroque_415", 415.0), ("BAROQUE", 415.0), ("modern", 440.0),
     ("low baroque", 392.0), ("orchestra 443", 443.0), ("466.16", 466.16)],
)
def test_parse_a4(text: str, a4_hz: float) -> None:
    assert parse_a4(text) == a4_hz


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("299.99", r"A4 = 299.99 Hz is outside 300-500 Hz; give a frequency in that range or a preset: 'low baroque 392'"),
        ("880", r"outside 300-500 Hz"),
        ("nan", r"outside 300-500 Hz"),
        ("orchestra", r"pitch standard 'orchestra' is neither a frequency nor a preset; give A4 in 300-500 Hz or one of .*'orchestra 442', 'orchestra 443'"),
        ("concert", r"'concert' is neither"),
    ],
)
def test_parse_a4_errors(text: str, match: str) -> None:
    with pytest.raises(SettingsError, match=match) as info:
        parse_a4(text)
    assert "\n" not in str(info.value)
