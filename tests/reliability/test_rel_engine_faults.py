"""The engine under injected faults: random read errors, PortAudio-like stream errors, overflow
flags, a device that vanishes and comes back, a full or read-only log folder, a hanging read.

The oracle for "nothing lost" is the engine's own analyser: every frame it produced must be a
row of the log, in order, with the same time (frames in == rows out). Back-off is checked on an
injected clock, so nothing sleeps.
"""

from __future__ import annotations

import errno
import io
import subprocess
import time
from pathlib import Path

import numpy as np
import pytest

import bench.framelog
from bench.engine import MAX_SOURCE_ERRORS, RETRY_DELAYS_S, Engine
from bench.framelog import read_frame_log
from bench.tuning import TuningSettings

from faulty_sources import (
    BLOCK_SIZE,
    SAMPLE_RATE,
    AnalyserRecorder,
    BurstErrorSource,
    EventLog,
    FastSineSource,
    FlakySource,
    HangingSource,
    OverflowSource,
    PortAudioLikeError,
    RecordingClock,
    ScriptedBlocksSource,
    VanishingSource,
    sine_block,
)

pytestmark = pytest.mark.timeout(60)


def _run_to_end(engine: Engine, timeout_s: float = 30.0) -> None:
    engine.start()
    assert engine.join(timeout_s), "engine did not reach the end of its source"
    engine.stop()


def _assert_rows_are_the_frames(log_path, frames) -> None:
    """Every frame the analyser produced is a row, in order, with its time (0 rows lost)."""
    rows = read_frame_log(log_path)
    assert [r["time_s"] for r in rows] == [f"{f.time_s:.6f}" for f in frames]
    raw = log_path.read_bytes()
    assert raw.endswith(b"\r\n"), "log not closed on a complete row"


# -- random read errors --------------------------------------------------------------------


@pytest.mark.parametrize("seed", [1, 2, 3, 4])
@pytest.mark.parametrize(
    "make_error",
    [lambda: RuntimeError("injected read failure"), lambda: PortAudioLikeError("Internal PortAudio error", -9986)],
    ids=["runtime", "portaudio"],
)
def test_random_read_errors_lose_no_rows(tmp_path, seed, make_error):
    source = FlakySource(FastSineSource(n_blocks=1500), p_raise=0.05, seed=seed, make_error=make_error)
    analysers = AnalyserRecorder()
    events = EventLog()
    log = tmp_path / "take.csv"
    engine = Engine(source, TuningSettings(), log_path=log, analyser_factory=analysers, on_event=events)
    _run_to_end(engine)

    assert source.injected > 30  # the faults really happened (about 5 % of ~1580 reads)
    assert len(events.of("source_error")) == source.injected  # each one reported
    assert engine.stats.source_errors == source.injected
    assert engine.stats.state == "ended"  # ... and survived: the whole source was measured
    frames = analysers.frames
    assert len(frames) == 1500 * BLOCK_SIZE // 256
    _assert_rows_are_the_frames(log, frames)


def test_overflow_flags_are_counted_and_reach_readings_and_stats(tmp_path):
    source = OverflowSource(FastSineSource(n_blocks=700), every=7)
    analysers = AnalyserRecorder()
    log = tmp_path / "take.csv"
    engine = Engine(source, TuningSettings(), log_path=log, analyser_factory=analysers)
    _run_to_end(engine)
    assert source.overflows == 100
    assert engine.stats.dropped_blocks == 100
    assert engine.latest().dropped_blocks == 100
    _assert_rows_are_the_frames(log, analysers.frames)


def test_a_burst_of_stream_errors_does_not_end_measuring(tmp_path):
    burst = MAX_SOURCE_ERRORS + 5
    source = BurstErrorSource(FastSineSource(n_blocks=400), after_blocks=100, burst=burst)
    analysers = AnalyserRecorder()
    engine = Engine(source, TuningSettings(), log_path=tmp_path / "t.csv", analyser_factory=analysers,
                    clock=RecordingClock())
    _run_to_end(engine)
    assert source.injected == burst
    assert engine.stats.state == "ended"
    assert len(analysers.frames) == 400 * BLOCK_SIZE // 256


# -- a device that vanishes and comes back ---------------------------------------------------


