"""The engine thread: log rows, settings in force, stop, failing sources, dropped input.

The pitch values come from a plain zero-crossing stand-in analyser (tests/bench/engine_fakes.py),
so these tests check the engine's plumbing; what a row says is checked against the
tuning's published values (A4 = 440 Hz, ISO 16:1975; 415 Hz baroque pitch, common practice).
"""

from __future__ import annotations

import math
import threading
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from bench.engine import Engine, EngineEvent, ReadingCallback
from bench.errors import LogError
from bench.framelog import read_frame_log
from bench.sources.base import ManualClock, frame_blocks
from bench.sources.demo import DemoSource
from bench.sources.wavfile import WavFileSource
from bench.tuning import TuningSettings

from engine_fakes import FakeAnalyser, JumpingAnalyser, ScriptedSource, sine

RATE = 48000


def _wav(tmp_path: Path, freq_hz: float = 440.0, duration_s: float = 1.0) -> Path:
    path = tmp_path / "tone.wav"
    sf.write(path, sine(freq_hz, duration_s, RATE), RATE, subtype="FLOAT")
    return path


def _run_to_end(engine: Engine, timeout_s: float = 20.0) -> None:
    engine.start()
    assert engine.join(timeout_s), "engine did not finish its input"
    engine.stop()


def test_log_has_one_row_per_frame_with_the_settings_in_force(tmp_path):
    events: list[EngineEvent] = []
    source = WavFileSource(_wav(tmp_path), block_size=512, realtime=True, clock=ManualClock())
    log = tmp_path / "session.csv"
    engine = Engine(source, TuningSettings(), log_path=log, on_event=events.append, analyser_factory=FakeAnalyser)
    _run_to_end(engine)
    rows = read_frame_log(log)
    stats = engine.stats
    assert stats.frames == len(rows) == 48000 // 256
    assert stats.log_rows == len(rows)
    assert stats.state == "ended"
    assert [e.kind for e in events] == ["log_started", "source_ended"]
    times = [float(r["time_s"]) for r in rows]
    assert all(b > a for a, b in zip(times, times[1:]))
    # 440 Hz is A4 at the ISO 16 pitch standard; the row's target is exactly 440 Hz.
    assert {r["note"] for r in rows} == {"A4"}
    assert {r["target_hz"] for r in rows} == {"440.0000"}
    assert {r["a4_hz"] for r in rows} == {"440.00"}
    assert {r["temperament"] for r in rows} == {"equal"}
    assert not engine.running


def test_settings_change_mid_stream_shows_in_the_following_rows(tmp_path):
    source = WavFileSource(_wav(tmp_path), block_size=512, realtime=False)
    log = tmp_path / "session.csv"
    baroque = TuningSettings(a4_hz=415.0)
    changed_at: list[float] = []

    def on_reading(reading):  # engine thread, like a UI change landing between frames
        if not changed_at and reading.stream_time_s >= 0.5:
            changed_at.append(reading.stream_time_s)
            engine.update_settings(a4_hz=415.0)

    engine = Engine(source, TuningSettings(), log_path=log, consumers=[ReadingCallback(on_reading)], analyser_factory=FakeAnalyser)
    _run_to_end(engine)
    rows = read_frame_log(log)
    before = [r for r in rows if float(r["time_s"]) <= changed_at[0] + 1e-9]
    after = [r for r in rows if float(r["time_s"]) > changed_at[0] + 1e-9]
    assert before and after and len(before) + len(after) == len(rows)
    assert {r["a4_hz"] for r in before} == {"440.00"}
    assert {r["a4_hz"] for r in after} == {"415.00"}
    # At A4 = 415 Hz a 440 Hz tone is nearest A#4, whose target is 415 * 2**(1/12) = 439.6813 Hz
    # (equal temperament definition; 415 is 101.27 c below 440, REFERENCES section 1).
    assert {r["note"] for r in after} == {"A#4"}
    assert {r["target_hz"] for r in after} == {f"{415 * 2 ** (1 / 12):.4f}"}
    assert engine.settings == baroque


