"""Speed of sound in air, and the pitch correction for air temperature.

An air column's resonances scale with the speed of sound c, so a flute plays sharp in a warm
room. :func:`correction_cents` gives the cents to add to a reading taken in the measured air
to learn how the instrument will sound in the reference air.
"""

from __future__ import annotations

import math

from bench.errors import SettingsError

__all__ = [
    "PRESSURE_MAX_PA",
    "PRESSURE_MIN_PA",
    "STANDARD_PRESSURE_PA",
    "TEMP_MAX_C",
    "TEMP_MIN_C",
    "check_rh",
    "check_temp",
    "correction_cents",
    "speed_of_sound",
    "water_vapour_fraction",
]

STANDARD_PRESSURE_PA = 101325.0
TEMP_MIN_C = -10.0  # accepted range; Cramer's fit is valid 0-30 degC
TEMP_MAX_C = 45.0
PRESSURE_MIN_PA = 60000.0  # accepted range; the fit is valid 75-102 kPa
PRESSURE_MAX_PA = 110000.0
CO2_MAX_FRACTION = 0.1  # accepted; the fit is valid up to 0.01

# Cramer, J. Acoust. Soc. Am. 93(5):2510-2516 (1993), eq. 15: a0 ... a15 (t in degC, p in Pa).
_A = (
    331.5024,
    0.603055,
    -0.000528,
    51.471935,
    0.1495874,
    -0.000782,
    -1.82e-7,
    3.73e-8,
    -2.93e-10,
    -85.20931,
    -0.228525,
    5.91e-5,
    -2.835149,
    -2.15e-13,
    29.179762,
    0.000486,
)


def check_temp(temp_c: float, what: str = "air temperature") -> float:
    """Return ``temp_c`` as a float if it lies in the accepted range, else raise SettingsError."""
    value = float(temp_c)
    if not (math.isfinite(value) and TEMP_MIN_C <= value <= TEMP_MAX_C):
        raise SettingsError(
            f"{what} {temp_c!r} degC is outside {TEMP_MIN_C:g} to {TEMP_MAX_C:g} degC; "
            "give a temperature in that range"
        )
    return value


def check_rh(rh_percent: float) -> float:
    """Return ``rh_percent`` as a float if it lies in 0-100, else raise SettingsError."""
    value = float(rh_percent)
    if not (math.isfinite(value) and 0.0 <= value <= 100.0):
        raise SettingsError(
            f"relative humidity {rh_percent!r} % is outside 0-100 %; give a percentage"
        )
    return value


def _check_pressure(pressure_pa: float) -> float:
    value = float(pressure_pa)
    if not (math.isfinite(value) and PRESSURE_MIN_PA <= value <= PRESSURE_MAX_PA):
        raise SettingsError(
            f"air pressure {pressure_pa!r} Pa is outside {PRESSURE_MIN_PA:g}-"
            f"{PRESSURE_MAX_PA:g} Pa; give the pressure in pascals (sea level is 101325)"
        )
    return value


def _check_co2(co2_fraction: float) -> float:
    value = float(co2_fraction)
    if not (math.isfinite(value) and 0.0 <= value <= CO2_MAX_FRACTION):
        raise SettingsError(
            f"CO2 mole fraction {co2_fraction!r} is outside 0-{CO2_MAX_FRACTION:g}; "
            "give a fraction (room air is 0.0004)"
        )
    return value


def water_vapour_fraction(
    temp_c: float, rh_percent: float, pressure_pa: float = STANDARD_PRESSURE_PA
) -> float:
    """Mole fraction of water vapour in moist air.

    ``x_w = (RH/100) f p_sv / p`` with the enhancement factor
    ``f = 1.00062 + 3.14e-8 p + 5.6e-7 t^2`` and the saturation vapour pressure
    ``p_sv = exp(1.2811805e-5 T^2 - 1.9509874e-2 T + 34.04926034 - 6.3536311e3 / T)``,
    T in kelvin, as given with Cramer (1993).

    Parameters
    ----------
    temp_c : float, degC
    rh_percent : float, 0..100, percent
    pressure_pa : float, Pa

    Returns
    -------
    float, 0..1
        Mole fraction of water vapour.

    Examples
    --------
    >>> round(water_vapour_fraction(20.0, 50.0), 5)
    0.01159
    """
    t = check_temp(temp_c)
    rh = check_rh(rh_percent)
    p = _check_pressure(pressure_pa)
    kelvin = t + 273.15
    p_sv = math.exp(1.2811805e-5 * kelvin**2 - 1.9509874e-2 * kelvin + 34.04926034 - 6.3536311e3 / kelvin)
    enhancement = 1.00062 + 3.14e-8 * p + 5.6e-7 * t**2
    return rh / 100.0 * enhancement * p_sv / p


