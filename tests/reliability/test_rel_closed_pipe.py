"""Item 2 of the reliability issue: a closed standard output stops the printing, never the
measuring or the log, and no command ends in a traceback.

Reproduction (before): ``bench run --no-ui --input demo --duration 12 --log x.csv | head -2``
ended with a ``BrokenPipeError`` traceback at 3.5 s and the rest of the session was never
logged; ``bench notes | head -1`` and ``bench temperaments | head -1`` ended the same way.

The closed reader is made deterministic: the child's stdout is the write end of a pipe whose
read end is already closed, so its first write fails with EPIPE (POSIX ``write(2)``).
Outside references: POSIX ``write(2)`` (EPIPE when no process has the pipe open for reading);
the shell reports a process ended by signal N as status 128 + N, so 141 for SIGPIPE (13)
(POSIX XCU 2.8.2, "Exit Status for Commands").
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from bench.framelog import read_frame_log

pytestmark = pytest.mark.timeout(120)
ROOT = Path(__file__).resolve().parents[2]
SIGPIPE_STATUS = 128 + 13  # POSIX XCU 2.8.2; SIGPIPE is 13 on Linux (signal(7))


def _run_with_closed_stdout(argv: list[str], timeout_s: float = 60.0) -> subprocess.CompletedProcess[str]:
    read_end, write_end = os.pipe()
    os.close(read_end)  # nobody will ever read: the first write fails with EPIPE
    try:
        return subprocess.run(
            [sys.executable, "-m", "bench", *argv], stdout=write_end, stderr=subprocess.PIPE,
            text=True, cwd=ROOT, timeout=timeout_s, check=False,
        )
    finally:
        os.close(write_end)


@pytest.mark.parametrize("argv", [["notes"], ["temperaments"], ["temperaments", "--describe"]])
def test_printing_commands_stop_quietly_with_the_sigpipe_status(argv):
    done = _run_with_closed_stdout(argv)
    assert "Traceback" not in done.stderr and "BrokenPipeError" not in done.stderr, done.stderr
    assert done.stderr == ""
    assert done.returncode == SIGPIPE_STATUS


def test_headless_run_goes_on_logging_after_its_reader_left(tmp_path):
    log = tmp_path / "x.csv"
    duration_s = 6.0  # the traceback came at 3.5 s
    done = _run_with_closed_stdout(
        ["run", "--no-ui", "--input", "demo", "--duration", f"{duration_s:g}", "--log", str(log)]
    )
    assert "Traceback" not in done.stderr, done.stderr
    assert done.returncode == 0, done.stderr
    rows = read_frame_log(log)
    last_s = max(float(r["time_s"]) for r in rows)
    assert last_s >= duration_s - 0.5, (last_s, done.stderr)  # the whole session is in the log
    assert f"({len(rows)} rows)" in done.stderr  # the summary counts what the file holds


def test_write_line_reports_a_gone_reader_and_silences_the_stream(tmp_path):
    from bench.pipes import write_line

    read_end, write_end = os.pipe()
    os.close(read_end)
    stream = os.fdopen(write_end, "w")
    try:
        assert write_line("first", stream) is False
        assert write_line("second", stream) is True  # now /dev/null: no error, nothing lost
    finally:
        stream.close()


def test_a_batch_analysis_writes_every_frame_log_after_its_reader_left(tmp_path):
    import math

    import numpy as np
    import soundfile as sf

    rate_hz = 48000
    t = np.arange(int(0.5 * rate_hz)) / rate_hz
    for name, freq_hz in (("a.wav", 440.0), ("b.wav", 392.0), ("c.wav", 349.23)):  # A4, G4, F4 (ISO 16 / equal temperament)
        sf.write(str(tmp_path / name), 0.5 * np.sin(2 * math.pi * freq_hz * t), rate_hz, subtype="PCM_16")
    out = tmp_path / "logs"
    done = _run_with_closed_stdout(["analyze", str(tmp_path / "a.wav"), str(tmp_path / "b.wav"),
                                    str(tmp_path / "c.wav"), "--csv-dir", str(out)])
    assert "Traceback" not in done.stderr, done.stderr
    assert done.returncode == 0, done.stderr
    assert all(read_frame_log(out / f"{stem}.csv") for stem in "abc")
