"""``bench model predict|fit|whatif|suggest GEOMETRY``: the instrument model from the command line."""

from __future__ import annotations

import argparse
from pathlib import Path
from typing import TYPE_CHECKING

from bench.errors import SettingsError
from bench.numbers import number_arg

if TYPE_CHECKING:
    from bench.model.geometry import Geometry

_GEOMETRY_HELP = "geometry .toml, or a built-in: wren-alto, wren-soprano"


def _air_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("--temp", type=number_arg, default=25.0, metavar="C",
                   help="air temperature in the bore, degC (default 25: a bore warmed by breath)")
    p.add_argument("--rh", type=number_arg, default=60.0, metavar="PERCENT",
                   help="relative humidity in the bore, percent (default 60)")
    p.add_argument("--a4", type=number_arg, default=440.0, metavar="HZ", help="pitch standard of the targets (default 440)")
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

    f = msub.add_parser(
        "fit",
        help="fit the model to captured notes: window end correction, bore warming, hole sizes",
        description="Fit a few model parameters to the latest capture of each note and register "
        "in CAPTURES (a captures file written by bench): the window's end correction, how much "
        "warmer the bore is than the room, one offset per register and each hole's effective "
        "diameter, each with a prior. Prints the residual of every note and each parameter with "
        "its uncertainty, and says which ones the captures do not pin down.",
    )
    f.add_argument("geometry", metavar="GEOMETRY", help=_GEOMETRY_HELP)
    f.add_argument("captures", type=Path, metavar="CAPTURES.csv", help="captures file (<log>.captures.csv)")
    f.add_argument("--rh", type=number_arg, default=60.0, metavar="PERCENT",
                   help="humidity in the bore where a capture names none (default 60)")
    f.add_argument("--save", type=Path, metavar="FITTED.toml",
                   help="write the geometry with the fitted end correction and effective hole diameters")
    f.add_argument("--out", type=Path, metavar="PICTURE.png",
                   help="draw measured against predicted per note and register (.png or .svg)")
    f.add_argument("--overwrite", action="store_true", help="replace FITTED.toml or PICTURE if they exist")
    f.set_defaults(func=run_fit)

    w = msub.add_parser(
        "whatif",
        help="predicted change of every note from a hole enlarged or moved, the foot cut, the bore reamed",
        description="Predict what a change does to every fingering in every register, in cents: "
        "--hole LABEL --diameter MM bores a hole to a new diameter, --move LABEL --to-mm POS "
        "plugs a hole and drills it again elsewhere, --shorten-foot MM cuts the foot, --ream FROM_MM "
        "TO_MM --by-mm D widens a stretch of the bore; --sensitivity prints cents per 0.1 mm of every hole's diameter for every note.",
    )
    w.add_argument("geometry", metavar="GEOMETRY", help=_GEOMETRY_HELP)
    w.add_argument("--hole", metavar="LABEL", help="hole to change (its label, e.g. h4)")
    w.add_argument("--diameter", type=number_arg, metavar="MM", help="its new diameter, mm")
    w.add_argument("--shorten-foot", type=number_arg, metavar="MM", help="cut this much off the foot, mm")
    w.add_argument("--move", metavar="LABEL", help="hole to plug and drill again elsewhere (with --to-mm)")
    w.add_argument("--to-mm", type=number_arg, metavar="POS", help="its new place, mm from the blown end")
    w.add_argument("--ream", type=number_arg, nargs=2, metavar=("FROM_MM", "TO_MM"),
                   help="widen the bore between these distances from the blown end (with --by-mm)")
    w.add_argument("--by-mm", type=number_arg, metavar="D", help="how much wider the reamed stretch gets, mm")
    w.add_argument("--sensitivity", action="store_true", help="cents per 0.1 mm for every hole and note")
    w.add_argument("--captures", type=Path, metavar="CAPTURES.csv",
                   help="fit the model to these captures first: the change is predicted on the fitted model and "
                   "its +- is propagated from the fit's covariance (without it: the spread between model variants)")
    _air_options(w)
    w.set_defaults(func=run_whatif)

    from bench.commands.options import add_tuning_options

    s = msub.add_parser(
        "suggest",
        help="the fewest hole changes that bring the captured notes to their targets, step by step",
        description="From the captured notes in CAPTURES and their targets in the tuning in force, "
        "propose the smallest set of changes to the tone holes, within the limits you set, that "
        "brings the notes closest to their targets: each cut in small steps, saying which ones "
        "cannot be undone. The model is first fitted to the captures (--no-fit: the geometry as "
        "given).",
    )
    s.add_argument("geometry", metavar="GEOMETRY", help=_GEOMETRY_HELP)
    s.add_argument("captures", type=Path, metavar="CAPTURES.csv", help="captures file (<log>.captures.csv)")
    s.add_argument("--allow", action="append", choices=["enlarge", "undercut", "wax"], metavar="KIND",
                   help="a kind of change allowed: enlarge, undercut or wax; repeat for more (default enlarge)")
    s.add_argument("--max-diameter", type=number_arg, metavar="MM",
                   help="no hole (nor its undercut) wider than this, mm (default 0.9 of the bore)")
    s.add_argument("--step-mm", type=number_arg, default=0.1, metavar="MM", help="one step of a cut, mm (default 0.1)")
    s.add_argument("--min-gain", type=number_arg, default=1.0, metavar="CENTS",
                   help="propose a change only if it takes away this much error (root of the drop in the sum of squared cents; default 1 c)")
    s.add_argument("--tolerance", type=number_arg, default=2.0, metavar="CENTS",
                   help="a note this close to its target is in tune (default 2 c)")
    s.add_argument("--no-fit", action="store_true", help="use the geometry as given, without fitting it first")
    s.add_argument("--out", type=Path, metavar="PICTURE.png",
                   help="draw every captured note now and after the advice (.png or .svg)")
    s.add_argument("--overwrite", action="store_true", help="replace PICTURE if it exists")
    add_tuning_options(s)
    s.set_defaults(func=run_suggest)


