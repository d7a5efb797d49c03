"""``bench chart SESSION`` and ``bench compare BEFORE AFTER``: the tuning chart of a session,
and what changed between two."""

from __future__ import annotations

import argparse
from collections.abc import Callable
from pathlib import Path

from bench.errors import SettingsError
from bench.numbers import number_arg


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = sub.add_parser(
        "chart",
        help="tuning chart of a session: cents per note and register, unchecked notes",
        description="Tuning chart of a session: the latest capture of each note and register "
        "against its target, and the notes of the instrument still unchecked. SESSION is a frame "
        "log (its <stem>.captures.csv is used when present, else captures are found in the log) "
        "or a captures file. Prints a text chart; --out draws it (PNG or SVG), with a blowing "
        "curve panel when the log holds a crescendo; --summary writes a CSV.",
    )
    p.add_argument("session", type=Path, metavar="SESSION_CSV", help="frame log or captures file")
    p.add_argument("--profile", metavar="NAME|FILE", help="instrument: a family name "
                   "(sopranino, soprano, alto, tenor, bass, great-bass, contrabass, "
                   "sub-great-bass) or a profile .toml; default: the best fit to the notes played")
    p.add_argument("--out", type=Path, metavar="CHART.png|CHART.svg", help="draw the chart to this file")
    p.add_argument("--summary", type=Path, metavar="SUMMARY.csv", help="write cents per note and register")
    p.add_argument("--label", metavar="TEXT", help="chart only the captures with this session label")
    p.add_argument("--flats", action="store_true", help="spell every note of the chart with flats (Bb4, not A#4)")
    p.add_argument("--overwrite", action="store_true",
                   help="replace an existing --out/--summary file (or a link of that name, never its target)")
    p.add_argument("--save-captures", action="store_true",
                   help="write the captures found in the log beside it as <stem>.captures.csv")
    p.set_defaults(func=run_chart)

    c = sub.add_parser(
        "compare",
        help="before/after: what changed per note and register between two sessions",
        description="Compare two sessions note by note: change of temperature-corrected cents, "
        "spread, level and harmonic balance; notes that moved by more than the measurement noise "
        "(2 x sqrt(spread_before^2 + spread_after^2), and more than 1 c) are marked. BEFORE and "
        "AFTER are frame logs or captures files; give the same file with --before-label and "
        "--after-label to compare two passes of one session.",
    )
    c.add_argument("before", type=Path, metavar="BEFORE", help="session before the adjustment")
    c.add_argument("after", type=Path, metavar="AFTER", help="session after it")
    c.add_argument("--profile", metavar="NAME|FILE", help="instrument profile (default: best fit)")
    c.add_argument("--out", type=Path, metavar="CHANGES.png|CHANGES.svg", help="draw the changes")
    c.add_argument("--csv", type=Path, metavar="CHANGES.csv", help="write the table as CSV")
    c.add_argument("--overwrite", action="store_true",
                   help="replace an existing --out/--csv file (or a link of that name, never its target)")
    c.add_argument("--before-label", metavar="TEXT", help="use only BEFORE's captures with this label")
    c.add_argument("--after-label", metavar="TEXT", help="use only AFTER's captures with this label")
    c.add_argument("--noise-factor", type=number_arg, default=2.0, metavar="K",
                   help="a change counts when above K x combined spread (default 2)")
    c.add_argument("--min-cents", type=number_arg, default=1.0, metavar="C",
                   help="and above this many cents (default 1)")
    c.set_defaults(func=run_compare)


def _check_out(path: Path | None) -> None:
    if path is not None and path.suffix.lower() not in (".png", ".svg"):
        raise SettingsError(f"--out {path} has suffix {path.suffix or '(none)'!r}; use .png or .svg")


def _check_outputs(args: argparse.Namespace, options: tuple[str, ...], inputs: list[Path]) -> None:
    """Refuse, before any work, an output that is an input, exists or is a link (the last two
    unless --overwrite); see bench.safeio.check_output."""
    from bench.safeio import FileRefused, check_output
    from bench.textsafe import clip

    for option in options:
        path = getattr(args, option)
        if path is None:
            continue
        try:
            check_output(path, inputs=inputs, overwrite=args.overwrite)
        except FileRefused as exc:
            raise SettingsError(f"--{option}: will not write {clip(str(path))}: {exc.reason}") from None


def _written(path: Path, write: Callable[[Path], object]) -> Path:
    """``write`` to a temporary file beside ``path``, renamed into place (bench.safeio)."""
    from bench.safeio import write_via_temp

    return write_via_temp(path, write)


def run_chart(args: argparse.Namespace) -> int:
    from bench.workflow.blowing import find_blowing_curves
    from bench.workflow.captures import captures_path_for, write_captures
    from bench.workflow.chart import (
        build_chart,
        format_text_chart,
        plot_chart,
        write_summary_csv,
    )
    from bench.workflow.session import load_session

    _check_out(args.out)
    _check_outputs(args, ("out", "summary"), [args.session])
    session = load_session(args.session, args.profile)
    chart = build_chart(session.captures, session.profile, label=args.label, flats=args.flats)
    if args.label is not None and not chart.checked():
        labels = sorted({c.label for c in session.captures})
        raise SettingsError(
            f"no captures with label {args.label!r} in {args.session}; labels there: "
            + (", ".join(repr(x) for x in labels) or "none")
        )
    print(f"captures: {session.captures_from} ({len(session.captures)})")
    print(format_text_chart(chart), end="")
    if session.readings is not None:
        from bench.workflow.captures import skipped_notes

        for skip in skipped_notes(session.readings, profile=session.profile):
            print(f"not captured: {skip}")
    curves = find_blowing_curves(session.readings) if session.readings is not None else []
    for curve in curves:
        print(curve.describe())
    if args.save_captures and session.readings is not None and session.captures_from.startswith("computed"):
        side = write_captures(captures_path_for(args.session), session.captures)
        print(f"captures written to {side}")
    if args.summary:
        _written(args.summary, lambda tmp: write_summary_csv(chart, tmp))
        print(f"summary written to {args.summary}")
    if args.out:
        _written(args.out, lambda tmp: plot_chart(chart, tmp, blowing=curves))
        print(f"chart drawn to {args.out}")
    return 0


def run_compare(args: argparse.Namespace) -> int:
    from bench.workflow.compare import (
        compare_captures,
        format_comparison,
        plot_comparison,
        write_comparison_csv,
    )
    from bench.workflow.session import load_session

    _check_out(args.out)
    _check_outputs(args, ("out", "csv"), [args.before, args.after])
    before = load_session(args.before, args.profile)
    profile = before.profile
    after = load_session(args.after, profile)
    name_b = str(args.before) + (f" [{args.before_label}]" if args.before_label else "")
    name_a = str(args.after) + (f" [{args.after_label}]" if args.after_label else "")
    cmp = compare_captures(
        before.captures,
        after.captures,
        profile,
        before_name=name_b,
        after_name=name_a,
        before_label=args.before_label,
        after_label=args.after_label,
        k=args.noise_factor,
        min_cents=args.min_cents,
    )
    if not cmp.both():
        raise SettingsError(
            f"no note was captured in both {name_b} and {name_a}; play the same notes in both sessions"
        )
    print(f"profile: {profile.describe()}")
    print(format_comparison(cmp), end="")
    if args.csv:
        _written(args.csv, lambda tmp: write_comparison_csv(cmp, tmp))
        print(f"table written to {args.csv}")
    if args.out:
        _written(args.out, lambda tmp: plot_comparison(cmp, tmp))
        print(f"changes drawn to {args.out}")
    return 0