def test_device_vanishes_twice_and_measuring_resumes_with_backoff(tmp_path):
    inner = FastSineSource(n_blocks=900)
    source = VanishingSource(inner, vanish_after=300, absent_starts=3, times=2)
    analysers = AnalyserRecorder()
    events = EventLog()
    clock = RecordingClock()
    log = tmp_path / "take.csv"
    engine = Engine(source, TuningSettings(), log_path=log, analyser_factory=analysers,
                    on_event=events, clock=clock)
    _run_to_end(engine)

    assert source.vanished == 2 and source.returns == 2 and source.failed_starts == 6
    lost, back = events.of("device_lost"), events.of("device_back")
    assert len(lost) == 2 and len(back) == 2
    assert "stopped delivering" in lost[0].message and "retrying" in lost[0].message
    assert "after 4 attempt(s)" in back[0].message  # 3 refused starts, then the device is back
    kinds = [k for k in events.kinds() if k in ("device_lost", "device_back")]
    assert kinds == ["device_lost", "device_back", "device_lost", "device_back"]
    # Back-off: RETRY_DELAYS_S in order before each attempt (0.5, 1, 2, 4 s), per loss.
    assert clock.sleeps == list(RETRY_DELAYS_S) * 2
    assert engine.stats.state == "ended"
    # Measuring resumed: every block the device delivered became frames and rows.
    assert inner.delivered_blocks == 900
    assert len(analysers.frames) == 900 * BLOCK_SIZE // 256
    _assert_rows_are_the_frames(log, analysers.frames)


def test_backoff_keeps_the_last_delay_while_the_device_stays_away(tmp_path):
    source = VanishingSource(FastSineSource(n_blocks=200), vanish_after=50, absent_starts=9)
    clock = RecordingClock()
    engine = Engine(source, TuningSettings(), analyser_factory=AnalyserRecorder(), clock=clock)
    _run_to_end(engine)
    last = RETRY_DELAYS_S[-1]
    assert clock.sleeps == list(RETRY_DELAYS_S) + [last] * (10 - len(RETRY_DELAYS_S))
    assert source.returns == 1 and engine.stats.state == "ended"


def test_stop_during_backoff_keeps_the_rows_and_ends_the_thread(tmp_path):
    # Real clock: the engine waits on its stop event between attempts; the device never returns.
    inner = FastSineSource(n_blocks=None)
    source = VanishingSource(inner, vanish_after=100, absent_starts=10**9)
    analysers = AnalyserRecorder()
    events = EventLog()
    log = tmp_path / "take.csv"
    engine = Engine(source, TuningSettings(), log_path=log, analyser_factory=analysers, on_event=events)
    engine.start()
    deadline = time.monotonic() + 20
    while not events.of("device_lost") and time.monotonic() < deadline:
        time.sleep(0.01)
    assert engine.stats.state == "device_lost"
    engine.stop()
    assert not engine.running
    assert len(analysers.frames) == 100 * BLOCK_SIZE // 256
    _assert_rows_are_the_frames(log, analysers.frames)


def test_real_analyser_reads_the_pitch_again_after_the_device_returns(tmp_path):
    from dsp.analyser import StreamingAnalyser

    # 440 Hz by construction; after the device returns the analyser still hears 440 Hz.
    inner = FastSineSource(440.0, n_blocks=int(2.0 * SAMPLE_RATE / BLOCK_SIZE)).continuous()
    source = VanishingSource(inner, vanish_after=int(0.8 * SAMPLE_RATE / BLOCK_SIZE), absent_starts=2)
    analysers = AnalyserRecorder(StreamingAnalyser)
    engine = Engine(source, TuningSettings(), analyser_factory=analysers, clock=RecordingClock())
    engine.start()
    assert engine.join(60)
    engine.stop()
    readings = engine.history(0.5)
    voiced = [r.frame.f0_hz for r in readings if r.frame.f0_hz is not None]
    assert len(voiced) > 20
    cents = 1200 * np.log2(np.median(voiced) / 440.0)
    assert abs(cents) < 1.0
    assert source.returns == 1


