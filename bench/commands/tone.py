"""``bench tone NOTE``: sound a note's target pitch, in the tuning in force, through an output."""

from __future__ import annotations

import argparse
import sys
from typing import Any

from bench.commands.options import add_tuning_options, settings_from_args
from bench.numbers import parse_bounded


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = sub.add_parser(
        "tone",
        help="sound a note's target pitch through an output device",
        description="Sound NOTE at its target in the tuning in force (pitch standard, temperament, "
        "tonic; with --temp, where an instrument in tune at --ref-temp sounds in that air), as a sine "
        "or a soft reed-like tone. The output's clock error (--clock-ppm, or the value 'bench "
        "calibrate' stored for a device of the same name) is taken out, so the tone sounds true.",
    )
    p.add_argument("note", metavar="NOTE", help="the note, e.g. A4, F#5, Bb3")
    p.add_argument("--seconds", default="10", metavar="S", help="how long to sound it (default 10; Ctrl-C ends early)")
    p.add_argument("--level-db", default=None, metavar="DBFS", help="peak level, dBFS (default -18)")
    p.add_argument("--timbre", default="sine", choices=("sine", "reed"), help="sine (default) or a soft reed-like tone")
    p.add_argument("--device", default=None, metavar="INDEX|NAME", help="output device (default: the default output)")
    p.add_argument("--rate", default=None, metavar="HZ", help="sample rate of the output (default: the device's)")
    p.add_argument("--clock-ppm", default=None, metavar="PPM", help="the output's clock error, ppm")
    add_tuning_options(p)
    p.set_defaults(func=run_tone)


def _number(option: str, text: str | None, what: str, lo: float, hi: float) -> float | None:
    return parse_bounded(option, text, what, lo, hi)  # the one strict number syntax


def tone_hz(note: str, args: argparse.Namespace) -> tuple[float, str]:
    """The frequency a note is sounded at (Hz, true) and a line saying what it is."""
    from bench.config import load_saved_settings
    from bench.tuning import target_hz, target_hz_at_air
    from bench.tuning.notes import note_name, parse_note

    settings = settings_from_args(args, load_saved_settings())
    midi = parse_note(note)
    freq_hz = target_hz_at_air(midi, settings)
    name = note_name(midi, settings.flats)
    text = f"{name} {freq_hz:.4f} Hz: {settings.temperament} on {settings.tonic}, A4 = {settings.a4_hz:.2f} Hz"
    if abs(freq_hz - target_hz(midi, settings)) > 1e-9:
        text += f", in {settings.temp_c:g} °C air for an instrument in tune at {settings.ref_temp_c:g} °C"
    return freq_hz, text


def _clock_for(device: Any, given: float | None) -> float | None:
    """The output's clock error: ``given``, else what was stored for a device of that name and host API."""
    from bench.clockfile import find_calibration

    if given is not None:
        return given
    stored = find_calibration(device.name, device.host_api)  # the same card's input clock
    return stored.clock_ppm if stored is not None else None


def run_tone(args: argparse.Namespace) -> int:
    from bench.clockfile import parse_clock_ppm
    from bench.sources.tone_out import (
        DEFAULT_LEVEL_DBFS,
        ToneGenerator,
        TonePlayer,
        resolve_output_device,
    )

    seconds = _number("--seconds", args.seconds, "seconds, e.g. 10", 0.1, 86400.0)
    level = _number("--level-db", args.level_db, "a peak level in dBFS, e.g. -18", -80.0, 0.0)
    rate = _number("--rate", args.rate, "a sample rate in Hz, e.g. 48000", 8000.0, 192000.0)
    ppm = parse_clock_ppm(args.clock_ppm)
    freq_hz, text = tone_hz(args.note, args)
    device = resolve_output_device(args.device)
    ppm = _clock_for(device, ppm)
    sample_rate = int(rate or round(device.default_rate_hz))
    generator = ToneGenerator(sample_rate, freq_hz / (1.0 + (ppm or 0.0) * 1e-6),
                              DEFAULT_LEVEL_DBFS if level is None else level, args.timbre)  # fmt: skip
    clock = f"; output clock {ppm:+.2f} ppm taken out" if ppm is not None else ""
    print(f"sounding {text} ({args.timbre}) on {device.label()}{clock}", file=sys.stderr, flush=True)
    player = TonePlayer(device, generator)
    try:
        player.play_for(seconds or 10.0)
    except KeyboardInterrupt:
        player.stop()
    if player.underflows:
        print(f"the output ran dry {player.underflows} time(s): the tone had gaps", file=sys.stderr)
    return 0
