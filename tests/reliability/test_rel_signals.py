"""Signals to a headless logging run, in real subprocesses:

* SIGKILL mid-session: the log parses afterwards and at most the last second of rows is missing
  (the demo is paced at real time, so the input time at the kill is the wall time since the
  run said it was listening);
* Ctrl-C (SIGINT) and SIGTERM: the log is complete and closed (ends on CRLF), the process exits
  with a clear line and status.

The three runs start together (one fixture) so the module costs one demo run of wall time.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import threading
import time
from dataclasses import dataclass, field

import pytest

from bench.framelog import read_frame_log

pytestmark = pytest.mark.timeout(180)

RUN_S_BEFORE_SIGNAL = 4.0
"""Wall seconds of listening before the signal."""


@dataclass
class Child:
    sig: int
    log: object
    proc: subprocess.Popen
    stderr: list[tuple[float, str]] = field(default_factory=list)
    stdout: list[tuple[float, str]] = field(default_factory=list)
    listening_at: float | None = None
    signalled_at: float | None = None
    returncode: int | None = None

    def pump(self, stream, sink) -> None:  # type: ignore[no-untyped-def]
        for line in stream:
            now = time.monotonic()
            sink.append((now, line.rstrip("\n")))
            if sink is self.stderr and line.startswith("listening to") and self.listening_at is None:
                self.listening_at = now


def _start(sig: int, tmp_path) -> Child:  # type: ignore[no-untyped-def]
    log = tmp_path / f"take-{signal.Signals(sig).name}.csv"
    proc = subprocess.Popen(
        [sys.executable, "-W", "ignore", "-m", "bench", "demo", "--no-ui", "--duration", "30", "--log", str(log)],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env={**os.environ, "PYTHONUNBUFFERED": "1"},
        # Ctrl-C as at a terminal: a test run started in the background (nohup, "&") passes
        # SIGINT on ignored, and a child that inherits that rightly ignores it
        preexec_fn=_default_sigint,
    )
    child = Child(sig, log, proc)
    for stream, sink in ((proc.stdout, child.stdout), (proc.stderr, child.stderr)):
        threading.Thread(target=child.pump, args=(stream, sink), daemon=True).start()
    return child


def all_listening(kids) -> bool:  # type: ignore[no-untyped-def]
    # Start the count once every child has rendered its demo loop: a render competing for the
    # two cores would otherwise put a neighbour's engine behind real time.
    return all(c.listening_at is not None or c.proc.poll() is not None for c in kids.values())


def engine_lag_s(child: Child) -> float:
    """How far the engine ran behind real time when it printed its last held-note line, s.

    A held note is printed once its frames have been analysed (its end plus the 50 ms gap
    that closes it), so wall time of the line minus that input time is the engine's backlog.
    """
    lags = [0.0]
    for at, text in child.stdout:
        cells = text.split()
        if len(cells) > 3 and at < (child.signalled_at or float("inf")):
            note_end_s = float(cells[0]) + float(cells[2]) + 0.05
            lags.append((at - child.listening_at) - note_end_s)
    return max(lags[-1], 0.0)


@pytest.fixture(scope="module")
def children(tmp_path_factory):
    tmp_path = tmp_path_factory.mktemp("signals")
    kids = {sig: _start(sig, tmp_path) for sig in (signal.SIGKILL, signal.SIGINT, signal.SIGTERM)}
    try:
        deadline = time.monotonic() + 120
        pending = dict(kids)
        while pending and time.monotonic() < deadline:
            for sig, child in list(pending.items()):
                if child.proc.poll() is not None:
                    pending.pop(sig)  # ended by itself: the test will say why
                elif all_listening(kids) and time.monotonic() - child.listening_at >= RUN_S_BEFORE_SIGNAL:
                    child.signalled_at = time.monotonic()
                    child.proc.send_signal(sig)
                    pending.pop(sig)
            time.sleep(0.01)
        for child in kids.values():
            try:
                child.returncode = child.proc.wait(30)
            except subprocess.TimeoutExpired:
                child.proc.kill()
                child.returncode = child.proc.wait(10)
            time.sleep(0.05)  # let the pump threads take the last lines
        yield kids
    finally:
        for child in kids.values():
            if child.proc.poll() is None:
                child.proc.kill()


def _diagnosis(child: Child) -> str:
    return f"rc={child.returncode}; stderr: " + " | ".join(t for _, t in child.stderr[-6:])


def test_sigkill_loses_at_most_the_last_second_of_rows(children):
    child = children[signal.SIGKILL]
    assert child.signalled_at is not None, _diagnosis(child)
    assert child.returncode == -signal.SIGKILL
    rows = read_frame_log(child.log)  # a torn last line is tolerated
    assert rows, _diagnosis(child)
    last_row_s = float(rows[-1]["time_s"])
    # Input time at the kill: the demo is paced at real time from (just before) "listening".
    input_s = child.signalled_at - child.listening_at
    lag_s = engine_lag_s(child)
    missing_s = input_s - lag_s - last_row_s
    print(f"\nSIGKILL after {input_s:.2f} s of input (engine {lag_s:.2f} s behind): last row at "
          f"{last_row_s:.2f} s, {missing_s:.2f} s of analysed rows missing, {len(rows)} rows")
    assert missing_s <= 1.0
    # Every held-note line printed before the kill was analysed, so its rows must be there.
    notes_end_s = [float(t.split()[0]) + float(t.split()[2]) for _, t in child.stdout if t.strip()]
    if notes_end_s:
        assert last_row_s >= max(notes_end_s) - 1.0
    # Rows are consecutive analysis frames with no hole (hop of the analyser, < 30 ms).
    times = [float(r["time_s"]) for r in rows]
    assert max(b - a for a, b in zip(times, times[1:])) < 0.03


def _assert_complete_log(child: Child) -> None:
    raw = child.log.read_bytes()
    assert raw.endswith(b"\r\n"), "log not closed on a complete row"
    rows = read_frame_log(child.log)
    assert rows
    last_row_s = float(rows[-1]["time_s"])
    input_s = child.signalled_at - child.listening_at
    lag_s = engine_lag_s(child)
    assert input_s - lag_s - last_row_s <= 1.0, (input_s, lag_s, last_row_s)
    # The closing line gives the row count, and that is what the file holds.
    closing = child.stderr[-1][1]
    assert f"({len(rows)} rows)" in closing, closing


def test_ctrl_c_leaves_a_complete_log_and_says_so(children):
    child = children[signal.SIGINT]
    assert child.signalled_at is not None, _diagnosis(child)
    assert child.returncode == 130, _diagnosis(child)
    assert child.stderr[-1][1].startswith("interrupted; the log is complete:"), _diagnosis(child)
    _assert_complete_log(child)


def test_sigterm_leaves_a_complete_log_and_says_so(children):
    child = children[signal.SIGTERM]
    assert child.signalled_at is not None, _diagnosis(child)
    assert child.returncode in (143, 130, 0), _diagnosis(child)
    assert "log" in child.stderr[-1][1], _diagnosis(child)
    _assert_complete_log(child)


def _default_sigint() -> None:
    """In the child before exec: SIGINT back to its default action."""
    signal.signal(signal.SIGINT, signal.SIG_DFL)
