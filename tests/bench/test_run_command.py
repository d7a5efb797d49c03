"""``bench run`` / ``bench demo`` / ``bench devices`` from the command line: unattended
logging of a file, the one-line errors, the air temperature source, the fallback to the
demo, and Ctrl-C leaving a complete log."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
import types
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from bench.cli import main
from bench.framelog import read_frame_log

RATE = 48000
A4_HZ = 440.0  # ISO 16:1975
F4_HZ = 349.2282  # equal temperament at A4 = 440 (REFERENCES section 1)


@pytest.fixture(autouse=True)
def _private_folders(tmp_path, monkeypatch):
    monkeypatch.setenv("BENCH_CONFIG_DIR", str(tmp_path / "config"))
    monkeypatch.setenv("BENCH_LOG_DIR", str(tmp_path / "logs"))


def _two_notes(tmp_path: Path) -> Path:
    t = np.arange(int(1.0 * RATE)) / RATE

    def tone(f):
        return 0.3 * np.sin(2 * np.pi * f * t) + 0.1 * np.sin(4 * np.pi * f * t)

    audio = np.concatenate([tone(A4_HZ), np.zeros(RATE // 4), tone(F4_HZ), np.zeros(RATE // 4)])
    path = tmp_path / "two-notes.wav"
    sf.write(path, audio.astype(np.float32), RATE, subtype="FLOAT")
    return path


def test_unattended_file_run_prints_held_notes_and_writes_the_log(tmp_path, capsys):
    log = tmp_path / "out.csv"
    code = main(["run", "--no-ui", "--input", str(_two_notes(tmp_path)), "--log", str(log)])
    out, err = capsys.readouterr()
    assert code == 0, err
    lines = out.strip().splitlines()
    assert [line.split()[4] for line in lines] == ["A4", "F4"]
    for line in lines:  # "start s  duration s  note  cents c ..."
        cents = float(line.split()[5])
        assert abs(cents) < 1.0, line
        assert 0.8 < float(line.split()[2]) <= 1.0  # held for about the 1 s it sounded
    rows = read_frame_log(log)
    assert f"log: {log} ({len(rows)} rows)" in err
    assert {r["note"] for r in rows if r["note"]} == {"A4", "F4"}
    assert float(rows[-1]["time_s"]) > 2.3  # the whole file, run faster than real time


def test_temperature_source_sets_the_air_in_the_log(tmp_path, capsys):
    temp = tmp_path / "air.txt"
    temp.write_text("26.0\n")
    log = tmp_path / "warm.csv"
    code = main(["run", "--no-ui", "--input", str(_two_notes(tmp_path)), "--log", str(log), "--temp-source", str(temp)])
    out, err = capsys.readouterr()
    assert code == 0, err
    rows = [r for r in read_frame_log(log) if r["note"] == "A4"]
    assert {r["temp_c"] for r in rows} == {"26.00"}
    # Tuned at 20 degC, played at 26 degC: +17.5 c from the air alone (REFERENCES section 3,
    # Cramer 1993: 17.49 c); the corrected reading of an exact A4 shows the other side of it.
    median = np.median([float(r["cents"]) for r in rows])
    assert median == pytest.approx(-17.5, abs=1.0)


@pytest.mark.parametrize(
    "argv, message",
    [
        (["run", "--rate", "abc"], "--rate 'abc' is not a number"),
        (["run", "--rate", "8000", "--input", "demo"], "--rate 8000 Hz is out of range; use 16000-96000"),
        (["run", "--block", "4", "--input", "demo"], "--block 4 is out of range"),
        (["run", "--input", "missing.wav", "--no-ui"], "missing.wav: no such file"),
        (["run", "--duration", "5", "--input", "demo"], "--duration applies to --no-ui"),
        (["run", "--log-rate", "0", "--input", "demo", "--no-ui"], "--log-rate '0' must be above 0"),
        (["run", "--temp-source", "cmd:", "--input", "demo"], "names no command"),
        (["run", "--a4", "1000", "--input", "demo"], "1000"),
        (["run", "--input", "demo", "--geometry", "missing.toml"], "missing.toml: file: not found"),
        (["demo", "--no-ui", "--geometry", "wren-alto"], "--geometry applies to the screen's model view"),
    ],
)
def test_bad_options_get_one_line_and_exit_2(argv, message, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and message in err
    assert err.count("\n") == 1


def test_file_options_that_do_not_apply_are_refused(tmp_path, capsys):
    wav = _two_notes(tmp_path)
    assert main(["run", "--no-ui", "--input", str(wav), "--device", "3"]) == 2
    assert "--device '3' applies to --input mic" in capsys.readouterr().err
    existing = tmp_path / "taken.csv"
    existing.write_text("x")
    assert main(["run", "--no-ui", "--input", str(wav), "--log", str(existing)]) == 2
    assert "exists already" in capsys.readouterr().err


def test_unknown_device_names_what_was_found(monkeypatch, capsys):
    from bench.sources import mic

    monkeypatch.setattr(mic, "list_input_devices", lambda: [mic.InputDevice(2, "USB Audio", 1, 48000.0, "ALSA")])
    assert main(["run", "--no-ui", "--device", "scarlett", "--duration", "1"]) == 2
    err = capsys.readouterr().err
    assert err == "error: no input device matches 'scarlett'; input devices found: 2 'USB Audio' (ALSA)\n"


def test_no_microphone_unattended_fails_in_one_line_with_status_3(monkeypatch, capsys, tmp_path):
    # Unattended, the demo is never put in the microphone's place: a script must be able to
    # tell a real session from a failed one (exit status 3, no log; README-reliability-draft).
    from bench.sources import mic

    monkeypatch.setattr(mic, "list_input_devices", lambda: [])
    code = main(["run", "--no-ui", "--duration", "0.5"])
    err = capsys.readouterr().err
    assert code == 3, err
    assert err.startswith("error: no audio input device found; connect a microphone or use --input demo")
    assert err.count("\n") == 1
    assert not list((tmp_path / "logs").glob("session-*.csv"))


def test_devices_lists_inputs(monkeypatch, capsys):
    from bench.sources import mic

    monkeypatch.setattr(
        mic,
        "list_input_devices",
        lambda: [mic.InputDevice(0, "HDA Intel PCH", 2, 44100.0, "ALSA"), mic.InputDevice(4, "system", 2, 48000.0, "JACK Audio Connection Kit")],
    )
    monkeypatch.setattr(mic, "import_sounddevice", lambda: types.SimpleNamespace(default=types.SimpleNamespace(device=[4, 4])))
    assert main(["devices"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].split() == ["index", "name", "ch", "rate", "Hz", "host", "API"]
    assert lines[1].split() == ["0", "HDA", "Intel", "PCH", "2", "44100", "ALSA"]
    assert lines[2].split()[:3] == ["*", "4", "system"]


def test_ctrl_c_in_unattended_run_leaves_a_complete_log(tmp_path):
    log = tmp_path / "session.csv"
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    proc = subprocess.Popen(
        [sys.executable, "-m", "bench", "demo", "--no-ui", "--log", str(log)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=env,
        # Ctrl-C as at a terminal: a test run started in the background (nohup, "&") passes
        # SIGINT on ignored, and a child that inherits that rightly ignores it
        preexec_fn=_default_sigint,
    )
    try:
        deadline = time.monotonic() + 30
        while time.monotonic() < deadline:  # wait for measured rows, not for a fixed time
            if log.exists() and len(read_frame_log(log)) > 100:
                break
            time.sleep(0.05)
        else:
            pytest.fail("no log rows appeared")
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=15)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 130, err
    rows = read_frame_log(log)
    assert f"interrupted; the log is complete: {log} ({len(rows)} rows)" in err
    assert log.read_bytes().endswith(b"\r\n")  # closed on a whole row


def _default_sigint() -> None:
    """In the child before exec: SIGINT back to its default action."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)
