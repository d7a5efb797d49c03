"""How far the reference tone pulls the instrument's readings, measured on a JACK dummy server.

One case: ``bench run --no-ui --input mic --device system`` listens to a recorder-like F4
(harmonics 1-5, a little breath noise) played ``offset_c`` cents above its target by
tests/audio/live_case.py's feeder, at -20 dBFS RMS; with ``under_db`` given, the run also sounds
its drone on F4 (a sine at the target, 349.2282 Hz in equal temperament at A4 = 440 Hz,
REFERENCES section 1) ``under_db`` dB RMS under the instrument, and its output port is
connected to its own input port, so the input hears the sum of the two as a microphone hears
an instrument and a speaker. JACK sums the connections sample by sample; the level difference
at the "microphone" is exactly ``under_db``. The reading is the median ``cents_raw`` of the F4
rows of the frame log from 1 s to the end of the note.

Used by tests/audio/test_tone_jack.py and benchmarks/bench_tone_pull.py (which sweeps it).
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

REPO = Path(__file__).resolve().parents[2]
LIVE_CASE = Path(__file__).with_name("live_case.py")
SAMPLE_RATE = 48000
F4_HZ = 349.2282  # REFERENCES section 1 (ISO 16:1975, equal temperament)
INSTRUMENT_RMS_DBFS = -20.0
HARMONICS = (1.0, 0.5, 0.3, 0.15, 0.08)  # a soft recorder-like spectrum (by construction)
NOISE_DBFS = -60.0  # breath noise, RMS


def instrument_wav(path: Path, offset_c: float, seconds: float) -> Path:
    """The instrument's note: F4 ``offset_c`` cents sharp, harmonics :data:`HARMONICS`, RMS -20 dBFS."""
    import soundfile as sf

    t = np.arange(int(seconds * SAMPLE_RATE)) / SAMPLE_RATE
    f0 = F4_HZ * 2 ** (offset_c / 1200)
    x = sum(a * np.sin(2 * np.pi * k * f0 * t) for k, a in enumerate(HARMONICS, start=1))
    x = np.asarray(x) * 10 ** (INSTRUMENT_RMS_DBFS / 20) / np.sqrt(np.mean(np.asarray(x) ** 2))
    x += np.random.default_rng(7).normal(0.0, 10 ** (NOISE_DBFS / 20), len(t))
    ramp = int(0.05 * SAMPLE_RATE)  # 50 ms attack and release
    x[:ramp] *= np.linspace(0, 1, ramp)
    x[-ramp:] *= np.linspace(1, 0, ramp)
    sf.write(path, x.astype(np.float32), SAMPLE_RATE, subtype="FLOAT")
    return path


def drone_peak_dbfs(under_db: float) -> float:
    """Peak level of the sine drone whose RMS is ``under_db`` under the instrument's (a sine's
    RMS is its peak over sqrt 2: 3.01 dB under)."""
    return INSTRUMENT_RMS_DBFS - under_db + 20 * math.log10(math.sqrt(2))


def _connect_loop(server: str, timeout_s: float = 30.0) -> None:
    """Connect bench's output port to its own input port (waits until both exist)."""
    import jack

    client = jack.Client("bench-loop", servername=server, no_start_server=True)
    try:
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            outs = [p for p in client.get_ports(is_audio=True, is_output=True) if p.name.startswith("PortAudio:")]
            ins = [p for p in client.get_ports(is_audio=True, is_input=True) if p.name.startswith("PortAudio:")]
            if outs and ins:
                client.connect(outs[0], ins[0])
                return
            time.sleep(0.05)
        raise RuntimeError("bench run's output and input ports never appeared")
    finally:
        client.close()


def _wait_for_input(server: str, timeout_s: float = 30.0) -> None:
    import jack

    client = jack.Client("bench-watch", servername=server, no_start_server=True)
    try:
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            if [p for p in client.get_ports(is_audio=True, is_input=True) if p.name.startswith("PortAudio:")]:
                return
            time.sleep(0.05)
        raise RuntimeError("bench run's input port never appeared")
    finally:
        client.close()


def measure(server: str, tmp: Path, offset_c: float, under_db: float | None, seconds: float = 5.0) -> dict:
    """One run; ``under_db`` None: no drone. Returns median cents, rows, stderr and dropped blocks."""
    from bench.framelog import read_frame_log

    env = dict(os.environ)
    env["JACK_DEFAULT_SERVER"] = server
    env["PYTHONPATH"] = os.pathsep.join([str(REPO), env.get("PYTHONPATH", "")])
    tag = f"{offset_c:+g}c-{'none' if under_db is None else f'{under_db:g}dB'}"
    wav = instrument_wav(tmp / f"instrument-{tag}.wav", offset_c, seconds)
    log = tmp / f"run-{tag}.csv"
    argv = [sys.executable, "-m", "bench", "run", "--no-ui", "--input", "mic", "--device", "system",
            "--duration", str(seconds + 1.5), "--log", str(log)]  # fmt: skip
    if under_db is not None:
        argv += ["--drone", "F4", "--drone-level-db", f"{drone_peak_dbfs(under_db):.3f}"]
    run = subprocess.Popen(argv, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=REPO)
    procs = [run]
    try:
        if under_db is not None:
            _connect_loop(server)
        else:
            _wait_for_input(server)
        procs.append(subprocess.Popen([sys.executable, str(LIVE_CASE), "feed", str(wav), "0"], env=env,
                                      stdout=subprocess.PIPE, text=True))  # fmt: skip
        _, err = run.communicate(timeout=120)
    finally:
        for proc in procs:
            if proc.poll() is None:
                proc.kill()
            proc.communicate()
    if run.returncode != 0:
        raise RuntimeError(f"bench run exited with {run.returncode}: {err[-800:]}")
    rows = [r for r in read_frame_log(log) if r["note"] == "F4" and r["cents_raw"] not in ("", None)]
    t0 = min((float(r["time_s"]) for r in rows), default=0.0)
    steady = [float(r["cents_raw"]) for r in rows if t0 + 1.0 <= float(r["time_s"]) <= t0 + seconds - 0.3]
    dropped = int(err.strip().splitlines()[-1].split(" frames, ")[1].split()[0])
    return {
        "cents": float(np.median(steady)) if steady else math.nan,
        "rows": len(steady),
        "dropped": dropped,
        "stderr": err,
    }