def test_stop_joins_the_thread_and_closes_the_log(tmp_path):
    log = tmp_path / "session.csv"
    source = DemoSource(RATE, realtime=False)  # loops forever
    engine = Engine(source, TuningSettings(), log_path=log, analyser_factory=FakeAnalyser)
    seen = threading.Event()
    engine.add_consumer(ReadingCallback(lambda r: seen.set() if r.stream_time_s > 1.0 else None))
    engine.start()
    assert seen.wait(30)
    engine.stop(timeout_s=5.0)
    assert not engine.running
    assert engine.stats.state == "stopped"
    assert engine.log_path is None
    rows = read_frame_log(log)
    assert len(rows) == engine.stats.frames > 0
    engine.stop()  # idempotent
    with pytest.raises(RuntimeError, match="stopped"):
        engine.start()


def test_a_source_raising_mid_stream_keeps_the_log_valid(tmp_path):
    blocks = frame_blocks(sine(440.0, 1.0, RATE), 512)
    source = ScriptedSource(blocks, script={10: "raise", 20: "lose", 30: "raise"})
    events: list[EngineEvent] = []
    log = tmp_path / "session.csv"
    engine = Engine(
        source,
        TuningSettings(),
        log_path=log,
        on_event=events.append,
        analyser_factory=FakeAnalyser,
        clock=ManualClock(),  # back-off waits cost no time
    )
    _run_to_end(engine)
    kinds = [e.kind for e in events]
    assert kinds == ["log_started", "source_error", "device_lost", "device_back", "source_error", "source_ended"]
    assert source.starts == 2  # reopened once after the loss
    assert engine.stats.source_errors == 3
    rows = read_frame_log(log)
    assert len(rows) == engine.stats.frames == sum(len(b) for b in blocks) // 256
    assert all(r["note"] == "A4" for r in rows)


def test_dropped_blocks_reach_the_readings():
    blocks = frame_blocks(sine(440.0, 0.5, RATE), 512)
    source = ScriptedSource(blocks, script={5: "drop", 6: "drop", 30: "drop"})
    drops: list[tuple[float, int]] = []
    engine = Engine(
        source, TuningSettings(), analyser_factory=FakeAnalyser, consumers=[ReadingCallback(lambda r: drops.append((r.stream_time_s, r.dropped_blocks)))]
    )
    _run_to_end(engine)
    assert engine.latest().dropped_blocks == 3
    assert engine.stats.dropped_blocks == 3
    counts = [d for _, d in drops]
    assert counts == sorted(counts) and counts[0] == 0 and set(counts) == {0, 1, 2, 3}


def test_log_rate_limits_rows(tmp_path):
    source = WavFileSource(_wav(tmp_path, duration_s=2.0), realtime=False)
    log = tmp_path / "slow.csv"
    engine = Engine(source, TuningSettings(), log_path=log, log_rows_per_s=10, analyser_factory=FakeAnalyser)
    _run_to_end(engine)
    rows = read_frame_log(log)
    assert 19 <= len(rows) <= 21
    gaps = np.diff([float(r["time_s"]) for r in rows])
    assert np.all(gaps >= 0.1 - 256 / RATE) and np.all(gaps <= 0.1 + 256 / RATE)
    assert engine.stats.frames > 300


def test_unwritable_log_folder_gives_one_event_and_measuring_goes_on(tmp_path):
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("x")
    events: list[EngineEvent] = []
    source = WavFileSource(_wav(tmp_path), realtime=False)
    engine = Engine(
        source, TuningSettings(), log_path=blocker / "session.csv", on_event=events.append, analyser_factory=FakeAnalyser
    )
    _run_to_end(engine)
    assert [e.kind for e in events] == ["log_error", "source_ended"]
    assert engine.stats.frames == 48000 // 256
    assert engine.latest().log_path is None


