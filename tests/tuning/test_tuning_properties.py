"""Property tests of the mapping (hypothesis)."""

from __future__ import annotations

import math

from hypothesis import given, settings
from hypothesis import strategies as st

from bench.tuning import (
    TEMPERAMENT_IDS,
    TuningSettings,
    get_temperament,
    map_frequency,
    offsets_on,
    target_hz,
    target_hz_at_air,
    target_offsets_cents,
)

tuning_settings = st.builds(
    TuningSettings,
    a4_hz=st.floats(300.0, 500.0),
    temperament=st.sampled_from(TEMPERAMENT_IDS),
    tonic=st.sampled_from(["C", "C#", "D", "Eb", "E", "F", "F#", "G", "Ab", "A", "Bb", "B"]),
    temp_c=st.floats(-10.0, 45.0),
    ref_temp_c=st.floats(-10.0, 45.0),
    rh_percent=st.one_of(st.none(), st.floats(0.0, 100.0)),
    flats=st.booleans(),
)
freqs_hz = st.floats(30.0, 4000.0)
EPS_CENTS = 1e-8


def _steps_cents(s: TuningSettings) -> list[float]:
    """Step from each pitch class up to the next note, cents."""
    off = target_offsets_cents(s)
    return [100.0 + off[(p + 1) % 12] - off[p] for p in range(12)]


@settings(max_examples=150, deadline=None)
@given(tuning_settings, freqs_hz)
def test_cents_within_half_a_step_of_the_nearest_note(s: TuningSettings, freq_hz: float) -> None:
    m = map_frequency(freq_hz, s)
    steps = _steps_cents(s)
    above = steps[m.midi % 12]
    below = steps[(m.midi - 1) % 12]
    assert -below / 2 - EPS_CENTS <= m.cents <= above / 2 + EPS_CENTS
    assert abs(m.cents) <= max(steps) / 2 + EPS_CENTS
    # Widest steps: meantone's diatonic semitone (117.1 c in 1/4-comma) and, in just
    # intonation, A-Bb = 27/25 (133.2 c); everything else stays within +-60 c.
    assert abs(m.cents) <= (66.62 if s.temperament == "just" else 58.6)
    assert math.isclose(m.target_hz, target_hz(m.midi, s), rel_tol=1e-12)


@settings(max_examples=100, deadline=None)
@given(tuning_settings, st.integers(12, 115))
def test_round_trip_note_to_hz_to_note(s: TuningSettings, midi: int) -> None:
    m = map_frequency(target_hz_at_air(midi, s), s)  # in tune, heard in the measured air
    assert m.midi == midi
    assert abs(m.cents) < 1e-6
    if s.temp_c == s.ref_temp_c:
        m2 = map_frequency(target_hz(midi, s), s)
        assert m2.midi == midi and abs(m2.cents_raw) < 1e-6


@settings(max_examples=100, deadline=None)
@given(tuning_settings, freqs_hz, st.floats(300.0, 500.0))
def test_cents_do_not_depend_on_the_pitch_standard(s: TuningSettings, freq_hz: float, new_a4_hz: float) -> None:
    ratio = new_a4_hz / s.a4_hz
    s2 = TuningSettings(new_a4_hz, s.temperament, s.tonic, s.temp_c, s.ref_temp_c, s.rh_percent, s.flats)
    m1 = map_frequency(freq_hz, s)
    m2 = map_frequency(freq_hz * ratio, s2)
    steps = _steps_cents(s)
    upper, lower = steps[m1.midi % 12] / 2, -steps[(m1.midi - 1) % 12] / 2
    if min(abs(m1.cents - upper), abs(m1.cents - lower)) > 1e-6:  # not on a boundary between notes
        assert m2.midi == m1.midi
        assert math.isclose(m2.cents, m1.cents, abs_tol=1e-7)
        assert math.isclose(m2.target_hz, m1.target_hz * ratio, rel_tol=1e-12)


@settings(max_examples=100, deadline=None)
@given(tuning_settings, freqs_hz, st.floats(-300.0, 300.0))
def test_locked_cents_are_additive(s: TuningSettings, freq_hz: float, shift_cents: float) -> None:
    nearest = map_frequency(freq_hz, s)
    locked = map_frequency(freq_hz, s, locked_midi=nearest.midi)
    assert locked == nearest
    moved = map_frequency(freq_hz * 2 ** (shift_cents / 1200), s, locked_midi=nearest.midi)
    assert math.isclose(moved.cents - nearest.cents, shift_cents, abs_tol=1e-7)
    assert moved.target_hz == nearest.target_hz


@given(st.sampled_from(TEMPERAMENT_IDS), st.integers(0, 11), st.integers(0, 11))
def test_transposition_moves_the_pattern(tid: str, tonic_pc: int, pc: int) -> None:
    t = get_temperament(tid)
    assert offsets_on(t, tonic_pc)[(pc + tonic_pc) % 12] == t.offsets_cents[pc]
