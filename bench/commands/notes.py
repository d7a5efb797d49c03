"""``bench notes`` (table of target pitches) and ``bench temperaments`` (list of offsets)."""

from __future__ import annotations

import argparse
import math
from typing import Any

from bench.commands.options import add_tuning_options, settings_from_args
from bench.errors import SettingsError
from bench.textsafe import printable
from bench.tuning import (
    TEMPERAMENT_IDS,
    TuningSettings,
    air_correction_cents,
    get_temperament,
    note_name,
    offsets_from_a,
    offsets_on,
    parse_note,
    parse_pitch_class,
    pitch_class_name,
    resolve_temperament,
    standard_name,
    target_hz,
    target_hz_at_air,
    target_offsets_cents,
)

__all__ = ["describe_settings", "notes_table", "register", "temperaments_table"]

DEFAULT_FROM = "C2"
DEFAULT_TO = "C8"


def register(subparsers: Any) -> None:
    """Add the ``notes`` and ``temperaments`` sub-commands."""
    notes = subparsers.add_parser(
        "notes",
        help="print the target pitch of every note for the chosen tuning",
        description=(
            "Print each note's equal-tempered frequency, its target in the chosen temperament "
            "and pitch standard, and (with --temp) the frequency to expect in the measured air."
        ),
    )
    notes.add_argument("--from", dest="from_note", default=DEFAULT_FROM, metavar="NOTE",
                       help=f"lowest note of the table (default {DEFAULT_FROM})")
    notes.add_argument("--to", dest="to_note", default=DEFAULT_TO, metavar="NOTE",
                       help=f"highest note of the table (default {DEFAULT_TO})")
    add_tuning_options(notes)
    notes.set_defaults(func=run_notes)

    temps = subparsers.add_parser(
        "temperaments",
        help="list the temperaments with their twelve offsets",
        description=(
            "List every temperament with the deviation of its twelve notes from equal "
            "temperament, in cents, laid on the chosen tonic."
        ),
    )
    temps.add_argument("--from-a", action="store_true",
                       help="shift each row so that A is 0, as the tuner places the targets "
                            "(A4 sounds at the pitch standard)")
    temps.add_argument("--describe", action="store_true",
                       help="add a line saying how each temperament is built")
    add_tuning_options(temps)
    temps.set_defaults(func=run_temperaments)


def _air_words(settings: TuningSettings) -> str:
    humid = "dry air" if settings.rh_percent is None else f"{settings.rh_percent:g} % humidity"
    return humid


def describe_settings(settings: TuningSettings) -> str:
    """One line naming the pitch standard, temperament, tonic and reference air."""
    preset = standard_name(settings.a4_hz)
    a4 = f"A4 = {settings.a4_hz:.2f} Hz" + (f" ({preset})" if preset else "")
    t = resolve_temperament(settings)
    return (
        f"{a4}; {printable(t.name)} ({t.id}) on {settings.tonic}; "
        f"in tune at {settings.ref_temp_c:g} °C, {_air_words(settings)}"
    )


def notes_table(settings: TuningSettings, low_midi: int, high_midi: int) -> list[str]:
    """Lines of the ``bench notes`` output for MIDI notes ``low_midi`` .. ``high_midi``."""
    show_air = not math.isclose(settings.temp_c, settings.ref_temp_c, abs_tol=1e-9)
    lines = ["Target pitches: " + describe_settings(settings)]
    if show_air:
        correction = air_correction_cents(settings)
        drift = -correction
        way = "sharp" if drift > 0 else "flat"
        lines.append(
            f"Measured air {settings.temp_c:g} °C: an instrument in tune at "
            f"{settings.ref_temp_c:g} °C plays {abs(drift):.2f} cents {way} there; readings "
            f"are corrected by {correction:+.2f} cents. The last column is the frequency to "
            f"expect at {settings.temp_c:g} °C."
        )
    offsets = target_offsets_cents(settings)
    header = ["note", "equal Hz", "target Hz", "cents from equal"]
    if show_air:
        header.append(f"Hz at {settings.temp_c:g} °C")
    rows = [header]
    for midi in range(low_midi, high_midi + 1):
        equal_hz = settings.a4_hz * 2.0 ** ((midi - 69) / 12.0)
        row = [
            note_name(midi, settings.flats),
            f"{equal_hz:.3f}",
            f"{target_hz(midi, settings):.3f}",
            f"{offsets[midi % 12]:+.2f}",
        ]
        if show_air:
            row.append(f"{target_hz_at_air(midi, settings):.3f}")
        rows.append(row)
    widths = [max(len(r[i]) for r in rows) for i in range(len(header))]
    lines.append("")
    for r in rows:
        cells = [r[0].ljust(widths[0])] + [c.rjust(w) for c, w in zip(r[1:], widths[1:])]
        lines.append("  ".join(cells).rstrip())
    return lines


def run_notes(args: argparse.Namespace) -> int:
    """Print the table of target pitches."""
    settings = settings_from_args(args)
    low = parse_note(args.from_note)
    high = parse_note(args.to_note)
    if low > high:
        raise SettingsError(
            f"--from {args.from_note} lies above --to {args.to_note}; give the lower note to --from"
        )
    print("\n".join(notes_table(settings, low, high)))
    return 0


def temperaments_table(settings: TuningSettings, from_a: bool = False, describe: bool = False) -> list[str]:
    """Lines of the ``bench temperaments`` output: every temperament on ``settings.tonic``."""
    tonic_pc = parse_pitch_class(settings.tonic)
    temperaments = [get_temperament(t) for t in TEMPERAMENT_IDS]
    if settings.custom_temperament is not None:
        temperaments.append(settings.custom_temperament)
    zero = "A = 0" if from_a else f"{settings.tonic} = 0"
    lines = [
        f"Temperaments on {settings.tonic}: deviation from equal temperament in cents, {zero}; * marks the one chosen",
        "",
    ]
    names = [pitch_class_name(p, settings.flats) for p in range(12)]
    id_width = max(len(t.id) for t in temperaments) + 2
    lines.append(" " * id_width + " ".join(n.rjust(7) for n in names) + "  name")
    for t in temperaments:
        row = offsets_on(t, tonic_pc)
        if from_a:
            row = offsets_from_a(row)
        mark = "*" if t.id == settings.temperament else " "
        cells = " ".join(f"{0.0 if abs(x) < 0.005 else x:7.2f}" for x in row)
        lines.append(f"{mark}{t.id.ljust(id_width - 1)}{cells}  {printable(t.name)}")
        if describe:  # text from a file is shown as text (control characters escaped)
            lines.append(" " * id_width + printable(t.description) + (f" (file {printable(t.source)})" if t.source else ""))
    return lines


def run_temperaments(args: argparse.Namespace) -> int:
    """Print the temperaments with their offsets."""
    settings = settings_from_args(args)
    print("\n".join(temperaments_table(settings, args.from_a, args.describe)))
    return 0
