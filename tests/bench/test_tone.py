"""The reference tone's generator and its target, without a device (the device path:
tests/audio/test_tone_jack.py).

Outside references: target pitches from /work/shared/REFERENCES.md section 1 (A4 = 440 Hz,
ISO 16:1975; F4 = 349.2282 Hz at A4 = 440 and 329.3857 Hz at A4 = 415, exact and pytuning);
Praat's pitch (praat-parselmouth) for the frequency the generator writes; numpy's FFT for the
reed-like tone's harmonic levels.
"""

from __future__ import annotations

import argparse
import math

import numpy as np
import pytest

from bench.cli import main
from bench.commands.tone import tone_hz
from bench.sources.tone_out import REED_HARMONICS, ToneGenerator

SR = 48000


def _tuning(**kw) -> argparse.Namespace:
    base = {"a4": None, "temperament": None, "tonic": None, "temp": None, "ref_temp": None, "rh": None, "flats": None}
    base.update(kw)
    return argparse.Namespace(**base)


@pytest.mark.parametrize(("note", "a4", "expected_hz"), [("F4", None, 349.2282), ("F4", "415", 329.3857), ("A4", None, 440.0)])
def test_tone_is_the_notes_target(note, a4, expected_hz):
    freq_hz, text = tone_hz(note, _tuning(a4=a4))
    assert freq_hz == pytest.approx(expected_hz, abs=5e-5)
    assert text.startswith(f"{note} ")


def test_in_warm_air_the_tone_is_where_an_instrument_in_tune_sounds():
    # an instrument in tune at 20 degC sounds higher in 26 degC air (bench.tuning's own doctest
    # value, 17.5 cents, from the speed of sound; REFERENCES section 3)
    freq_hz, text = tone_hz("A4", _tuning(temp="26", ref_temp="20"))
    assert 1200 * math.log2(freq_hz / 440.0) == pytest.approx(17.5, abs=0.05)
    assert "26 °C air" in text


def test_generator_blocks_join_without_a_seam():
    one = ToneGenerator(SR, 441.7, -12.0, "reed")
    many = ToneGenerator(SR, 441.7, -12.0, "reed")
    whole = one.render(SR)
    pieces = np.concatenate([many.render(n) for n in (1, 511, 512, 3000, SR - 4024)])
    np.testing.assert_allclose(pieces, whole, atol=2e-6)


@pytest.mark.parametrize("timbre", ["sine", "reed"])
def test_generator_frequency_read_by_praat(timbre):
    import parselmouth

    g = ToneGenerator(SR, 523.2511, -6.0, timbre)
    x = np.concatenate([g.render(480) for _ in range(300)])[2000:]
    pitch = parselmouth.Sound(x.astype(np.float64), sampling_frequency=SR).to_pitch_ac(
        time_step=0.01, pitch_floor=200, pitch_ceiling=1000, very_accurate=True
    )
    f0 = pitch.selected_array["frequency"]
    assert abs(1200 * math.log2(float(np.mean(f0[f0 > 0])) / 523.2511)) < 0.01
    assert float(np.max(np.abs(x))) == pytest.approx(10 ** (-6 / 20), rel=0.01)  # the level asked for


def test_reed_tone_has_its_harmonics_at_their_levels():
    g = ToneGenerator(SR, 375.0, -6.0, "reed")  # 375 Hz: whole periods in 1 s, so no leakage
    g.render(SR)  # past the fade-in
    spectrum = np.abs(np.fft.rfft(g.render(SR)))
    levels = spectrum[[375 * k for k in range(1, 6)]]
    np.testing.assert_allclose(levels / levels[0], REED_HARMONICS, rtol=1e-6)


def test_fade_out_ends_in_silence():
    g = ToneGenerator(SR, 440.0)
    g.render(2000)
    g.fade_out()
    tail = np.concatenate([g.render(512) for _ in range(3)])
    assert g.silent and tail[-1] == 0.0 and np.max(np.abs(np.diff(tail))) < 0.01  # no click


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["tone", "A4", "--level-db", "3"], "--level-db '3' is out of range"),
        (["tone", "H9"], "H9"),
        (["tone", "A4", "--clock-ppm", "x"], "--clock-ppm 'x' is not a number"),
        (["tone", "A4", "--seconds", "0"], "--seconds '0' is out of range"),
    ],
)
def test_bad_tone_options_are_one_line(argv, message, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0]


def test_drone_follows_the_locked_note_and_the_settings():
    # the drone (the session's reference tone with a note of its own) sounds the locked note,
    # its own note when none, under the settings in force: F4 = 349.2282 Hz at A4 = 440,
    # 329.3857 Hz at A4 = 415 (REFERENCES section 1); the output's clock error is taken out
    import dataclasses
    import types

    from bench.reftone import ReferenceTone
    from bench.tuning import TuningSettings

    generator = ToneGenerator(SR, 440.0)
    player = types.SimpleNamespace(generator=generator, start=lambda: None, stop=lambda timeout_s=1.0: None)
    s440 = TuningSettings()
    drone = ReferenceTone(s440, report=lambda text, severity: None,
                          opener=lambda hz, level, timbre: (player, "test output", 100.0), background=False)  # fmt: skip
    drone.start(69)
    assert drone.state.freq_hz == pytest.approx(440.0)
    drone.follow(s440, 65)  # the player locks F4
    assert drone.state.freq_hz == pytest.approx(349.2282, abs=5e-5)
    assert generator.freq_hz == pytest.approx(349.2282 / (1 + 1e-4), abs=5e-5)  # clock taken out
    drone.follow(dataclasses.replace(s440, a4_hz=415.0), 65)
    assert drone.state.freq_hz == pytest.approx(329.3857, abs=5e-5)
    drone.follow(dataclasses.replace(s440, a4_hz=415.0), None)
    assert drone.state.freq_hz == pytest.approx(415.0)
