"""``--clock-ppm`` on ``bench analyze`` and ``bench run``, and the stored per-device value.

Outside references: A4 = 440 Hz (ISO 16:1975); the clock-error definition
``ppm = (true rate / nominal rate - 1) * 1e6`` and the sample-rate arithmetic of a card running
+100 ppm fast, which stores a true 440 Hz at 440/(1 + 1e-4) Hz, i.e. 1200*log2(1 + 1e-4) =
0.1731 cents low (*common practice*, the issue's definition).
"""

from __future__ import annotations

import argparse
import math

import numpy as np
import pytest
import soundfile as sf

from bench.cli import main
from bench.clockfile import ClockCalibration, save_calibration
from bench.framelog import read_frame_log

SR = 48000
LOW_CENTS = 1200 * math.log2(1 + 1e-4)  # 0.1731 c: how low the +100 ppm card reads


@pytest.fixture(scope="module")
def fast_card_file(tmp_path_factory):
    """The issue's done-when file: a 440 Hz tone recorded on a card running +100 ppm fast."""
    path = tmp_path_factory.mktemp("clock") / "a4-fast-card.wav"
    t = np.arange(6 * SR) / SR
    f_hz = 440.0 / (1 + 1e-4)
    x = 0.3 * np.sin(2 * np.pi * f_hz * t) + 0.08 * np.sin(4 * np.pi * f_hz * t) + 0.03 * np.sin(6 * np.pi * f_hz * t)
    sf.write(path, x.astype(np.float32), SR, subtype="FLOAT")
    return path


def _voiced(rows):
    return [r for r in rows if r["f0_hz"]][50:-50]  # away from the ends of the tone


def test_done_when_calibrate_then_analyze_reads_440_within_a_hundredth_of_a_cent(fast_card_file, tmp_path, capsys):
    assert main(["calibrate", "--input", str(fast_card_file), "--reference-hz", "440"]) == 0
    ppm = float(capsys.readouterr().out.split()[1])
    assert ppm == pytest.approx(100.0, abs=2.0)
    csv = tmp_path / "corrected.csv"
    assert main(["analyze", str(fast_card_file), "--clock-ppm", "100", "--csv", str(csv)]) == 0
    out = capsys.readouterr().out
    assert "clock +100.00 ppm" in out
    rows = _voiced(read_frame_log(csv))
    assert len(rows) > 500
    median_hz = float(np.median([float(r["f0_hz"]) for r in rows]))
    assert median_hz == pytest.approx(440.000, abs=0.0005)  # the log keeps 4 decimals
    # cents against A4 = 440 Hz from the analyser's unrounded reading (the log's cents_raw)
    cents = float(np.median([float(r["cents_raw"]) for r in rows]))
    assert abs(cents) < 0.01
    assert {r["clock_ppm"] for r in rows} == {"100.000"}


def test_without_the_correction_the_fast_card_reads_low(fast_card_file, tmp_path):
    csv = tmp_path / "plain.csv"
    assert main(["analyze", str(fast_card_file), "--csv", str(csv)]) == 0
    rows = _voiced(read_frame_log(csv))
    cents = float(np.median([float(r["cents_raw"]) for r in rows]))
    assert cents == pytest.approx(-LOW_CENTS, abs=0.01)
    assert {r["clock_ppm"] for r in rows} == {""}


def test_run_with_a_recording_applies_clock_ppm(fast_card_file, tmp_path, capsys):
    log = tmp_path / "run.csv"
    assert main(["run", "--input", str(fast_card_file), "--no-ui", "--clock-ppm", "100", "--log", str(log)]) == 0
    assert "clock +100.00 ppm" in capsys.readouterr().err
    rows = _voiced(read_frame_log(log))
    assert abs(float(np.median([float(r["cents_raw"]) for r in rows]))) < 0.01
    assert {r["clock_ppm"] for r in rows} == {"100.000"}


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["analyze", "x.wav", "--clock-ppm", "fast"], "--clock-ppm 'fast' is not a number"),
        (["analyze", "x.wav", "--clock-ppm", "50000"], "--clock-ppm 50000.0 is not a clock error"),
        (["run", "--input", "demo", "--no-ui", "--clock-ppm", "20"], "not to the demo instrument"),
    ],
)
def test_bad_clock_ppm_is_one_line(argv, message, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0]


def test_a_microphone_takes_its_stored_clock_error(monkeypatch):
    from bench.commands import run as run_command
    from bench.sources import mic

    device = mic.InputDevice(3, "Workshop USB", 1, 48000.0, "ALSA")
    monkeypatch.setattr(mic, "resolve_input_device", lambda spec: device)
    save_calibration(ClockCalibration("Workshop USB", "ALSA", 37.5, 0.4, "system clock", "10 min", 48000, "x"))
    save_calibration(ClockCalibration("Workshop USB", "JACK Audio Connection Kit", -3.0, 0.4, "system clock", "", 48000, "x"))
    source = mic.MicSource("usb")
    args = argparse.Namespace(clock_ppm=None, input="mic")
    assert run_command._clock_ppm(args, source) == 37.5
    assert run_command._clock_ppm(argparse.Namespace(clock_ppm="12", input="mic"), source) == 12.0  # given wins
    monkeypatch.setattr(mic, "resolve_input_device", lambda spec: mic.InputDevice(4, "Other", 1, 48000.0, "ALSA"))
    assert run_command._clock_ppm(args, source) is None  # not calibrated: no correction