def _check(args: argparse.Namespace) -> None:
    if not 1 <= args.registers <= 6:
        raise SettingsError(f"--registers {args.registers} is out of range; give 1 to 6")
    if not 300.0 <= args.a4 <= 500.0:
        raise SettingsError(f"--a4 {args.a4:g} Hz is out of range; give 300-500 Hz (e.g. 440 or 415)")


def _with_fingerings(geometry: Geometry) -> Geometry:
    """The geometry itself, or a GeometryError when it names no fingering to predict."""
    from bench.errors import GeometryError

    if not geometry.fingerings:
        example = "x" * len(geometry.holes)
        raise GeometryError(
            f"{geometry.source}: [fingerings]: none given; add a [fingerings] table, e.g. closed = \"{example}\""
        )
    return geometry


def run_predict(args: argparse.Namespace) -> int:
    from bench.model.acoustics import air_at
    from bench.model.geometry import load_geometry
    from bench.model.predict import format_predictions, predict, write_predictions_csv

    _check(args)
    if args.csv is not None and args.csv.exists() and not args.overwrite:
        raise SettingsError(f"{args.csv} exists; give --overwrite to replace it or choose another file name")
    geometry = _with_fingerings(load_geometry(args.geometry))
    air = air_at(args.temp, args.rh)
    preds = predict(geometry, air, args.registers, a4_hz=args.a4)
    print(f"{geometry.title}: {len(geometry.fingerings)} fingerings, air {air.temp_c:g} degC "
          f"{air.rh_percent:g} % RH (c = {air.speed_m_s:.2f} m/s), A4 = {args.a4:g} Hz")
    print(format_predictions(preds), end="")
    if args.csv is not None:
        print(f"predictions written to {write_predictions_csv(preds, args.csv, args.overwrite)}")
    return 0


def run_fit(args: argparse.Namespace) -> int:
    from bench.model.fit import (
        fit_model,
        fitted_geometry,
        format_fit,
        targets_from_captures,
    )
    from bench.model.geometry import geometry_to_toml, load_geometry
    from bench.model.predict import write_text_new
    from bench.workflow.captures import read_captures

    if args.save is not None and args.save.exists() and not args.overwrite:
        raise SettingsError(f"{args.save} exists; give --overwrite to replace it or choose another file name")
    if args.out is not None:
        from bench.model.charts import check_new_picture

        check_new_picture(args.out, args.overwrite)
    geometry = load_geometry(args.geometry)
    targets = targets_from_captures(read_captures(args.captures), geometry, default_rh=args.rh)
    result = fit_model(geometry, targets)
    print(f"{geometry.title}: fitted to {len(targets)} captured notes of {args.captures}")
    print(format_fit(result), end="")
    if args.save is not None:
        offsets = ", ".join(f"register {k} {v:+.1f} c" for k, v in result.offsets_cents.items())
        header = (
            f"{geometry.title}, fitted by bench to {args.captures} ({len(targets)} notes).\n"
            f"Hole diameters are effective ones; the bore was {result.warming_c:.1f} degC above the room; "
            f"offsets: {offsets or 'none'}."
        )
        print(f"fitted geometry written to {write_text_new(args.save, geometry_to_toml(fitted_geometry(result), header), args.overwrite)}")
    if args.out is not None:
        from bench.model.charts import plot_fit

        print(f"picture written to {plot_fit(result, args.out, geometry.title, args.overwrite)}")
    return 0