def test_log_failing_mid_session_keeps_earlier_rows(tmp_path, monkeypatch):
    from bench import framelog

    real_write = framelog.CsvFrameLog.write_row

    def failing(self, row):
        if self.rows_written >= 50:
            raise LogError(f"writing the log {self.path} failed: No space left on device")
        real_write(self, row)

    monkeypatch.setattr(framelog.CsvFrameLog, "write_row", failing)
    events: list[EngineEvent] = []
    log = tmp_path / "session.csv"
    engine = Engine(
        WavFileSource(_wav(tmp_path), realtime=False), TuningSettings(), log_path=log,
        on_event=events.append, analyser_factory=FakeAnalyser,
    )  # fmt: skip
    _run_to_end(engine)
    assert [e.kind for e in events] == ["log_started", "log_error", "source_ended"]
    assert "No space left" in events[1].message
    assert len(read_frame_log(log)) == 50
    assert engine.stats.frames == 48000 // 256
    assert engine.latest().log_path is None


def test_start_and_stop_log_while_running(tmp_path):
    source = DemoSource(RATE, realtime=False)
    engine = Engine(source, TuningSettings(), analyser_factory=FakeAnalyser)
    got = threading.Event()
    engine.add_consumer(ReadingCallback(lambda r: got.set() if r.log_path else None))
    engine.start()
    try:
        path = engine.start_log(tmp_path / "logs")
        assert engine.log_path == path and path.parent == tmp_path / "logs"
        assert got.wait(10)
        engine.stop_log()
        assert engine.log_path is None
        rows = read_frame_log(path)
        assert len(rows) > 0
        with pytest.raises(LogError, match="cannot write"):
            (tmp_path / "file").write_text("x")
            engine.start_log(tmp_path / "file" / "sub")
    finally:
        engine.stop()


def test_lock_maps_onto_the_locked_note_and_locks_the_analyser(tmp_path):
    analysers: list[FakeAnalyser] = []

    def factory(rate):
        analysers.append(FakeAnalyser(rate))
        return analysers[-1]

    # 466.1638 Hz is A#4 (ET, A4 = 440); locked to A4 it reads about +100 cents.
    source = WavFileSource(_wav(tmp_path, freq_hz=440 * 2 ** (1 / 12)), realtime=False)
    log = tmp_path / "locked.csv"
    engine = Engine(source, TuningSettings(), log_path=log, analyser_factory=factory)
    engine.lock(69)
    assert engine.locked_midi == 69
    _run_to_end(engine)
    assert analysers[-1].locked_hz == [pytest.approx(440.0)]  # told once, in the engine thread
    rows = read_frame_log(log)
    assert {r["note"] for r in rows} == {"A4"}
    assert {r["locked_note"] for r in rows} == {"A4"}
    assert engine.latest().locked_midi == 69
    cents = np.median([float(r["cents_raw"]) for r in rows])
    assert cents == pytest.approx(100.0, abs=10.0)  # zero-crossing stand-in: a few cents coarse
    with pytest.raises(ValueError, match="out of range"):
        engine.lock(200)


def test_register_jump_is_one_event_and_history_covers_the_window():
    events: list[EngineEvent] = []
    blocks = frame_blocks(sine(349.2282, 1.0, RATE), 512)  # F4 at A4 = 440 (REFERENCES sec. 1)
    engine = Engine(
        ScriptedSource(blocks), TuningSettings(), on_event=events.append,
        analyser_factory=lambda rate: JumpingAnalyser(rate, 0.3, 0.6),
    )  # fmt: skip
    _run_to_end(engine)
    jumps = [e for e in events if e.kind == "jump"]
    assert len(jumps) == 1
    assert jumps[0].message == "F4 overblown: sounding F5"
    assert jumps[0].time_s == pytest.approx(0.3, abs=256 / RATE)
    recent = engine.history(0.25)
    assert recent[-1] is engine.latest()
    span = recent[-1].stream_time_s - recent[0].stream_time_s
    assert 0.25 - 256 / RATE <= span <= 0.25
    assert len(engine.history(10.0)) == engine.stats.frames


def test_engine_rejects_bad_arguments():
    with pytest.raises(TypeError, match="TuningSettings"):
        Engine(ScriptedSource([]), {"a4_hz": 440})  # type: ignore[arg-type]
    with pytest.raises(LogError, match="above 0"):
        Engine(ScriptedSource([]), TuningSettings(), log_rows_per_s=0)


