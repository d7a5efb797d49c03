"""The session's reference tone through the controller, without Textual and without a device.

Outside references: target pitches from /work/shared/REFERENCES.md section 1 (A4 = 440 Hz,
ISO 16:1975; F4 = 349.2282 Hz, G4 = 391.9954 Hz in equal temperament at A4 = 440; the baroque
A4 = 415 Hz, common practice); the level steps are the definition of the decibel
(20 log10 of an amplitude ratio). The readings are built by construction (a frame of a known
f0 mapped by bench.reading.make_reading).
"""

from __future__ import annotations

import dataclasses
import types
from pathlib import Path

import numpy as np
import pytest

from bench.controller import SessionController
from bench.errors import DeviceError
from bench.reading import Reading, make_reading
from bench.reftone import CAPTURE_QUIET_S, LEVEL_MAX_DBFS, SWITCH_S, ReferenceTone
from bench.sources.tone_out import DEFAULT_LEVEL_DBFS, ToneGenerator
from bench.tuning import TuningSettings
from bench.workflow.profiles import get_profile
from dsp.frame import Frame

SR = 48000
A4_HZ, F4_HZ, G4_HZ = 440.0, 349.2282, 391.9954  # REFERENCES section 1 (ISO 16:1975, equal temperament)
HOP_S = 0.01


class StubEngine:
    """What the controller asks of an engine; the test feeds readings to the consumers."""

    def __init__(self) -> None:
        self._settings = TuningSettings()
        self.locked_midi: int | None = None
        self.consumers: list[object] = []
        self.running = True
        self.log_path: Path | None = None
        self.clock_ppm: float | None = 12.5
        self.t = 0.0

    @property
    def settings(self) -> TuningSettings:
        return self._settings

    def update_settings(self, **changes: object) -> TuningSettings:
        self._settings = dataclasses.replace(self._settings, **changes)  # type: ignore[arg-type]
        return self._settings

    def lock(self, midi: int | None) -> None:
        self.locked_midi = midi

    def add_consumer(self, consumer: object) -> None:
        self.consumers.append(consumer)

    def remove_consumer(self, consumer: object) -> None:
        self.consumers = [c for c in self.consumers if c is not consumer]

    def play(self, f0_hz: float | None, seconds: float) -> list[Reading]:
        """Readings of ``f0_hz`` (None: silence) every 10 ms for ``seconds``, fed to the consumers."""
        out = []
        for _ in range(round(seconds / HOP_S)):
            self.t += HOP_S
            voiced = f0_hz is not None
            frame = Frame(self.t, self.t, f0_hz, 0.99 if voiced else 0.0, -20.0 if voiced else -80.0, False,
                          (0.0,) * 8 if voiced else None, 3.0 if voiced else None, "steady" if voiced else None,
                          None, f0_hz)  # fmt: skip
            r = make_reading(frame, self._settings, locked_midi=self.locked_midi)
            out.append(r)
            for c in list(self.consumers):
                c.take(r)  # type: ignore[attr-defined]
        return out


class Output:
    """A stand-in output: a real generator, no device."""

    def __init__(self, fail: str | None = None) -> None:
        self.fail = fail
        self.generator: ToneGenerator | None = None
        self.started = self.stopped = 0

    def __call__(self, freq_hz: float, level_dbfs: float, timbre: str):
        if self.fail:
            raise DeviceError(self.fail)
        self.generator = ToneGenerator(SR, freq_hz, level_dbfs, timbre)  # type: ignore[arg-type]
        self.generator.fade_out()
        player = types.SimpleNamespace(generator=self.generator, start=self._start, stop=self._stop)
        return player, "test output", None

    def _start(self) -> None:
        self.started += 1

    def _stop(self, timeout_s: float = 1.0) -> None:
        self.stopped += 1


def _controller(tmp_path: Path, output: Output, told: list) -> tuple[SessionController, StubEngine]:
    engine = StubEngine()
    c = SessionController(engine, log_dir=tmp_path, profile=get_profile("alto"),  # type: ignore[arg-type]
                          on_tone=told.append, tone_opener=output, tone_background=False)  # fmt: skip
    return c, engine


def _sounding(gen: ToneGenerator) -> bool:
    return gen._fade_target == 1.0  # noqa: SLF001 - the fade the next buffer heads for


def test_the_tone_key_sounds_the_locked_note_and_follows_lock_and_standard(tmp_path):
    out, told = Output(), []
    c, engine = _controller(tmp_path, out, told)
    assert c.lock(65) is not None  # F4
    said = c.toggle_tone()
    assert said is not None and "F4 349.23 Hz" in said.text
    assert out.generator is not None and _sounding(out.generator)
    assert out.generator.freq_hz == pytest.approx(F4_HZ, abs=5e-5)
    assert any("tone on: keep it 20 dB under the instrument at the mic; output test output" in n.text for n in told)
    assert c.tone in engine.consumers  # fed the engine's readings
    c.lock(67)  # G4: the tone moves at once, without waiting for a reading
    assert out.generator.freq_hz == pytest.approx(G4_HZ, abs=5e-5)
    c.type_a4("415")  # the baroque standard: G4 a semitone-sized step lower (415/440)
    assert out.generator.freq_hz == pytest.approx(G4_HZ * 415.0 / 440.0, abs=5e-5)
    assert c.tone_state.describe() == f"tone G4 {G4_HZ * 415 / 440:.2f} Hz {DEFAULT_LEVEL_DBFS:.0f} dB"
    off = c.toggle_tone()
    assert off is not None and "OFF" in off.text and out.stopped == 1
    assert c.tone not in engine.consumers and c.tone_state.describe() == ""