@pytest.mark.parametrize("bad", ["nan", "inf"])
def test_non_finite_samples_do_not_stop_measuring(bad):
    from dsp.analyser import StreamingAnalyser

    n = int(0.5 * SAMPLE_RATE / BLOCK_SIZE)
    blocks = [sine_block(440.0, i * BLOCK_SIZE, BLOCK_SIZE) for i in range(3 * n)]
    blocks[n][100] = np.nan if bad == "nan" else np.inf
    engine = Engine(ScriptedBlocksSource(blocks), TuningSettings(), analyser_factory=StreamingAnalyser)
    _run_to_end(engine, 60)
    assert engine.stats.state == "ended"
    latest = engine.latest()
    assert latest is not None and latest.stream_time_s > 1.2  # frames after the bad block
    assert latest.frame.f0_hz is not None and abs(1200 * np.log2(latest.frame.f0_hz / 440.0)) < 1.0


# -- log folder unwritable or full ---------------------------------------------------------


@pytest.fixture
def tiny_fs(tmp_path):
    """A 16 KiB tmpfs (root only; skipped elsewhere)."""
    mnt = tmp_path / "tiny"
    mnt.mkdir()
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=16k", "tmpfs", str(mnt)], capture_output=True)
    if r.returncode:
        pytest.skip(f"cannot mount a tmpfs: {r.stderr.decode().strip()}")
    yield mnt
    subprocess.run(["umount", "-l", str(mnt)], check=False)


@pytest.fixture
def read_only_fs(tmp_path):
    """A read-only tmpfs (root ignores file modes, so chmod cannot make one)."""
    mnt = tmp_path / "ro"
    mnt.mkdir()
    r = subprocess.run(["mount", "-t", "tmpfs", "-o", "ro,size=16k", "tmpfs", str(mnt)], capture_output=True)
    if r.returncode:
        pytest.skip(f"cannot mount a tmpfs: {r.stderr.decode().strip()}")
    yield mnt
    subprocess.run(["umount", "-l", str(mnt)], check=False)


def _logging_off_checks(engine, events, analysers) -> None:
    errors = events.of("log_error")
    assert len(errors) == 1, events.kinds()
    assert "\n" not in errors[0].message
    assert engine.stats.log_path is None and engine.log_path is None  # logging reported off
    assert engine.stats.state == "ended"  # measuring went on to the end
    assert len(analysers.frames) == 600 * BLOCK_SIZE // 256


def test_full_disk_turns_logging_off_and_measuring_goes_on(tiny_fs):
    log = tiny_fs / "take.csv"
    analysers, events = AnalyserRecorder(), EventLog()
    engine = Engine(FastSineSource(n_blocks=600), TuningSettings(), log_path=log,
                    analyser_factory=analysers, on_event=events)
    _run_to_end(engine)
    _logging_off_checks(engine, events, analysers)
    assert "No space left" in events.of("log_error")[0].message
    # What reached the disk parses and is exactly the first frames (a torn row is dropped).
    rows = read_frame_log(log)
    assert 0 < len(rows) < len(analysers.frames)
    assert [r["time_s"] for r in rows] == [f"{f.time_s:.6f}" for f in analysers.frames[: len(rows)]]


def test_read_only_log_folder_gives_one_line_and_measuring_goes_on(read_only_fs):
    analysers, events = AnalyserRecorder(), EventLog()
    engine = Engine(FastSineSource(n_blocks=600), TuningSettings(), log_path=read_only_fs / "take.csv",
                    analyser_factory=analysers, on_event=events)
    _run_to_end(engine)
    _logging_off_checks(engine, events, analysers)
    assert "Read-only file system" in events.of("log_error")[0].message
    with pytest.raises(bench.errors.LogError, match="Read-only"):
        engine.start_log(read_only_fs)


class _FillingFile(io.StringIO):
    """A text file that takes ``capacity`` characters, then fails with ENOSPC."""

    def __init__(self, capacity: int) -> None:
        super().__init__()
        self.capacity = capacity

    def write(self, s: str) -> int:
        if self.tell() + len(s) > self.capacity:
            raise OSError(errno.ENOSPC, "No space left on device")
        return super().write(s)


def test_enospc_from_the_writer_turns_logging_off(tmp_path, monkeypatch):
    # Portable twin of the tmpfs test: the log's file object fails with ENOSPC.
    files: list[_FillingFile] = []

    def fake_open(path, mode="r", **kw):  # noqa: ANN001
        files.append(_FillingFile(20_000))
        return files[-1]

    monkeypatch.setattr(bench.framelog, "open", fake_open, raising=False)
    analysers, events = AnalyserRecorder(), EventLog()
    engine = Engine(FastSineSource(n_blocks=600), TuningSettings(), log_path=tmp_path / "t.csv",
                    analyser_factory=analysers, on_event=events)
    _run_to_end(engine)
    _logging_off_checks(engine, events, analysers)
    assert engine.stats.log_rows > 0


