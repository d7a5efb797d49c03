"""Level and clipping against the definition of RMS (a sine of peak A has RMS A/sqrt(2), so a
full-scale sine reads 20 log10(1/sqrt(2)) = -3.0103 dBFS)."""

from __future__ import annotations

import numpy as np
import pytest

from dsp.analyser import StreamingAnalyser

FULL_SCALE_SINE_DBFS = 20.0 * np.log10(1.0 / np.sqrt(2.0))  # definition of RMS: -3.0103


@pytest.mark.parametrize("amp", [1.0, 0.1, 0.01])
def test_analyser_frame_level_of_sines(amp):
    expected_db = FULL_SCALE_SINE_DBFS + 20.0 * np.log10(amp)  # -3.0103, -23.0103, -43.0103
    sr = 48000
    an = StreamingAnalyser(sr)
    # 1 kHz: a whole number of cycles in any 4096-sample window is not needed for RMS to
    # within 0.01 dB (the partial-cycle error is below 1/(2 pi cycles) of a cycle's energy)
    x = amp * np.sin(2.0 * np.pi * 1000.0 * np.arange(sr // 2) / sr)
    frames = an.process(x)
    levels = np.array([f.level_dbfs for f in frames])
    np.testing.assert_allclose(levels, expected_db, atol=0.01)


def test_digital_silence_is_minus_infinity_and_unvoiced():
    an = StreamingAnalyser(48000)
    frames = an.process(np.zeros(8000, dtype=np.float32))
    assert frames and all(f.level_dbfs == -np.inf for f in frames)
    assert all(f.f0_hz is None and not f.clipped for f in frames)


@pytest.mark.parametrize(("peak", "clips"), [(-0.999, True), (-0.998, False)])
def test_clipping_flag_follows_the_threshold_of_0_999(peak, clips):
    # one sample at `peak` in quiet noise: every frame whose window holds it says so
    an = StreamingAnalyser(48000)
    x = 0.01 * np.random.default_rng(3).standard_normal(12000)
    x[6000] = peak
    frames = an.process(x)
    holding = [f for f in frames if f.ready_s * 48000 - an.frame_size <= 6000 < f.ready_s * 48000]
    others = [f for f in frames if f not in holding]
    assert holding and others
    assert all(f.clipped == clips for f in holding)
    assert not any(f.clipped for f in others)


def test_clipped_sine_is_flagged_and_a_cool_one_is_not():
    sr = 48000
    t = np.arange(sr // 4) / sr
    an = StreamingAnalyser(sr)
    hot = an.process(np.clip(1.2 * np.sin(2 * np.pi * 440.0 * t), -1.0, 1.0))
    an.reset()
    cool = an.process(0.5 * np.sin(2 * np.pi * 440.0 * t))
    assert all(f.clipped for f in hot)
    assert not any(f.clipped for f in cool)
