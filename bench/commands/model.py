"""``bench model predict|fit|whatif GEOMETRY``: the instrument model from the command line."""

from __future__ import annotations

import argparse
from pathlib import Path

from bench.errors import SettingsError

_GEOMETRY_HELP = "geometry .toml, or a built-in: wren-alto, wren-soprano"


def _air_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--temp", type=float, default=25.0, metavar="C",
                   help="air temperature in the bore, degC (default 25: a bore warmed by breath)")
    p.add_argument("--rh", type=float, default=60.0, metavar="PERCENT",
                   help="relative humidity in the bore, percent (default 60)")
    p.add_argument("--a4", type=float, default=440.0, metavar="HZ", help="pitch standard of the targets (default 440)")
    p.add_argument("--registers", type=int, default=3, metavar="N", help="modes per fingering (default 3)")


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    m = sub.add_parser(
        "model",
        help="instrument model: predict every note from a geometry, fit it to captures, try changes",
        description="The acoustic model of a duct flute: bore, window and tone holes as transfer "
        "matrices; the playing frequencies are the resonances seen from the blown end.",
    )
    msub = m.add_subparsers(dest="model_command", metavar="ACTION", required=True)

    p = msub.add_parser(
        "predict",
        help="predicted frequency of every fingering in every register",
        description="Predict the playing frequency of every fingering of GEOMETRY in registers "
        "1..N, and its cents from the note the fingering is named after.",
    )
    p.add_argument("geometry", metavar="GEOMETRY", help=_GEOMETRY_HELP)
    _air_options(p)
    p.add_argument("--csv", type=Path, metavar="OUT.csv", help="also write the table as CSV")
    p.add_argument("--overwrite", action="store_true", help="replace OUT.csv if it exists")
    p.set_defaults(func=run_predict)


def _check(args: argparse.Namespace) -> None:
    if not 1 <= args.registers <= 6:
        raise SettingsError(f"--registers {args.registers} is out of range; give 1 to 6")
    if not 300.0 <= args.a4 <= 500.0:
        raise SettingsError(f"--a4 {args.a4:g} Hz is out of range; give 300-500 Hz (e.g. 440 or 415)")


def run_predict(args: argparse.Namespace) -> int:
    from bench.model.acoustics import air_at
    from bench.model.geometry import load_geometry
    from bench.model.predict import format_predictions, predict, write_predictions_csv

    _check(args)
    if args.csv is not None and args.csv.exists() and not args.overwrite:
        raise SettingsError(f"{args.csv} exists; give --overwrite to replace it or choose another file name")
    geometry = load_geometry(args.geometry)
    air = air_at(args.temp, args.rh)
    preds = predict(geometry, air, args.registers, a4_hz=args.a4)
    print(f"{geometry.title}: {len(geometry.fingerings)} fingerings, air {air.temp_c:g} degC "
          f"{air.rh_percent:g} % RH (c = {air.speed_m_s:.2f} m/s), A4 = {args.a4:g} Hz")
    print(format_predictions(preds), end="")
    if args.csv is not None:
        print(f"predictions written to {write_predictions_csv(preds, args.csv, args.overwrite)}")
    return 0
