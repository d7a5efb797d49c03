"""INTERFACE STUB: tuning options shared by every command that measures or shows pitch.

To be completed by the tuning model (validation, presets, custom temperaments).
"""

from __future__ import annotations

import argparse

from bench.tuning import TuningSettings


def add_tuning_options(parser: argparse.ArgumentParser) -> None:
    """Add --a4, --temperament, --tonic, --temp, --ref-temp, --rh, --flats."""
    g = parser.add_argument_group("tuning")
    g.add_argument("--a4", default=None, help="pitch standard: A4 in Hz (300-500) or a preset name")
    g.add_argument("--temperament", default=None, help="temperament identifier or a .toml file")
    g.add_argument("--tonic", default=None, help="tonic of the temperament, e.g. C, F#, Bb")
    g.add_argument("--temp", default=None, help="measured air temperature, degC")
    g.add_argument("--ref-temp", default=None, help="temperature the instrument is in tune at, degC")
    g.add_argument("--rh", default=None, help="relative humidity, percent")
    g.add_argument("--flats", action="store_true", default=None, help="spell notes with flats")


def settings_from_args(
    args: argparse.Namespace, base: TuningSettings | None = None
) -> TuningSettings:
    """Build settings from the options; options not given keep ``base``'s values."""
    import dataclasses

    s = base or TuningSettings()
    changes = {}
    if args.a4 is not None:
        changes["a4_hz"] = float(args.a4)
    if args.temp is not None:
        changes["temp_c"] = float(args.temp)
    if args.ref_temp is not None:
        changes["ref_temp_c"] = float(args.ref_temp)
    return dataclasses.replace(s, **changes)