def speed_of_sound(
    temp_c: float,
    rh_percent: float = 0.0,
    pressure_pa: float = STANDARD_PRESSURE_PA,
    co2_fraction: float = 0.0004,
) -> float:
    """Speed of sound in moist air after Cramer (1993).

    Follows O. Cramer, "The variation of the specific heat ratio and the speed of sound in air
    with temperature, pressure, humidity, and CO2 concentration", J. Acoust. Soc. Am. 93(5),
    2510-2516 (1993), eq. 15, with the water-vapour mole fraction of
    :func:`water_vapour_fraction`.

    The fit is valid for 0-30 degC, 75-102 kPa, water-vapour fraction up to 0.06 and CO2
    fraction up to 0.01. Temperatures from -10 to 45 degC, pressures of 60-110 kPa and CO2
    up to 0.1 are accepted; outside the valid range the result is an extrapolation (at 35 degC
    it is still within 0.03 m/s of CoolProp's dry air).

    Parameters
    ----------
    temp_c : float, -10..45, degC
        Air temperature.
    rh_percent : float, 0..100, percent
        Relative humidity; 0 is dry air.
    pressure_pa : float, 60000..110000, Pa
        Air pressure.
    co2_fraction : float, 0..0.1
        Mole fraction of carbon dioxide (room air about 0.0004).

    Returns
    -------
    float, m/s

    Raises
    ------
    SettingsError
        If a value lies outside its accepted range.

    Examples
    --------
    >>> round(speed_of_sound(20.0, co2_fraction=0.000314), 3)
    343.367
    """
    t = check_temp(temp_c)
    p = _check_pressure(pressure_pa)
    x_c = _check_co2(co2_fraction)
    x_w = water_vapour_fraction(t, rh_percent, p)
    a = _A
    return (
        a[0] + a[1] * t + a[2] * t**2
        + (a[3] + a[4] * t + a[5] * t**2) * x_w
        + (a[6] + a[7] * t + a[8] * t**2) * p
        + (a[9] + a[10] * t + a[11] * t**2) * x_c
        + a[12] * x_w**2
        + a[13] * p**2
        + a[14] * x_c**2
        + a[15] * x_w * p * x_c
    )


def correction_cents(
    temp_c: float,
    ref_temp_c: float,
    rh_percent: float = 0.0,
    pressure_pa: float = STANDARD_PRESSURE_PA,
    co2_fraction: float = 0.0004,
) -> float:
    """Cents to add to a reading taken at ``temp_c`` to get the pitch at ``ref_temp_c``.

    ``correction = 1200 log2(c(T_ref) / c(T_air))``, and ``cents = cents_raw + correction``.
    Both airs have the same humidity, pressure and CO2. A warm room gives a negative
    correction: the instrument reads sharp there and will sound lower at the reference.

    Parameters
    ----------
    temp_c : float, degC
        Measured air temperature.
    ref_temp_c : float, degC
        Temperature the instrument is to be in tune at.
    rh_percent : float, 0..100, percent
    pressure_pa : float, Pa
    co2_fraction : float

    Returns
    -------
    float, cents

    Examples
    --------
    >>> round(correction_cents(26.0, 20.0), 1)
    -17.5
    """
    c_air = speed_of_sound(temp_c, rh_percent, pressure_pa, co2_fraction)
    c_ref = speed_of_sound(ref_temp_c, rh_percent, pressure_pa, co2_fraction)
    return 1200.0 * math.log2(c_ref / c_air)
