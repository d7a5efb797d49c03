"""The session controller without a screen (no Textual imported): what each key does to the
engine and the workflow, and the one line it answers with.

Pitch standards are checked against ISO 16:1975 (A4 = 440 Hz) and the baroque 415 Hz of
common practice (REFERENCES §1).
"""

from __future__ import annotations

import sys
import threading
from pathlib import Path

import numpy as np
import soundfile as sf

from bench.controller import SessionController
from bench.engine import Engine
from bench.sources.wavfile import WavFileSource
from bench.tuning import TuningSettings
from bench.workflow.captures import captures_path_for, read_captures
from bench.workflow.profiles import get_profile


def _tone_file(path: Path, freq_hz: float = 440.0, seconds: float = 2.0) -> Path:
    t = np.arange(int(48000 * seconds)) / 48000
    sf.write(path, (0.3 * np.sin(2 * np.pi * freq_hz * t)).astype(np.float32), 48000)
    return path


def _controller(tmp_path: Path, engine: Engine) -> SessionController:
    return SessionController(engine, log_dir=tmp_path / "logs", profile=get_profile("alto"))


def test_settings_keys_change_the_engine_and_refusals_are_one_line(tmp_path):
    engine = Engine(WavFileSource(_tone_file(tmp_path / "a.wav"), realtime=False), TuningSettings())
    c = _controller(tmp_path, engine)
    assert c.step_standard(-1) is None and engine.settings.a4_hz < 440.0  # a lower standard
    while engine.settings.a4_hz != 415.0:  # down the list to the baroque pitch (common practice)
        assert c.step_standard(-1) is None
    assert c.type_temperature("temp_c", " 23.5 °C") is None and engine.settings.temp_c == 23.5
    refused = c.type_temperature("ref_temp_c", "warm")
    assert refused is not None and refused.severity == "error" and "warm" in refused.text
    assert engine.settings.ref_temp_c == 20.0  # unchanged
    assert c.type_a4("1000").severity == "error" and engine.settings.a4_hz == 415.0
    assert c.toggle_flats() is None and engine.settings.flats


def test_the_controller_module_needs_no_textual():
    import subprocess

    code = "import bench.controller, sys; print('textual' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"


def test_lock_keys_name_the_note_and_a_bad_name_changes_nothing(tmp_path):
    engine = Engine(WavFileSource(_tone_file(tmp_path / "a.wav"), realtime=False), TuningSettings())
    c = _controller(tmp_path, engine)
    said = c.type_lock("Bb4")
    assert said is not None and "A#4" in said.text and engine.locked_midi == 70  # MIDI 70, spelt with sharps
    bad = c.type_lock("H7")
    assert bad is not None and bad.severity == "error" and engine.locked_midi == 70
    assert c.lock(None) is not None and engine.locked_midi is None


def test_settings_changed_from_two_threads_at_once_are_all_kept(tmp_path):
    # the screen changes A4 while a temperature sensor changes the air: neither overwrites the other
    engine = Engine(WavFileSource(_tone_file(tmp_path / "a.wav"), realtime=False), TuningSettings())
    a4s = [430.0 + 0.01 * k for k in range(400)]
    temps = [10.0 + 0.01 * k for k in range(400)]

    def screen() -> None:
        for a4 in a4s:
            engine.update_settings(a4_hz=a4)

    def sensor() -> None:
        for t in temps:
            engine.update_settings(temp_c=t)

    threads = [threading.Thread(target=screen), threading.Thread(target=sensor)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert engine.settings.a4_hz == a4s[-1] and engine.settings.temp_c == temps[-1]


def test_log_key_and_capture_key_write_captures_beside_the_log(tmp_path):
    engine = Engine(WavFileSource(_tone_file(tmp_path / "a.wav", seconds=3.0), realtime=True), TuningSettings())
    taken: list[object] = []
    c = SessionController(engine, log_dir=tmp_path / "logs", profile=get_profile("alto"), on_capture=taken.append)
    assert c.toggle_log() is None  # before the start: the log opens with the engine's first frame
    assert c.start_workflow() is None
    engine.start()
    assert engine.join(10.0)
    engine.stop()
    (log,) = [p for p in (tmp_path / "logs").glob("session-*.csv") if not p.name.endswith(".captures.csv")]
    caps = read_captures(captures_path_for(log))
    assert [cap.note for cap in caps] == ["A4"] and abs(caps[0].cents) < 0.5  # a 440 Hz sine, ISO 16
    assert taken and c.close_workflow() is None
