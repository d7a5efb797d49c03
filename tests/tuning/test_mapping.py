"""The settings contract and the one mapping function."""

from __future__ import annotations

import dataclasses
import math

import pytest

from bench.errors import SettingsError
from bench.tuning import (
    TEMPERAMENT_IDS,
    NoteMapping,
    TuningSettings,
    air_correction_cents,
    get_temperament,
    map_frequency,
    parse_note,
    target_hz,
    target_hz_at_air,
    target_offsets_cents,
)
from bench.tuning.custom import parse_temperament


def test_settings_contract_fields_and_defaults() -> None:
    fields = {f.name: f.default for f in dataclasses.fields(TuningSettings)}
    assert list(fields)[:7] == ["a4_hz", "temperament", "tonic", "temp_c", "ref_temp_c", "rh_percent", "flats"]
    s = TuningSettings()
    assert (s.a4_hz, s.temperament, s.tonic, s.temp_c, s.ref_temp_c, s.rh_percent, s.flats) == (
        440.0, "equal", "C", 20.0, 20.0, None, False)
    assert hash(s) == hash(TuningSettings())
    with pytest.raises(dataclasses.FrozenInstanceError):
        s.a4_hz = 415.0  # type: ignore[misc]


def test_note_mapping_contract_fields() -> None:
    assert [f.name for f in dataclasses.fields(NoteMapping)] == ["midi", "note", "target_hz", "cents_raw", "cents"]


def test_settings_are_normalised() -> None:
    s = TuningSettings(a4_hz=415, temperament="WM3", tonic="bb", temp_c=17, flats=1)  # type: ignore[arg-type]
    assert (s.a4_hz, s.temperament, s.tonic, s.temp_c, s.flats) == (415.0, "werckmeister3", "Bb", 17.0, True)
    assert isinstance(s.a4_hz, float) and isinstance(s.temp_c, float)
    assert TuningSettings(tonic="f♯").tonic == "F#"


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"a4_hz": 520.0}, r"A4 = 520.0 Hz is outside 300-500 Hz"),
        ({"temperament": "wolf"}, r"temperament 'wolf' is unknown; use one of equal"),
        ({"tonic": "H"}, r"tonic 'H' is not a pitch class; use C, C#, Db, D \.\.\. B"),
        ({"temp_c": 60.0}, r"air temperature 60.0 degC is outside -10 to 45 degC"),
        ({"ref_temp_c": -20.0}, r"reference temperature -20.0 degC is outside -10 to 45 degC"),
        ({"rh_percent": -1.0}, r"relative humidity -1.0 % is outside 0-100 %"),
        ({"custom_temperament": "x"}, r"custom_temperament 'x' is not a Temperament"),
    ],
)
def test_settings_validation(kwargs: dict[str, object], match: str) -> None:
    with pytest.raises(SettingsError, match=match):
        TuningSettings(**kwargs)  # type: ignore[arg-type]


def test_exact_pitch_maps_to_zero_cents() -> None:
    m = map_frequency(440.0, TuningSettings())
    assert m == NoteMapping(69, "A4", 440.0, 0.0, 0.0)


def test_442_reads_plus_7_85_against_440() -> None:
    # REFERENCES.md §1: 442 Hz is +7.85 c from 440 Hz (common practice figure).
    m = map_frequency(442.0, TuningSettings())
    assert m.note == "A4" and m.cents == pytest.approx(7.85, abs=0.005)


def test_locked_note() -> None:
    # Locked on A4, a C5 at 523.2511 Hz (REFERENCES.md §1) is +300 cents.
    m = map_frequency(523.2511, TuningSettings(), locked_midi=69)
    assert (m.midi, m.note, m.target_hz) == (69, "A4", 440.0)
    assert m.cents == pytest.approx(300.0, abs=0.001)


def test_flats_spelling_in_mapping() -> None:
    assert map_frequency(466.16, TuningSettings(flats=True)).note == "Bb4"
    assert map_frequency(466.16, TuningSettings()).note == "A#4"


@pytest.mark.parametrize("tid", TEMPERAMENT_IDS)
@pytest.mark.parametrize("tonic", ["C", "C#", "D", "Eb", "E", "F", "F#", "G", "Ab", "A", "Bb", "B"])
def test_a4_sounds_at_the_pitch_standard(tid: str, tonic: str) -> None:
    # REFERENCES.md §2 (common practice): the pitch standard fixes A4 in every temperament.
    s = TuningSettings(a4_hz=415.0, temperament=tid, tonic=tonic)
    assert target_hz(69, s) == pytest.approx(415.0, rel=1e-13)
    assert target_hz(57, s) == pytest.approx(207.5, rel=1e-13)


