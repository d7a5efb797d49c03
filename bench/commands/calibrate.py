"""``bench calibrate``: measure an input's clock error in ppm and keep it for that device.

Two ways (``dsp.clock`` holds the estimators):

* against a reference tone whose true frequency is known: ``--reference-hz HZ`` with
  ``--input FILE`` (a recording made on the card) or ``--input mic [--device D] --seconds S``;
* against the computer's clock: ``[--device D] --minutes N`` counts the frames the device
  delivers against the system's monotonic clock and fits a straight line over the whole run.

A measurement made on a device is saved per device (name and host API) in ``clock.toml``
in the config folder, and applied to every later reading of that device.
"""

from __future__ import annotations

import argparse
import math
import sys
from pathlib import Path
from typing import Any

from bench.errors import AudioFileError, BenchError, SettingsError
from bench.numbers import parse_bounded

DEFAULT_TONE_S = 30.0
"""Seconds of a reference tone recorded from the microphone by default."""


def register(sub: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = sub.add_parser(
        "calibrate",
        help="measure an input's clock error (ppm) against a reference tone or the system clock",
        description="Measure how far an input's sample clock is off, in ppm "
        "((true rate / nominal rate - 1) x 10^6; a card running fast reads a true tone low). "
        "With --reference-hz: listen to a steady tone of known frequency, from a recording "
        "(--input FILE) or the input (--input mic). With --minutes: count the frames the device "
        "delivers against the computer's clock. A device's result is kept and applied to its readings.",
    )
    p.add_argument("--input", default="mic", metavar="mic|FILE", help="a recording of the reference tone, or mic (default)")
    p.add_argument("--device", default=None, metavar="INDEX|NAME", help="input device (see 'bench devices'); default: the default input")
    p.add_argument("--rate", default=None, metavar="HZ", help="sample rate to open the device at (default: the device's)")
    how = p.add_mutually_exclusive_group(required=True)
    how.add_argument("--reference-hz", default=None, metavar="HZ", help="true frequency of the reference tone, Hz")
    how.add_argument("--minutes", default=None, metavar="N", help="count frames against the system clock for N minutes")
    p.add_argument("--seconds", default=None, metavar="S",
                   help=f"with --input mic: seconds of the tone to record (default {DEFAULT_TONE_S:g})")  # fmt: skip
    p.add_argument("--no-save", action="store_true", help="print the result only; keep the stored value")
    p.set_defaults(func=run_calibrate)


def _number(option: str, text: str | None, what: str, lo: float, hi: float) -> float | None:
    return parse_bounded(option, text, what, lo, hi)  # the one strict number syntax


def _say(message: str) -> None:
    print(message, file=sys.stderr, flush=True)


def run_calibrate(args: argparse.Namespace) -> int:
    reference_hz = _number("--reference-hz", args.reference_hz, "the tone's frequency in Hz, e.g. 440", 20.0, 20000.0)
    minutes = _number("--minutes", args.minutes, "minutes to count, e.g. 10", 0.1, 1440.0)
    seconds = _number("--seconds", args.seconds, "seconds of tone to record, e.g. 30", 2.0, 3600.0)
    rate = _number("--rate", args.rate, "a sample rate in Hz, e.g. 48000", 8000.0, 192000.0)
    from_file = args.input != "mic"
    if from_file:
        if minutes is not None:
            raise SettingsError("--minutes counts a device's frames; it takes no --input FILE (use --reference-hz)")
        if args.device is not None or rate is not None or seconds is not None:
            raise SettingsError("--device, --rate and --seconds apply to --input mic, not to a recording")
        assert reference_hz is not None
        return _calibrate_file(Path(args.input), reference_hz)
    if minutes is not None and seconds is not None:
        raise SettingsError("--seconds applies to a reference tone; with --minutes leave it out")
    rate_i = int(rate) if rate is not None else None
    if minutes is not None:
        return _calibrate_counting(args.device, minutes, rate_i, save=not args.no_save)
    assert reference_hz is not None
    return _calibrate_mic(args.device, reference_hz, seconds or DEFAULT_TONE_S, rate_i, save=not args.no_save)


def _tone_lines(tone: Any, reference_hz: float, ppm: float, se_ppm: float) -> list[str]:
    return [
        f"clock: {ppm:+.2f} ppm ± {se_ppm:.2g} (standard error); the input runs {'fast' if ppm > 0 else 'slow'}",
        (f"  tone read {tone.freq_hz:.6f} Hz ± {tone.freq_se_hz:.2g} on the nominal rate, "
        f"reference {reference_hz:g} Hz; {tone.duration_s:.1f} s, SNR {tone.snr_db:.0f} dB, "
        f"quarters within {tone.quarter_spread_ppm:.1f} ppm"),
        f"  readings of this input are multiplied by {1 + ppm * 1e-6:.8f} ({1200 * math.log2(1 + ppm * 1e-6):+.4f} cents)",
    ]


def _measure(samples: Any, sample_rate: float, reference_hz: float, where: str) -> tuple[Any, float, float]:
    from dsp.clock import clock_ppm_from_tone, measure_tone

    try:
        tone = measure_tone(samples, sample_rate, reference_hz)
    except ValueError as exc:
        raise AudioFileError(f"{where}: {exc}") from None
    ppm, se = clock_ppm_from_tone(reference_hz, tone)
    return tone, ppm, se


def _read_mono(path: Path) -> tuple[Any, int]:
    """The whole recording mixed to mono (float64) and its rate; one-line AudioFileError otherwise."""
    import numpy as np
    import soundfile as sf

    if not path.is_file():
        raise AudioFileError(f"{path}: no such file" if not path.exists() else f"{path}: is a folder; give an audio file")
    try:
        audio, rate = sf.read(str(path), dtype="float32", always_2d=True)
    except (RuntimeError, TypeError, sf.LibsndfileError) as exc:
        msg = str(exc).split(":")[-1].strip().rstrip(".").lower() or "unknown format"
        raise AudioFileError(f"{path}: not readable as audio ({msg}); give WAV, FLAC or OGG") from None
    if len(audio) == 0:
        raise AudioFileError(f"{path}: holds no audio samples")
    return audio.mean(axis=1, dtype=np.float64), int(rate)


def _calibrate_file(path: Path, reference_hz: float) -> int:
    mono, rate = _read_mono(path)
    tone, ppm, se = _measure(mono, float(rate), reference_hz, str(path))
    for line in _tone_lines(tone, reference_hz, ppm, se):
        print(line)
    print(f"  (a recording is not saved for a device; give --clock-ppm {ppm:.2f} to 'bench analyze' of its files)")
    return 0


def _save(device: Any, ppm: float, se: float, method: str, detail: str, sample_rate: int) -> None:
    from bench.clockfile import (
        ClockCalibration,
        check_clock_ppm,
        now_iso,
        save_calibration,
    )

    check_clock_ppm(ppm, "the measured clock error")
    cal = ClockCalibration(device.name, device.host_api, ppm, se, method, detail, sample_rate, now_iso())
    path = save_calibration(cal)
    print(f"  saved for {cal.label()} in {path}; applied to its readings from now on")


def _calibrate_mic(spec: str | None, reference_hz: float, seconds: float, rate: int | None, *, save: bool) -> int:
    from bench.sources.device_clock import record_input

    _say(f"recording {seconds:g} s of the reference tone; keep still and quiet")
    rec = record_input(spec, seconds, sample_rate=rate)
    if rec.overflows:
        raise BenchError(
            f"input {rec.device.label()} lost audio {rec.overflows} time(s) while recording; "
            "close other programs and record again"
        )
    tone, ppm, se = _measure(rec.samples, float(rec.sample_rate), reference_hz, f"input {rec.device.label()}")
    for line in _tone_lines(tone, reference_hz, ppm, se):
        print(line)
    if save:
        _save(rec.device, ppm, se, "reference tone", f"{reference_hz:g} Hz tone, {tone.duration_s:.1f} s",
              rec.sample_rate)  # fmt: skip
    return 0


def minutes_for(target_se_ppm: float, fit_se_ppm: float, wander_se_ppm: float, duration_s: float) -> float:
    """Minutes of counting for a standard error of ``target_se_ppm``, from one run's two parts.

    Independent timing scatter of the callbacks (``fit_se_ppm``) falls as ``T^-1.5`` (points
    ~ T, spread of times ~ T); the wander of the rate itself (``wander_se_ppm``) only as
    ``T^-0.5`` (the average of independent stretches). Solved for T by bisection.

    >>> round(minutes_for(1.0, 8.0, 0.0, 60.0), 3)
    4.0
    >>> round(minutes_for(0.1, 0.0, 0.2, 60.0), 3)
    4.0
    """
    def se_at(ratio: float) -> float:
        return math.sqrt(fit_se_ppm**2 / ratio**3 + wander_se_ppm**2 / ratio)

    lo, hi = 1e-6, 1e12
    for _ in range(200):
        mid = math.sqrt(lo * hi)
        lo, hi = (mid, hi) if se_at(mid) > target_se_ppm else (lo, mid)
    return duration_s / 60.0 * math.sqrt(lo * hi)


def _calibrate_counting(spec: str | None, minutes: float, rate: int | None, *, save: bool) -> int:
    from bench.sources.device_clock import count_frames
    from dsp.clock import clock_ppm, fit_frame_rate

    def progress(elapsed_s: float, sample_rate: int, time_s: Any, frames: Any) -> None:
        if len(time_s) >= 10:
            fit = fit_frame_rate(time_s, frames)
            _say(f"  {elapsed_s / 60:.1f} of {minutes:g} min: {clock_ppm(fit.rate_hz / sample_rate):+.2f} ppm "
                 f"± {1e6 * fit.rate_se_hz / sample_rate:.2f} so far")  # fmt: skip

    _say(f"counting the input's frames against the system clock for {minutes:g} min; Ctrl-C ends early")
    count = count_frames(spec, minutes * 60.0, sample_rate=rate, on_progress=progress)
    if count.interrupted:
        _say(f"interrupted: fitting the {len(count.time_s)} callbacks counted")
    if count.overflows:
        raise BenchError(
            f"input {count.device.label()} lost audio {count.overflows} time(s): its frames were not all counted; "
            "close other programs and run again"
        )
    if len(count.time_s) < 10 or (count.time_s[-1] - count.time_s[0]) < 5.0:
        raise BenchError("counted for less than 5 s; run for a minute or more")
    fit = fit_frame_rate(count.time_s, count.frames)
    ppm = clock_ppm(fit.rate_hz / count.sample_rate)
    se = 1e6 * fit.rate_se_hz / count.sample_rate
    print(f"clock: {ppm:+.2f} ppm ± {se:.2g} (standard error); the input runs {'fast' if ppm > 0 else 'slow'}")
    print(f"  {fit.rate_hz:.3f} frames per system second at a nominal {count.sample_rate} Hz; "
          f"{fit.duration_s / 60:.2f} min, {fit.points} callbacks, scatter {fit.residual_rms_frames:.1f} frames rms")  # fmt: skip
    fit_se, wander_se = (1e6 * v / count.sample_rate for v in (fit.fit_se_hz, fit.parts_se_hz))
    print(f"  timing scatter {fit_se:.2g} ppm, the rate's own wander {wander_se:.2g} ppm; ± 1 ppm takes about "
          f"{minutes_for(1.0, fit_se, wander_se, fit.duration_s):.1f} min on this input, "
          f"± 0.1 ppm about {minutes_for(0.1, fit_se, wander_se, fit.duration_s):.0f} min")  # fmt: skip
    print("  against the computer's clock: it is as true as that clock (kept true by network time, or not)")
    if save:
        _save(count.device, ppm, se, "system clock",
              f"{fit.duration_s / 60:.2f} min against the system's monotonic clock", count.sample_rate)  # fmt: skip
    return 0
