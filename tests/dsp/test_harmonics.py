"""Harmonic balance: H1..H8 in dB re the strongest, odd/even energy ratio.

References: tones with known harmonic amplitudes (the level of each partial follows from its
amplitude by definition, 20 log10(a_k / a_max)); a stopped pipe sounds odd harmonics only
(Fletcher & Rossing, *The Physics of Musical Instruments*, 1998, closed-open pipe
f_n = (2n - 1) c / 4L), so its odd/even ratio is large.
"""

from __future__ import annotations

import numpy as np
import pytest

from dsp.analyser import StreamingAnalyser
from dsp.harmonics import FLOOR_DB, balance_row

SR = 48000


def _tone(f0_hz: float, amps: list[float], seconds: float = 0.5, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    t = np.arange(int(SR * seconds)) / SR
    x = sum(a * np.sin(2 * np.pi * k * f0_hz * t + rng.uniform(0, 2 * np.pi)) for k, a in enumerate(amps, 1))
    return np.asarray(x, dtype=np.float64)


def _steady(frames):
    voiced = [f for f in frames if f.f0_hz is not None]
    return voiced[len(voiced) // 4 :]


@pytest.mark.parametrize("f0_hz", [196.0, 440.0, 987.77])
def test_known_harmonic_amplitudes(f0_hz):
    amps = [0.2, 0.1, 0.05, 0.08, 0.02, 0.01, 0.005, 0.004]
    expected = 20.0 * np.log10(np.array(amps) / max(amps))  # definition of the dB ratio
    frames = _steady(StreamingAnalyser(SR).process(_tone(f0_hz, amps)))
    assert frames
    for f in frames:
        np.testing.assert_allclose(f.harmonics_db, expected, atol=0.05)
        odd = sum(a * a for a in amps[0::2])
        even = sum(a * a for a in amps[1::2])
        assert f.odd_even_db == pytest.approx(10 * np.log10(odd / even), abs=0.05)


def test_stopped_pipe_odd_only_spectrum_has_large_odd_even_ratio():
    # Fletcher & Rossing 1998: a stopped pipe has odd harmonics only
    amps = [0.3, 0.0, 0.1, 0.0, 0.05, 0.0, 0.02, 0.0]
    frames = _steady(StreamingAnalyser(SR).process(_tone(300.0, amps)))
    assert frames
    for f in frames:
        assert f.f0_hz == pytest.approx(300.0, rel=1e-6)  # not read as 600 Hz or 150 Hz
        assert f.odd_even_db > 40.0
        assert f.harmonics_db[1] < -60.0


def test_open_pipe_octave_spectrum_is_even_heavy_against_the_fingered_note():
    # all harmonics present in an open pipe's first register (Fletcher & Rossing 1998)
    amps = [0.3, 0.2, 0.1, 0.06, 0.04, 0.02, 0.01, 0.005]
    frames = _steady(StreamingAnalyser(SR).process(_tone(262.0, amps)))
    assert all(0.0 < f.odd_even_db < 15.0 for f in frames)


def test_levels_helpers_on_plain_arrays():
    amp = np.array([0.5, 1.0, 0.0, 0.25, 0, 0, 0, 0])
    db = np.empty(8)
    odd_even = balance_row(amp, db)
    assert db[1] == 0.0
    assert db[0] == pytest.approx(-6.0206, abs=1e-4)
    assert db[2] == FLOOR_DB
    assert odd_even == pytest.approx(10 * np.log10(0.25 / (1.0 + 0.0625)), abs=1e-9)
