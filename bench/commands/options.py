"""Tuning options shared by every command that measures or shows pitch."""

from __future__ import annotations

import argparse
import dataclasses
from typing import Any

from bench.errors import SettingsError
from bench.tuning import (
    PITCH_STANDARDS,
    TEMPERAMENT_IDS,
    TuningSettings,
    load_temperament,
    parse_a4,
)
from bench.tuning.air import TEMP_MAX_C, TEMP_MIN_C
from bench.tuning.temperaments import canonical_temperament_id

__all__ = ["add_tuning_options", "is_temperament_file", "settings_from_args"]


def add_tuning_options(parser: argparse.ArgumentParser) -> None:
    """Add --a4, --temperament, --tonic, --temp, --ref-temp, --rh, --flats.

    Every option defaults to None ("not given"), so :func:`settings_from_args` can keep the
    values of a base settings object.
    """
    presets = ", ".join(f"'{s.name}'" for s in PITCH_STANDARDS)
    g = parser.add_argument_group("tuning")
    g.add_argument(
        "--a4",
        default=None,
        metavar="HZ|PRESET",
        help=f"pitch standard: A4 in Hz (300-500) or a preset: {presets} (default 440)",
    )
    g.add_argument(
        "--temperament",
        default=None,
        metavar="ID|FILE.toml",
        help=f"temperament: {', '.join(TEMPERAMENT_IDS)}, or a .toml file (default equal)",
    )
    g.add_argument(
        "--tonic",
        default=None,
        metavar="NOTE",
        help="pitch class the temperament is laid on, e.g. C, F#, Bb (default C)",
    )
    g.add_argument(
        "--temp",
        default=None,
        metavar="C",
        help=f"measured air temperature, degC ({TEMP_MIN_C:g} to {TEMP_MAX_C:g}; default 20)",
    )
    g.add_argument(
        "--ref-temp",
        default=None,
        metavar="C",
        help="temperature the instrument is to be in tune at, degC (default 20)",
    )
    g.add_argument(
        "--rh",
        default=None,
        metavar="PERCENT",
        help="relative humidity of the air, percent (default: dry air)",
    )
    g.add_argument(
        "--flats",
        action="store_true",
        default=None,
        help="spell note names with flats (Bb) instead of sharps (A#)",
    )


def is_temperament_file(text: str) -> bool:
    """True when a --temperament value names a file rather than a built-in identifier.

    A built-in identifier or alias wins (``1/4-comma`` is the alias, not a path).
    """
    try:
        canonical_temperament_id(text)
    except SettingsError:
        return text.lower().endswith(".toml") or "/" in text or "\\" in text
    return False


def _number(option: str, text: Any, what: str) -> float:
    from bench.numbers import parse_number

    return parse_number(text, option, what)


def settings_from_args(
    args: argparse.Namespace, base: TuningSettings | None = None
) -> TuningSettings:
    """Build settings from the options; options not given keep ``base``'s values.

    Parameters
    ----------
    args : argparse.Namespace
        Parsed options of a parser prepared with :func:`add_tuning_options` (missing
        attributes count as not given).
    base : TuningSettings or None
        Values for the options not given; default ``TuningSettings()``.

    Returns
    -------
    TuningSettings

    Raises
    ------
    SettingsError
        One line naming the bad value and the valid choices.
    """
    s = base if base is not None else TuningSettings()
    changes: dict[str, Any] = {}
    a4 = getattr(args, "a4", None)
    if a4 is not None:
        changes["a4_hz"] = parse_a4(a4)
    temperament = getattr(args, "temperament", None)
    if temperament is not None:
        if is_temperament_file(temperament):
            custom = load_temperament(temperament)
            changes["temperament"] = custom.id
            changes["custom_temperament"] = custom
        else:
            changes["temperament"] = canonical_temperament_id(temperament)
            changes["custom_temperament"] = None
    tonic = getattr(args, "tonic", None)
    if tonic is not None:
        changes["tonic"] = tonic
    temp = getattr(args, "temp", None)
    if temp is not None:
        changes["temp_c"] = _number("--temp", temp, "the air temperature in degC, e.g. 18.5")
    ref_temp = getattr(args, "ref_temp", None)
    if ref_temp is not None:
        changes["ref_temp_c"] = _number(
            "--ref-temp", ref_temp, "the temperature to be in tune at in degC, e.g. 20"
        )
    rh = getattr(args, "rh", None)
    if rh is not None:
        changes["rh_percent"] = _number("--rh", rh, "the relative humidity in percent, e.g. 45")
    flats = getattr(args, "flats", None)
    if flats is not None:
        changes["flats"] = bool(flats)
    return dataclasses.replace(s, **changes)
