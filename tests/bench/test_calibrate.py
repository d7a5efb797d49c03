"""``bench calibrate`` on recordings, and the per-device clock file.

Outside reference: the definition ``clock_ppm = (true sample rate / nominal - 1) * 1e6`` from
the issue, and the sample-rate arithmetic of a recording made on a card running ``ppm`` fast:
a true ``f`` is stored at ``f / (1 + ppm/1e6)`` (*common practice*). The device paths run
through PortAudio in tests/audio/test_clock_jack.py.
"""

from __future__ import annotations

import os
import tomllib
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from bench.cli import main
from bench.clockfile import (
    ClockCalibration,
    find_calibration,
    load_calibrations,
    save_calibration,
)
from bench.errors import SettingsError

SR = 48000


def _write_tone(path: Path, freq_hz: float, seconds: float = 10.0, *, channels: int = 1) -> Path:
    t = np.arange(int(seconds * SR)) / SR
    x = 0.4 * np.sin(2 * np.pi * freq_hz * t) + np.random.default_rng(7).normal(0, 0.002, len(t))
    sf.write(path, np.repeat(x[:, None], channels, axis=1).astype(np.float32), SR, subtype="FLOAT")
    return path


@pytest.mark.parametrize("ppm_true", [100.0, -57.0])
def test_recording_of_a_card_off_by_ppm_reads_that_ppm(tmp_path, capsys, ppm_true):
    wav = _write_tone(tmp_path / "tone.wav", 440.0 / (1 + ppm_true * 1e-6), channels=2)
    assert main(["calibrate", "--input", str(wav), "--reference-hz", "440"]) == 0
    out = capsys.readouterr().out
    first = out.splitlines()[0]
    ppm = float(first.split()[1])
    assert ppm == pytest.approx(ppm_true, abs=2.0)
    assert f"--clock-ppm {ppm:.2f}" in out
    assert not (Path(os.environ["BENCH_CONFIG_DIR"]) / "clock.toml").exists()  # a file is not a device


def test_a_tone_off_the_stated_frequency_is_one_line(tmp_path, capsys):
    wav = _write_tone(tmp_path / "fork.wav", 452.0, 4.0)
    assert main(["calibrate", "--input", str(wav), "--reference-hz", "440"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: ") and "+47 cents from the stated 440 Hz" in err[0]


def test_a_tone_that_is_not_steady_is_one_line(tmp_path, capsys):
    t = np.arange(6 * SR) / SR
    f = 440.0 * 2 ** (8 * np.sin(2 * np.pi * 0.25 * t) / 1200)  # a played note wandering 8 cents
    sf.write(tmp_path / "played.wav", (0.4 * np.sin(2 * np.pi * np.cumsum(f) / SR)).astype(np.float32), SR)
    assert main(["calibrate", "--input", str(tmp_path / "played.wav"), "--reference-hz", "440"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "not steady" in err[0]


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["calibrate", "--input", "x.wav", "--minutes", "2"], "--minutes counts a device's frames"),
        (["calibrate", "--reference-hz", "abc"], "--reference-hz 'abc' is not a number"),
        (["calibrate", "--minutes", "0"], "--minutes '0' is out of range"),
        (["calibrate", "--input", "x.wav", "--reference-hz", "440", "--device", "2"], "apply to --input mic"),
        (["calibrate", "--input", "missing.wav", "--reference-hz", "440"], "no such file"),
    ],
)
def test_bad_options_are_one_line(argv, message, capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert message in err and len(err.strip().splitlines()) == 1


def _cal(device: str, ppm: float, host_api: str = "ALSA") -> ClockCalibration:
    return ClockCalibration(device, host_api, ppm, 0.5, "system clock", "1 min", 48000, "2026-12-04T18:00:00")


def test_clock_file_keeps_other_devices_and_replaces_the_same_one(tmp_path):
    path = tmp_path / "clock.toml"
    save_calibration(_cal("USB Audio", 23.0), path)
    save_calibration(_cal("USB Audio", -4.0, host_api="JACK Audio Connection Kit"), path)
    save_calibration(_cal("Built-in", 61.5), path)
    save_calibration(_cal("USB Audio", 25.5), path)  # measured again
    found = {(c.device, c.host_api): c.clock_ppm for c in load_calibrations(path)}
    assert found == {
        ("USB Audio", "ALSA"): 25.5,
        ("USB Audio", "JACK Audio Connection Kit"): -4.0,
        ("Built-in", "ALSA"): 61.5,
    }
    assert not list(tmp_path.glob("*.tmp"))  # written to a temporary file and renamed
    hit = find_calibration("USB Audio", "JACK Audio Connection Kit", path)
    assert hit is not None and hit.clock_ppm == -4.0
    assert find_calibration("USB Audio", "WASAPI", path) is None


def test_clock_file_keeps_what_it_does_not_know(tmp_path):
    path = tmp_path / "clock.toml"
    path.write_text('note = "bench 2 wrote this"\n[[input]]\ndevice = "X"\nhost_api = "ALSA"\nclock_ppm = 3.0\n'
                    'mic_serial = "A17"\n', encoding="utf-8")  # fmt: skip
    save_calibration(_cal("Y", 9.0), path)
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    assert data["note"] == "bench 2 wrote this"
    assert data["input"][0] == {"device": "X", "host_api": "ALSA", "clock_ppm": 3.0, "mic_serial": "A17"}


def test_a_damaged_clock_file_is_never_overwritten(tmp_path, capsys):
    path = tmp_path / "clock.toml"
    path.write_text("[[input]\ndevice = ", encoding="utf-8")
    with pytest.raises(SettingsError, match="not valid TOML.*move it aside"):
        save_calibration(_cal("Y", 9.0), path)
    assert path.read_text(encoding="utf-8") == "[[input]\ndevice = "
    assert find_calibration("Y", "ALSA", path) is None  # reading it: one warning, no correction
    assert capsys.readouterr().err.count("warning:") == 1
