"""The real microphone source (``bench.sources.mic.MicSource``) over a stand-in sounddevice
module: a device that reports input overflows, is pulled out (PortAudio ends the stream and the
device leaves the list) and is plugged back in. The engine says what happened, measures again by
itself when the device is back, and keeps every row it measured.

The stand-in copies what the code relies on from sounddevice 0.5 (``InputStream`` with
``callback(indata, frames, time, status)`` and ``finished_callback``, ``query_devices``,
``query_hostapis``, ``check_input_settings``, ``PortAudioError``, ``default.device``).
"""

from __future__ import annotations

import threading
import time
import types

import numpy as np
import pytest

import bench.sources.mic as mic
from bench.engine import Engine
from bench.framelog import read_frame_log
from bench.tuning import TuningSettings

from faulty_sources import AnalyserRecorder, EventLog, RecordingClock, sine_block

pytestmark = pytest.mark.timeout(60)

BLOCK = 512
RATE = 48000


class FakePortAudioError(Exception):
    pass


class _Status:
    def __init__(self, overflow: bool) -> None:
        self.input_overflow = overflow


class FakeStream:
    """Calls the callback from its own thread with sine blocks, as PortAudio does."""

    def __init__(self, hw: FakeDevice, callback, finished_callback, blocksize: int, channels: int, **_) -> None:  # type: ignore[no-untyped-def]
        self.hw, self.callback, self.finished_callback = hw, callback, finished_callback
        self.blocksize, self.channels = blocksize, channels
        self.latency = 0.01
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def start(self) -> None:
        self._thread.start()

    def _run(self) -> None:
        while not self._stop.is_set():
            with self.hw.lock:
                if not self.hw.plugged:
                    break
                if self.hw.blocks_left_in_session == 0:
                    self.hw.plugged = False  # the device goes away mid-stream
                    break
                self.hw.blocks_left_in_session -= 1
                n = self.hw.sent
                self.hw.sent += 1
            block = sine_block(440.0, n * self.blocksize, self.blocksize)
            indata = np.repeat(block[:, None], self.channels, axis=1)
            self.callback(indata, self.blocksize, None, _Status(n in self.hw.overflow_at))
            time.sleep(0.0005)  # about 20x real time: the engine keeps up, nothing is dropped
        self.finished_callback()

    def abort(self) -> None:
        self._stop.set()
        if self._thread.is_alive() and self._thread is not threading.current_thread():
            self._thread.join(2)

    def close(self) -> None:
        self.abort()


class FakeDevice:
    """One USB microphone that can be pulled and plugged back after some device scans."""

    def __init__(self, sessions: list[int], scans_while_away: int, overflow_at: set[int]) -> None:
        self.lock = threading.Lock()
        self.sessions = list(sessions)  # blocks delivered per plug-in
        self.blocks_left_in_session = self.sessions.pop(0)
        self.scans_while_away = scans_while_away
        self.overflow_at = overflow_at
        self.plugged = True
        self.sent = 0
        self._away_scans = 0

    def module(self) -> types.SimpleNamespace:
        hw = self

        def query_devices():  # noqa: ANN202
            with hw.lock:
                if not hw.plugged:
                    hw._away_scans += 1
                    if hw._away_scans > hw.scans_while_away and hw.sessions:
                        hw.plugged = True
                        hw._away_scans = 0
                        hw.blocks_left_in_session = hw.sessions.pop(0)
                if not hw.plugged:
                    return []
            return [{"index": 0, "name": "Hollin Lane USB mic", "max_input_channels": 1,
                     "default_samplerate": float(RATE), "hostapi": 0}]

        return types.SimpleNamespace(
            PortAudioError=FakePortAudioError,
            query_devices=query_devices,
            query_hostapis=lambda: [{"name": "ALSA"}],
            check_input_settings=lambda **kw: None,
            InputStream=lambda **kw: FakeStream(hw, **kw),
            default=types.SimpleNamespace(device=(0, 0)),
            _terminate=lambda: None,
            _initialize=lambda: None,
        )


def test_a_microphone_pulled_twice_comes_back_and_no_row_is_lost(tmp_path, monkeypatch):
    hw = FakeDevice(sessions=[300, 250, 200], scans_while_away=2, overflow_at={10, 99, 400})
    monkeypatch.setattr(mic, "import_sounddevice", hw.module)
    source = mic.MicSource("USB", sample_rate=RATE, block_size=BLOCK, stall_timeout_s=5.0)
    analysers, events, clock = AnalyserRecorder(), EventLog(), RecordingClock()
    log = tmp_path / "take.csv"
    engine = Engine(source, TuningSettings(), log_path=log, analyser_factory=analysers,
                    on_event=events, clock=clock)
    engine.start()
    deadline = time.monotonic() + 30
    # Three sessions: pulled after the first and second (and back), gone for good after the third.
    while len(events.of("device_lost")) < 3 and time.monotonic() < deadline:
        time.sleep(0.01)
    engine.stop()

    lost, back = events.of("device_lost"), events.of("device_back")
    assert len(lost) == 3 and len(back) == 2, events.kinds()
    kinds = [k for k in events.kinds() if k.startswith("device_")]
    assert kinds == ["device_lost", "device_back", "device_lost", "device_back", "device_lost"]
    assert "stopped delivering" in lost[0].message
    assert "Hollin Lane USB mic" in back[0].message  # says which device is back
    # Back-off: 2 refused scans then the device is there -> waits 0.5, 1.0, 2.0 s, each time.
    assert clock.sleeps[:6] == [0.5, 1.0, 2.0, 0.5, 1.0, 2.0]
    assert source.overflows == 3 and engine.stats.dropped_blocks == 3  # overflow flags counted
    assert source.full_drops == 0
    # Every block the device delivered was measured, and every frame is a row (0 lost).
    assert hw.sent == 750
    frames = analysers.frames
    assert len(frames) == 750 * BLOCK // 256
    rows = read_frame_log(log)
    assert [r["time_s"] for r in rows] == [f"{f.time_s:.6f}" for f in frames]
    assert log.read_bytes().endswith(b"\r\n")


def test_a_microphone_that_never_comes_back_keeps_retrying_until_stopped(tmp_path, monkeypatch):
    hw = FakeDevice(sessions=[100], scans_while_away=10**9, overflow_at=set())
    monkeypatch.setattr(mic, "import_sounddevice", hw.module)
    source = mic.MicSource("USB", sample_rate=RATE, block_size=BLOCK, stall_timeout_s=5.0)
    analysers, events = AnalyserRecorder(), EventLog()
    log = tmp_path / "take.csv"
    engine = Engine(source, TuningSettings(), log_path=log, analyser_factory=analysers, on_event=events)
    engine.start()
    deadline = time.monotonic() + 20
    while not events.of("device_lost") and time.monotonic() < deadline:
        time.sleep(0.01)
    time.sleep(0.7)  # at least one refused retry on the real clock (first wait 0.5 s)
    assert engine.stats.state == "device_lost" and engine.running
    engine.stop()
    assert not engine.running
    assert len(analysers.frames) == 100 * BLOCK // 256
    assert len(read_frame_log(log)) == len(analysers.frames)