# -- a read that hangs ---------------------------------------------------------------------


def _start_until_hanging(source, log, analysers):  # type: ignore[no-untyped-def]
    engine = Engine(source, TuningSettings(), log_path=log, analyser_factory=analysers)
    engine.start()
    assert source.hanging.wait(20)
    return engine


def test_stop_ends_a_read_that_returns_when_the_source_is_stopped(tmp_path):
    source = HangingSource(FastSineSource(), after_blocks=100, wakes_on_stop=True)
    analysers = AnalyserRecorder()
    engine = _start_until_hanging(source, tmp_path / "t.csv", analysers)
    try:
        engine.stop(timeout_s=1.0)
        thread = engine._thread  # noqa: SLF001 - liveness of the engine's own thread
        thread.join(5.0)  # generous bound; stop() alone should be enough
        assert not thread.is_alive()
    finally:
        source.release()


def test_stop_returns_within_its_timeout_when_a_read_never_returns(tmp_path):
    source = HangingSource(FastSineSource(), after_blocks=100, wakes_on_stop=False)
    engine = _start_until_hanging(source, tmp_path / "t.csv", AnalyserRecorder())
    try:
        t0 = time.monotonic()
        engine.stop(timeout_s=1.0)
        assert time.monotonic() - t0 < 5.0  # generous: stop() waits 1 s at most for the thread
        assert engine.stats.state == "stopped"
    finally:
        source.release()
    assert engine.join(5.0)


def test_rows_measured_before_a_hang_are_on_disk_after_stop(tmp_path, monkeypatch):
    import bench.engine

    class SlowFlushLog(bench.framelog.CsvFrameLog):
        """Flushes only on close or when idle, so the rows are surely still buffered at the hang
        (the real 0.5 s interval makes the outcome depend on machine load)."""

        def __init__(self, path, **kw):  # type: ignore[no-untyped-def]
            super().__init__(path, **{**kw, "flush_interval_s": 3600.0})

    monkeypatch.setattr(bench.engine, "CsvFrameLog", SlowFlushLog)
    source = HangingSource(FastSineSource(), after_blocks=100, wakes_on_stop=False)
    analysers = AnalyserRecorder()
    log = tmp_path / "t.csv"
    engine = _start_until_hanging(source, log, analysers)
    try:
        engine.stop(timeout_s=1.0)
        rows_on_disk = read_frame_log(log)  # read while the thread is still stuck
        assert len(rows_on_disk) == len(analysers.frames) == 200
    finally:
        source.release()
        engine.join(5.0)


# -- the same through the command line ---------------------------------------------------------

STEADY = Path(__file__).resolve().parents[2] / "test_audio" / "steady_a4_48k.wav"


def test_cli_run_with_a_full_disk_says_so_once_and_measures_to_the_end(tiny_fs, capsys):
    from bench.cli import main

    log = tiny_fs / "take.csv"
    # Exit status 4: the log asked for could not be written (README-reliability-draft).
    assert main(["run", "--no-ui", "--input", str(STEADY), "--log", str(log)]) == 4
    err = capsys.readouterr().err.splitlines()
    log_errors = [line for line in err if line.startswith("log error:")]
    assert len(log_errors) == 1 and "logging is off, measuring goes on" in log_errors[0], err
    assert "source ended" in " ".join(err)  # measured to the end of the file
    rows = read_frame_log(log)  # what reached the disk parses
    frames = int(err[-1].split()[0])
    assert frames > len(rows) > 0  # measuring went on after logging stopped
    assert f"({len(rows)} rows; stopped by a write error)" in err[-1]  # the rows the file holds


def test_cli_run_with_a_read_only_log_folder_does_not_claim_a_log(read_only_fs, capsys):
    from bench.cli import main

    # Unattended, a log folder that cannot be written is refused before anything starts, with
    # exit status 4 (README-reliability-draft), and no log is claimed.
    assert main(["run", "--no-ui", "--input", str(STEADY), "--log-dir", str(read_only_fs)]) == 4
    err = capsys.readouterr().err.splitlines()
    assert len(err) == 1 and err[0].startswith("error: the log folder") and "not writable" in err[0], err
    assert not any(line.startswith("listening") for line in err)