def run_whatif(args: argparse.Namespace) -> int:
    from bench.model.acoustics import air_at
    from bench.model.geometry import load_geometry
    from bench.model.whatif import (
        enlarge_hole,
        format_change,
        format_sensitivity,
        move_hole,
        predict_change,
        ream,
        sensitivity,
        shorten_foot,
    )

    _check(args)
    if (args.hole is None) != (args.diameter is None):
        raise SettingsError("--hole and --diameter go together; give both, e.g. --hole h4 --diameter 6.5")
    if (args.move is None) != (args.to_mm is None):
        raise SettingsError("--move and --to-mm go together; give both, e.g. --move h3 --to-mm 230")
    if (args.ream is None) != (args.by_mm is None):
        raise SettingsError("--ream and --by-mm go together; give both, e.g. --ream 200 260 --by-mm 0.2")
    if args.hole is None and args.shorten_foot is None and args.move is None and args.ream is None and not args.sensitivity:
        raise SettingsError(
            "nothing to try; give --hole LABEL --diameter MM, --move LABEL --to-mm POS, --shorten-foot MM, "
            "--ream FROM_MM TO_MM --by-mm D or --sensitivity"
        )
    geometry = _with_fingerings(load_geometry(args.geometry))
    air = air_at(args.temp, args.rh)
    fit = None
    model = geometry
    if args.captures is not None:
        from bench.model.fit import fit_model, targets_from_captures
        from bench.workflow.captures import read_captures

        targets = targets_from_captures(read_captures(args.captures), geometry, default_rh=args.rh)
        fit = fit_model(geometry, targets)
        model = fit.geometry  # the fitted end correction; the hole factors go in as options
        room_c = sum(t.temp_c for t in targets) / len(targets)
        air = air_at(min(max(room_c + fit.warming_c, -10.0), 45.0), args.rh)
        print(f"{geometry.title}: the model fitted to {len(targets)} captured notes of {args.captures}; "
              f"air {air.temp_c:.1f} degC (the room {room_c:.1f} degC, the bore {fit.warming_c:.1f} degC warmer) "
              f"{air.rh_percent:g} % RH")
        print("uncertainty: propagated from the fit's covariance (J Sigma J^T), one standard deviation")
    else:
        print(f"{geometry.title}: air {air.temp_c:g} degC {air.rh_percent:g} % RH")
        print("uncertainty: the spread between model variants (give --captures to propagate a fit's instead)")

    def show(changed: Geometry, desc: str) -> None:
        print(format_change(predict_change(model, changed, desc, air, args.registers, uncertainty=True, fit=fit)), end="")

    if args.hole is not None:
        changed = enlarge_hole(model, args.hole, args.diameter)  # an unknown hole: one line
        old = next(h for h in geometry.holes if h.label == args.hole).outer_diameter_mm
        show(changed, f"hole {args.hole} from {old:g} to {args.diameter:g} mm: change in cents")
    if args.move is not None:
        changed = move_hole(model, args.move, args.to_mm)
        old_pos = next(h for h in geometry.holes if h.label == args.move).position_mm
        show(changed, f"hole {args.move} moved from {old_pos:g} to {args.to_mm:g} mm: change in cents")
    if args.ream is not None:
        changed = ream(model, args.ream[0], args.ream[1], args.by_mm)
        show(changed, f"bore reamed {args.by_mm:g} mm wider from {args.ream[0]:g} to {args.ream[1]:g} mm: change in cents")
    if args.shorten_foot is not None:
        changed = shorten_foot(model, args.shorten_foot)
        show(changed, f"foot shortened by {args.shorten_foot:g} mm: change in cents")
    if args.sensitivity:
        print(format_sensitivity(*sensitivity(geometry, air, args.registers)), end="")
    return 0


def run_suggest(args: argparse.Namespace) -> int:
    from bench.commands.options import settings_from_args
    from bench.model.fit import fit_model, fitted_geometry, targets_from_captures
    from bench.model.geometry import load_geometry
    from bench.model.suggest import Limits, format_advice, suggest
    from bench.workflow.captures import read_captures

    settings = settings_from_args(args)
    for option, value in (("--min-gain", args.min_gain), ("--tolerance", args.tolerance)):
        if not 0.0 <= value <= 100.0:
            raise SettingsError(f"{option} {value:g} is out of range; give 0 to 100 cents (e.g. 1)")
    limits = Limits(tuple(dict.fromkeys(args.allow or ["enlarge"])), args.max_diameter, args.step_mm,
                    args.min_gain, args.tolerance)
    geometry = load_geometry(args.geometry)
    rh = settings.rh_percent if settings.rh_percent is not None else 60.0
    targets = targets_from_captures(read_captures(args.captures), geometry, default_rh=rh)
    warming = 5.0
    base = geometry
    if not args.no_fit:
        result = fit_model(geometry, targets)
        base, warming = fitted_geometry(result), result.warming_c
    advice = suggest(base, targets, settings, limits, warming)
    where = "the fitted model (hole diameters are effective ones)" if not args.no_fit else "the geometry as given"
    print(f"{geometry.title}: {len(targets)} captured notes of {args.captures}; targets: {settings.temperament} "
          f"on {settings.tonic}, A4 = {settings.a4_hz:g} Hz, in tune at {settings.ref_temp_c:g} degC; "
          f"changes from {where}; allowed: {', '.join(limits.allow)}")
    print(format_advice(advice), end="")
    if args.out is not None:
        from bench.model.charts import plot_advice

        print(f"picture written to {plot_advice(advice, args.out, geometry.title, args.overwrite)}")
    return 0
