"""``bench tone`` played into a JACK dummy server and captured back by JACK-Client.

Outside references: the target pitches F4 = 349.2282 Hz in equal temperament at A4 = 440 Hz
and A4 = 415 Hz (/work/shared/REFERENCES.md section 1: ISO 16:1975; 415 Hz the baroque pitch
standard, *common practice*); the captured tone read by Praat's autocorrelation pitch
(praat-parselmouth, Boersma 1993), precise to ~0.1 ppm (0.0002 cent) on a clean tone
(measured, tests/dsp/test_clock.py); and the clock arithmetic: an output running ``ppm`` fast
plays ``f * (1 + ppm/1e6)``, so with ``--clock-ppm`` the samples hold ``f / (1 + ppm/1e6)``.
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from conftest import SAMPLE_RATE
from test_clock_jack import _env

pytestmark = pytest.mark.audio

CAPTURE = Path(__file__).with_name("jack_capture.py")


def _wait_for_input_ports(server: str, timeout_s: float = 30.0) -> None:
    import time

    import jack

    client = jack.Client("bench-test-watch", servername=server, no_start_server=True)
    try:
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            if [p for p in client.get_ports(is_audio=True, is_input=True) if not p.name.startswith(("system:", "bench-"))]:
                return
            time.sleep(0.05)
        pytest.fail("bench run's input ports never appeared")
    finally:
        client.close()


def _praat_hz(x: np.ndarray, rate: int) -> float:
    import parselmouth

    pitch = parselmouth.Sound(x.astype(np.float64), sampling_frequency=rate).to_pitch_ac(
        time_step=0.01, pitch_floor=150, pitch_ceiling=900, very_accurate=True
    )
    f0 = pitch.selected_array["frequency"]
    return float(np.mean(f0[f0 > 0]))


@pytest.mark.parametrize(
    ("argv", "target_hz", "ppm"),
    [
        (["F4", "--timbre", "sine"], 349.2282, 0.0),
        (["A4", "--a4", "415", "--timbre", "reed", "--clock-ppm", "100"], 415.0, 100.0),
    ],
)
def test_tone_captured_back_reads_the_target_within_a_hundredth_of_a_cent(jack_server, tmp_path, argv, target_hz, ppm):
    env = _env(jack_server.name)
    wav = tmp_path / "captured.wav"
    capture = subprocess.Popen([sys.executable, str(CAPTURE), str(wav), "5"], env=env, stdout=subprocess.PIPE, text=True)
    try:
        done = subprocess.run([sys.executable, "-m", "bench", "tone", *argv, "--seconds", "7", "--device", "system"],
                              env=env, capture_output=True, text=True, timeout=60, check=False)  # fmt: skip
        out, _ = capture.communicate(timeout=30)
    finally:
        if capture.poll() is None:
            capture.kill()
            capture.communicate()
    assert done.returncode == 0, done.stderr
    info = json.loads(out)
    assert info["frames"] == 5 * SAMPLE_RATE, info
    x, rate = sf.read(wav, dtype="float32")
    x = x[int(0.2 * rate) :]  # past the fade-in
    assert np.max(np.abs(x)) > 0.05
    sample_hz = target_hz / (1 + ppm * 1e-6)  # what the samples hold for an output running ppm fast
    praat_hz = _praat_hz(x, rate)
    print(f"{done.stderr.strip()}; Praat reads {praat_hz:.5f} Hz, samples should hold {sample_hz:.5f} Hz")
    assert abs(1200 * math.log2(praat_hz / sample_hz)) < 0.01
    from dsp.clock import measure_tone

    tone = measure_tone(x, rate, sample_hz)
    assert abs(1200 * math.log2(tone.freq_hz / sample_hz)) < 0.01
    # played on a card that runs ppm fast, the tone sounds at the target
    assert abs(1200 * math.log2(tone.freq_hz * (1 + ppm * 1e-6) / target_hz)) < 0.01


def test_drone_sounds_beside_a_live_run_without_holding_up_the_input(jack_server, tmp_path):
    # bench run listens to F4 fed into its input while its drone sounds A4 on the output: the
    # input loses nothing and reads F4, and the drone captured back reads A4 = 440 Hz. The JACK
    # device 'system' has a stored clock error of +50 ppm (as 'bench calibrate' keeps it): the
    # run applies it to the input (F4 then reads 1200*log2(1 + 5e-5) = 0.0866 cents high, the
    # ppm arithmetic) and takes it out of the drone (its samples hold 440/(1 + 5e-5) Hz).
    # by path, not `from conftest`: inside the test run another folder's conftest may own that name
    LIVE_CASE = Path(__file__).with_name("live_case.py")

    from bench.clockfile import ClockCalibration, save_calibration
    from bench.framelog import read_frame_log

    ppm = 50.0
    save_calibration(ClockCalibration("system", "JACK Audio Connection Kit", ppm, 0.5, "system clock", "test",
                                      SAMPLE_RATE, "2026-12-04T18:00:00"))  # fmt: skip

    env = _env(jack_server.name)
    fed = tmp_path / "f4.wav"
    t = np.arange(8 * SAMPLE_RATE) / SAMPLE_RATE
    sf.write(fed, (0.3 * np.sin(2 * np.pi * 349.2282 * t)).astype(np.float32), SAMPLE_RATE, subtype="FLOAT")
    wav, log = tmp_path / "drone.wav", tmp_path / "run.csv"
    run = subprocess.Popen([sys.executable, "-m", "bench", "run", "--no-ui", "--input", "mic", "--device", "system",
                            "--drone", "A4", "--duration", "6", "--log", str(log)],
                           env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)  # fmt: skip
    procs = [run]
    try:
        _wait_for_input_ports(jack_server.name)  # the feeder connects to the inputs it finds once
        procs.append(subprocess.Popen([sys.executable, str(LIVE_CASE), "feed", str(fed), "0"], env=env,
                                      stdout=subprocess.PIPE, text=True))  # fmt: skip
        capture = subprocess.Popen([sys.executable, str(CAPTURE), str(wav), "4"], env=env, stdout=subprocess.PIPE,
                                   text=True)  # fmt: skip
        procs.append(capture)
        _, err = run.communicate(timeout=90)
        out, _ = capture.communicate(timeout=30)
        done = subprocess.CompletedProcess(run.args, run.returncode, "", err)
    finally:
        for proc in procs:
            if proc.poll() is None:
                proc.kill()
            proc.communicate()
    assert done.returncode == 0, done.stderr
    print(done.stderr)
    assert "drone: A4 440.0000 Hz" in done.stderr and "clock +50.00 ppm" in done.stderr
    dropped = int(done.stderr.strip().splitlines()[-1].split(" frames, ")[1].split()[0])
    assert dropped <= 2  # a loaded machine may cost the server a cycle; the drone must not
    rows = [r for r in read_frame_log(log) if r["note"] == "F4"]
    assert len(rows) > 300
    cents = float(np.median([float(r["cents_raw"]) for r in rows]))  # against F4 = 349.2282 Hz
    assert abs(cents - 1200 * math.log2(1 + ppm * 1e-6)) < 0.01
    assert {r["clock_ppm"] for r in rows} == {"50.000"}
    assert json.loads(out)["frames"] == 4 * SAMPLE_RATE
    x, rate = sf.read(wav, dtype="float32")
    x = x[rate:]  # past the fade-in and any moment the feeder was connected too
    assert abs(1200 * math.log2(_praat_hz(x, rate) / (440.0 / (1 + ppm * 1e-6)))) < 0.01


# -- the tone must not be read as the instrument -------------------------------------------------
# tests/audio/tone_pull.py: a recorder-like F4 (by construction, ``offset`` cents sharp) played
# into bench run's input while its drone, a sine at F4's target (349.2282 Hz, REFERENCES section
# 1), is looped into the same input ``under`` dB (RMS) under it. The pull is the reading with
# the drone minus the reading without.
TONE_UNDER_DB = 20.0
"""The level the README advises: the tone at least this far under the instrument at the mic."""


def test_the_tone_under_the_instrument_pulls_its_readings_less_than_a_fifth_of_a_cent(jack_server, tmp_path):
    import tone_pull

    offset = 10.0  # cents sharp: a note a maker would still be tuning
    alone = tone_pull.measure(jack_server.name, tmp_path, offset, None)
    assert alone["rows"] > 300 and abs(alone["cents"] - offset) < 0.05  # the truth by construction
    advised = tone_pull.measure(jack_server.name, tmp_path, offset, TONE_UNDER_DB)
    loud = tone_pull.measure(jack_server.name, tmp_path, offset, 6.0)
    print(f"alone {alone['cents']:.3f} c; tone {TONE_UNDER_DB:g} dB under: {advised['cents']:.3f} c; "
          f"6 dB under: {loud['cents']:.3f} c")  # fmt: skip
    assert "drone: F4 349.2282 Hz" in advised["stderr"]
    assert advised["rows"] > 300 and loud["rows"] > 300
    assert abs(advised["cents"] - alone["cents"]) < 0.2  # the bound
    # the tone did reach the input: louder, it pulls the reading toward its target (0 c)
    assert loud["cents"] - alone["cents"] < -0.2


def test_a_capture_with_the_tone_sounding_is_taken_with_the_tone_paused(jack_server):
    # the tone 6 dB under the instrument at the input (far louder than advised): the readings are pulled
    # visibly; a capture taken with the capture key pauses it and reads the instrument alone
    # (its offset by construction), and the tone then sounds again
    env = _env(jack_server.name)
    done = subprocess.run([sys.executable, str(Path(__file__).with_name("tone_capture_case.py")), "10"], env=env,
                          capture_output=True, text=True, timeout=120, check=False)  # fmt: skip
    assert done.returncode == 0, done.stderr[-2000:]
    got = json.loads(done.stdout.strip().splitlines()[-1])
    print(got)
    assert got["said"] is not None and "paused" in got["said"]
    assert got["capture_cents_raw"] is not None and abs(got["capture_cents_raw"] - 10.0) < 0.05
    assert got["capture_start_s"] > got["key_s"]  # from input after the key, none from before
    assert abs(got["tone_on_median"] - 10.0) > 0.2  # with the tone sounding the readings are pulled
    assert abs(got["tone_back_median"] - 10.0) > 0.2  # and it sounds again after the capture
    assert got["auto_captures"] == 0  # none while it sounded