def test_without_an_output_the_tone_key_says_so_in_one_line(tmp_path):
    out, told = Output(fail="no audio output device found; connect headphones or a speaker"), []
    c, engine = _controller(tmp_path, out, told)
    assert c.toggle_tone() is None  # the line comes through on_tone
    assert len(told) == 1 and told[0].severity == "error" and "no audio output device" in told[0].text
    assert not c.tone.on and c.tone not in engine.consumers
    assert c.tone_state.describe() == "tone: no output"


def test_nearest_note_held_through_silence_and_blips_and_moved_after_a_quarter_second(tmp_path):
    out, told = Output(), []
    c, engine = _controller(tmp_path, out, told)
    c.toggle_tone()
    assert out.generator is not None and not _sounding(out.generator)  # waits for a note
    assert c.tone_state.describe().startswith("tone waits")
    engine.play(A4_HZ, SWITCH_S - 0.05)
    assert c.tone_state.note is None  # not yet held long enough
    engine.play(A4_HZ, 0.1)
    assert c.tone_state.note == "A4" and _sounding(out.generator)
    assert out.generator.freq_hz == pytest.approx(A4_HZ)
    engine.play(None, 2.0)  # a breath: the tone stays
    assert c.tone_state.note == "A4" and _sounding(out.generator)
    engine.play(G4_HZ, 0.1)  # a blip of another note
    engine.play(A4_HZ, 0.5)
    assert c.tone_state.note == "A4"
    for _ in range(10):  # jitter across the half-way point between two notes (+-50 c)
        engine.play(A4_HZ * 2 ** (49 / 1200), 0.05)
        engine.play(A4_HZ * 2 ** (51 / 1200), 0.05)
    assert c.tone_state.note == "A4"
    engine.play(G4_HZ, SWITCH_S + 0.02)
    assert c.tone_state.note == "G4" and out.generator.freq_hz == pytest.approx(G4_HZ, abs=5e-5)


def test_level_keys_step_three_decibels_and_stop_at_the_loudest(tmp_path):
    out, told = Output(), []
    c, engine = _controller(tmp_path, out, told)
    c.lock(69)
    c.toggle_tone()
    gen = out.generator
    assert gen is not None
    c.step_tone_level(-1)
    assert gen.level_dbfs == DEFAULT_LEVEL_DBFS - 3.0
    gen.fade_in()
    gen.render(2 * SR // 10)  # past the fade
    peak = float(np.max(np.abs(gen.render(SR // 10))))
    assert 20 * np.log10(peak) == pytest.approx(DEFAULT_LEVEL_DBFS - 3.0, abs=0.01)  # dB of the peak amplitude
    for _ in range(20):
        last = c.step_tone_level(1)
    assert gen.level_dbfs == LEVEL_MAX_DBFS and last.severity == "warning"
    said = c.next_tone_timbre()
    assert "reed" in said.text and gen.timbre == "reed" and c.tone_state.timbre == "reed"
    c.next_tone_timbre()
    assert gen.timbre == "sine"


def _capturing_with_tone_on_a4(tmp_path: Path) -> tuple[SessionController, StubEngine, Output]:
    """A controller capturing, locked on A4, with the tone switched on."""
    out: Output = Output()
    c, engine = _controller(tmp_path, out, [])
    c.start_workflow()
    c.lock(69)
    c.toggle_tone()
    return c, engine, out


def test_a_capture_with_the_tone_on_is_taken_from_input_after_the_tone_paused(tmp_path):
    c, engine, out = _capturing_with_tone_on_a4(tmp_path)
    assert c.workflow is not None
    gen = out.generator
    assert gen is not None
    assert c.workflow.auto and c.workflow.auto_held  # automatic capture waits while it sounds
    engine.play(A4_HZ, 1.0)
    assert c.workflow.captures() == []
    key_t = engine.t
    said = c.capture()
    assert said is not None and "paused" in said.text
    assert not _sounding(gen) and c.tone_state.paused
    engine.play(A4_HZ, CAPTURE_QUIET_S + 0.5 + 0.05)
    caps = c.workflow.captures()
    assert len(caps) == 1
    assert caps[0].start_s >= key_t + CAPTURE_QUIET_S  # nothing from before the quiet began
    assert caps[0].clock_ppm == 12.5  # the engine's clock correction, on the capture
    assert _sounding(gen) and not c.tone_state.paused  # and the tone is back
    c.toggle_tone()
    assert not c.workflow.auto_held


def test_reference_tone_closes_with_the_engine():
    out = Output()
    tone = ReferenceTone(TuningSettings(), report=lambda text, severity: None, opener=out, background=False)
    tone.start(69)
    tone.close()  # the engine stopped and closed its consumers
    assert out.stopped == 1 and not tone.on


def test_a_note_held_while_the_tone_sounded_is_not_captured_when_it_stops(tmp_path):
    # the note's readings from before the tone stopped hold the tone: only what follows counts
    # (0.2 s here, under the 0.3 s a capture needs), and the next note is captured as usual
    c, engine, out = _capturing_with_tone_on_a4(tmp_path)
    assert c.workflow is not None
    engine.play(A4_HZ, 1.0)
    c.toggle_tone()  # off while the note goes on
    engine.play(A4_HZ, 0.2)
    engine.play(None, 0.5)
    assert c.workflow.captures() == []
    engine.play(A4_HZ, 1.0)
    engine.play(None, 0.5)
    caps = c.workflow.captures()
    assert len(caps) == 1 and caps[0].source == "auto" and caps[0].cents_raw == pytest.approx(0.0, abs=1e-6)