def test_latency_and_cpu_are_measured():
    blocks = frame_blocks(sine(440.0, 0.5, RATE), 512)
    engine = Engine(ScriptedSource(blocks), TuningSettings(), analyser_factory=FakeAnalyser)
    _run_to_end(engine)
    stats = engine.stats
    assert stats.latency_s is not None and math.isfinite(stats.latency_s)
    assert stats.cpu_s > 0
    assert stats.blocks == len(blocks)


def test_stop_keeps_the_log_when_the_source_hangs(tmp_path):
    release = threading.Event()

    class HangingSource(ScriptedSource):
        def read(self, timeout_s):
            if self._i == 20:
                release.wait()  # a driver call that never returns
            return super().read(timeout_s)

    log = tmp_path / "session.csv"
    engine = Engine(HangingSource(frame_blocks(sine(440.0, 1.0, RATE), 512)), TuningSettings(),
                    log_path=log, analyser_factory=FakeAnalyser)  # fmt: skip
    engine.start()
    try:
        deadline = 100
        while engine.stats.blocks < 20 and deadline:
            threading.Event().wait(0.05)
            deadline -= 1
        engine.stop(timeout_s=0.2)
        assert engine.running  # still stuck in the driver...
        assert engine.log_path is None  # ...but the log is closed with every row measured
        assert len(read_frame_log(log)) == engine.stats.frames == 20 * 512 // 256
    finally:
        release.set()


def test_a_lock_the_analyser_refuses_is_released_with_an_event():
    class PickyAnalyser(FakeAnalyser):
        def lock(self, target_hz):
            if target_hz is not None and target_hz < 50:
                raise ValueError(f"target_hz {target_hz} Hz is outside 50-2000 Hz; lock a playable note")
            super().lock(target_hz)

    events: list[EngineEvent] = []
    engine = Engine(ScriptedSource(frame_blocks(sine(440.0, 0.2, RATE), 512)), TuningSettings(),
                    on_event=events.append, analyser_factory=PickyAnalyser)  # fmt: skip
    engine.lock(12)  # C0, 16.35 Hz
    _run_to_end(engine)
    assert engine.locked_midi is None
    assert [e.kind for e in events] == ["source_error", "source_ended"]
    assert events[0].message.startswith("cannot lock to C0: target_hz")
    assert engine.latest().mapping.note == "A4"


def test_a_rate_the_analyser_refuses_is_one_line():
    from bench.errors import SettingsError

    def refusing(rate):
        raise ValueError(f"sample_rate {rate} Hz is below 16000 Hz; resample to 16-96 kHz")

    source = ScriptedSource([], sample_rate=8000)
    engine = Engine(source, TuningSettings(), analyser_factory=refusing)
    with pytest.raises(SettingsError, match=r"^cannot analyse scripted test source: sample_rate 8000 Hz is below"):
        engine.start()
    assert not engine.running


def test_jump_events_name_the_note_the_pipe_went_to():
    # The register monitor often finds a jump while the frame's pitch still reads the
    # fingered note; the event waits (60 ms at most) to name where it went. The fixture's
    # truth: G4 overblown to 783.99 Hz and C5 vented to 1046.50 Hz, G5 and C6 in equal
    # temperament at A4 = 440 Hz (MIDI 79 and 84, REFERENCES section 1).
    audio = Path(__file__).resolve().parents[2] / "test_audio" / "phrase_wren_48k_24bit.wav"
    events: list[EngineEvent] = []
    engine = Engine(WavFileSource(audio, block_size=512, realtime=False), TuningSettings(), on_event=events.append)
    _run_to_end(engine)
    jumps = [e for e in events if e.kind == "jump"]
    assert [e.message for e in jumps] == ["G4 overblown: sounding G5", "C5 vented: sounding C6"]
    assert [round(e.time_s, 1) for e in jumps] == [0.9, 2.8]  # the onsets, not when named