def test_werckmeister_on_g_targets() -> None:
    # REFERENCES.md §2 Werckmeister III on G (C ... B), then A = 0: targets at A4 = 415 against
    # the equal-tempered values of §1 (C4 246.7605 Hz at 415).
    on_g = [-1.96, -11.73, -3.91, -7.82, -11.73, -3.91, -7.82, 0, -9.78, -7.82, -5.87, -9.78]
    s = TuningSettings(a4_hz=415.0, temperament="werckmeister3", tonic="G")
    want = [x - on_g[9] for x in on_g]
    # Differences of two published values, each rounded to 0.01 c.
    assert list(target_offsets_cents(s)) == pytest.approx(want, abs=0.0101)
    assert target_hz(60, s) == pytest.approx(246.7605 * 2 ** (want[0] / 1200), abs=1e-3)


def test_nearest_note_is_nearest_in_the_temperament() -> None:
    # 5-limit just intonation on C, A = 0 (REFERENCES.md §2): Bb lies 17.60 + 15.64 = 33.24 c
    # above its equal-tempered place. 45 c below equal Bb4 is nearer to A4 (55 c above it)
    # than to the just Bb4 (78 c below it), though 12-TET would call it Bb.
    s = TuningSettings(temperament="just")
    freq_hz = 440.0 * 2 ** ((100 - 45) / 1200)
    m = map_frequency(freq_hz, s)
    assert m.note == "A4"
    assert m.cents == pytest.approx(55.0, abs=1e-9)
    assert map_frequency(freq_hz, TuningSettings()).note == "A#4"


def test_temperament_offsets_show_in_readings() -> None:
    # Quarter-comma meantone C-E is a pure 5/4 (REFERENCES.md §2): a pure third above the
    # target C4 reads 0 cents on E4.
    s = TuningSettings(temperament="meantone4")
    e = map_frequency(target_hz(60, s) * 5 / 4, s)
    assert e.note == "E4" and e.cents == pytest.approx(0.0, abs=1e-9)
    # The same third against equal temperament reads -13.69 c (5/4 = 386.31 c).
    e_et = map_frequency(261.6256 * 5 / 4, TuningSettings())
    assert e_et.cents == pytest.approx(-13.69, abs=0.005)


def test_correction_in_mapping_and_air_target() -> None:
    s = TuningSettings(temp_c=26.0, ref_temp_c=20.0)
    correction = air_correction_cents(s)
    assert correction == pytest.approx(-17.49, abs=0.01)  # REFERENCES.md §3 worked example
    m = map_frequency(target_hz_at_air(60, s), s)
    assert m.note == "C4" and m.cents == pytest.approx(0.0, abs=1e-9)
    assert m.cents_raw == pytest.approx(-correction, abs=1e-9)


def test_humidity_setting_enters_correction() -> None:
    # Both airs have the same relative humidity, so the warmer one holds more water vapour and
    # is faster still. Estimate: REFERENCES.md §3 gives +3.16 c for 50 % RH at 20 degC
    # (x_w = 0.01159); the effect is near linear in x_w, and x_w at fixed RH scales with the
    # saturation pressure, 2338.6 Pa at 20 degC (§3) and 3362 Pa at 26 degC (from the same
    # Cramer p_sv formula). 60 %: 3.16 * 1.2 * (3362 / 2338.6 - 1) = 1.66 c more correction.
    dry = air_correction_cents(TuningSettings(temp_c=26.0))
    humid = air_correction_cents(TuningSettings(temp_c=26.0, rh_percent=60.0))
    assert dry - humid == pytest.approx(3.16 * 1.2 * (3362 / 2338.6 - 1), abs=0.05)
    assert air_correction_cents(TuningSettings(rh_percent=60.0)) == 0.0


def test_custom_temperament_in_settings() -> None:
    # Kirnberger III written as ratios (REFERENCES.md §2 exact values and the chain's pure
    # fifths) reproduces the built-in one.
    text = """
id = "wren-k3"
[pitches]
C = "1/1"
"C#" = "256/243"
D = 193.157
Eb = "32/27"
E = "5/4"
F = "4/3"
"F#" = "45/32"
G = 696.578
Ab = "128/81"
A = 889.735
Bb = "16/9"
B = "15/8"
"""
    custom = parse_temperament(text, "wren.toml")
    s = TuningSettings(temperament="wren-k3", custom_temperament=custom)
    k3 = TuningSettings(temperament="kirnberger3")
    assert target_offsets_cents(s) == pytest.approx(target_offsets_cents(k3), abs=0.001)
    with pytest.raises(SettingsError, match=r"temperament 'equal' does not match the custom temperament's id 'wren-k3'"):
        TuningSettings(custom_temperament=custom)


def test_bad_frequency() -> None:
    for bad in (0.0, -1.0, math.inf, math.nan):
        with pytest.raises(ValueError, match="must be a positive finite frequency"):
            map_frequency(bad, TuningSettings())


def test_low_and_high_notes() -> None:
    for note in ("C-1", "A0", "G9"):
        midi = parse_note(note)
        m = map_frequency(target_hz(midi, TuningSettings()), TuningSettings())
        assert m.midi == midi and m.note == note


def test_builtin_temperaments_stay_within_fifty_cents() -> None:
    # The nearest-note search relies on tonic-relative offsets within +-50 cents.
    for tid in TEMPERAMENT_IDS:
        assert max(abs(x) for x in get_temperament(tid).offsets_cents) < 50.0
