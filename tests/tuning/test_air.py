"""Speed of sound and temperature correction against CoolProp, ISO 9613-1 and Cramer (1993).

Values from /work/shared/REFERENCES.md §3.
"""

from __future__ import annotations

import math

import pytest
from CoolProp.CoolProp import PropsSI

from bench.errors import SettingsError
from bench.tuning import (
    TuningSettings,
    correction_cents,
    map_frequency,
    speed_of_sound,
    target_hz,
    water_vapour_fraction,
)

TEMPS_C = (0, 10, 15, 20, 25, 30, 35)

# REFERENCES.md §3: Cramer (1993) eq. 15, dry air, 314 ppm CO2, 101325 Pa, evaluated
# independently (pyfar 0.8.1 speed_of_sound_cramer agrees to 1e-9 m/s); 35 degC is outside
# the fit's range but is the same formula.
CRAMER_TABLE = {0: 331.455, 10: 337.467, 15: 340.431, 20: 343.367, 25: 346.276, 30: 349.156, 35: 352.009}


@pytest.mark.parametrize("temp_c", TEMPS_C)
def test_cramer_table(temp_c: float) -> None:
    # Printed to 1 mm/s: within half a unit.
    assert speed_of_sound(temp_c, 0.0, 101325.0, 0.000314) == pytest.approx(CRAMER_TABLE[temp_c], abs=0.0005)


@pytest.mark.parametrize("temp_c", TEMPS_C)
def test_against_coolprop(temp_c: float) -> None:
    # CoolProp 'Air' (pseudo-pure dry air without CO2, Lemmon et al. 2000 - from memory) is a
    # different model; REFERENCES.md §3 finds it up to 0.06 m/s below Cramer at x_c = 0.
    # Measured here: 0.041-0.053 m/s over 0-35 degC. Tolerance 0.06 m/s (0.3 cent).
    ref = PropsSI("A", "T", temp_c + 273.15, "P", 101325.0, "Air")
    ours = speed_of_sound(temp_c, 0.0, 101325.0, 0.0)
    assert 0.0 <= ours - ref <= 0.06


@pytest.mark.parametrize("temp_c", TEMPS_C)
def test_against_iso_9613_1(temp_c: float) -> None:
    # ISO 9613-1:1993 formula A.5, c = 343.2 sqrt(T / 293.15) (dry air, its own fit):
    # Cramer with 400 ppm CO2 lies 0.13-0.17 m/s above it over 0-35 degC; tolerance 0.2 m/s.
    iso = 343.2 * math.sqrt((temp_c + 273.15) / 293.15)
    assert abs(speed_of_sound(temp_c) - iso) < 0.2


def test_correction_follows_coolprop_ratio() -> None:
    # The correction only needs the ratio of speeds: against CoolProp 'Air' over 10-30 degC
    # the correction to 20 degC agrees within 0.05 cent.
    c_ref = PropsSI("A", "T", 293.15, "P", 101325.0, "Air")
    for temp_c in (10.0, 15.0, 17.0, 23.0, 26.0, 30.0):
        c_air = PropsSI("A", "T", temp_c + 273.15, "P", 101325.0, "Air")
        want = 1200.0 * math.log2(c_ref / c_air)
        assert correction_cents(temp_c, 20.0, co2_fraction=0.0) == pytest.approx(want, abs=0.05)


def test_worked_example_warm_room() -> None:
    # REFERENCES.md §3 worked example: tuned at 20 degC, played at 26 degC -> +17.5 c
    # (17.49 Cramer and CoolProp, 17.54 from sqrt(T)).
    correction = correction_cents(26.0, 20.0)
    assert correction == pytest.approx(-17.49, abs=0.01)
    assert -correction == pytest.approx(1200 * math.log2(math.sqrt(299.15 / 293.15)), abs=0.06)


def test_note_reading_sharp_in_warm_room_reads_in_tune_corrected() -> None:
    # Same worked example through the mapping: an A4 in tune at 20 degC sounds ~17.5 c sharp
    # at 26 degC; the corrected reading is ~0.
    settings = TuningSettings(temp_c=26.0, ref_temp_c=20.0)
    played_hz = 440.0 * 2 ** (17.5 / 1200)
    m = map_frequency(played_hz, settings)
    assert m.note == "A4"
    assert m.cents_raw == pytest.approx(17.5, abs=1e-9)
    assert m.cents == pytest.approx(0.0, abs=0.05)
    assert m.target_hz == pytest.approx(target_hz(69, settings)) and m.target_hz == 440.0


def test_humidity_fifty_percent_versus_dry() -> None:
    # REFERENCES.md §3, 20 degC: 50 % RH vs dry +3.16 c (Cramer), 100 %: +6.31 c.
    dry = speed_of_sound(20.0, 0.0)
    assert 1200 * math.log2(speed_of_sound(20.0, 50.0) / dry) == pytest.approx(3.16, abs=0.005)
    assert 1200 * math.log2(speed_of_sound(20.0, 100.0) / dry) == pytest.approx(6.31, abs=0.005)


def test_water_vapour_fraction() -> None:
    # REFERENCES.md §3: x_w(20 degC, 50 %) = 0.01159; p_sv(20 degC) = 2338.6 Pa (Cramer).
    assert water_vapour_fraction(20.0, 50.0) == pytest.approx(0.01159, abs=5e-6)
    f = 1.00062 + 3.14e-8 * 101325 + 5.6e-7 * 20**2
    p_sv = water_vapour_fraction(20.0, 100.0) * 101325 / f
    assert p_sv == pytest.approx(2338.6, abs=0.05)


def test_slope_about_three_cents_per_degree() -> None:
    # REFERENCES.md §3: slope at 20 degC 2.947 c/K (Cramer); the trade's "about +3 cents per
    # degree C" (common practice).
    slope = -(correction_cents(20.5, 20.0) - correction_cents(19.5, 20.0))
    assert slope == pytest.approx(2.947, abs=0.002)
    assert 2.8 < slope < 3.2


def test_co2_effect() -> None:
    # REFERENCES.md §3: Cramer, x_c 0.0004 -> 0.01 at 20 degC: -4.34 c.
    cents = 1200 * math.log2(speed_of_sound(20.0, co2_fraction=0.01) / speed_of_sound(20.0))
    assert cents == pytest.approx(-4.34, abs=0.005)


def test_same_temperature_no_correction() -> None:
    for rh in (0.0, 50.0, 100.0):
        assert correction_cents(23.0, 23.0, rh) == 0.0


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"temp_c": 50.0}, r"air temperature 50.0 degC is outside -10 to 45 degC"),
        ({"temp_c": -11.0}, r"outside -10 to 45 degC"),
        ({"temp_c": math.nan}, r"outside -10 to 45 degC"),
        ({"temp_c": 20.0, "rh_percent": 120.0}, r"relative humidity 120.0 % is outside 0-100 %"),
        ({"temp_c": 20.0, "pressure_pa": 1013.25}, r"air pressure 1013.25 Pa is outside"),
        ({"temp_c": 20.0, "co2_fraction": 0.5}, r"CO2 mole fraction 0.5 is outside"),
    ],
)
def test_bad_air_values(kwargs: dict[str, float], match: str) -> None:
    with pytest.raises(SettingsError, match=match):
        speed_of_sound(**kwargs)
