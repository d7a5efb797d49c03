"""The newest half window's Hann spectrum read out of the whole window's DFT (dsp.spectrum).

Outside reference: numpy.fft.rfft of the newest half of the frame under scipy.signal's
periodic Hann window, scaled so that a sine of amplitude a at a bin centre reads a^2.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.fft
import scipy.signal

from dsp.spectrum import newest_half_power_at, newest_half_taps
from dsp.synth import NoteEvent, render

N = 4096


def _reference(frame: np.ndarray) -> np.ndarray:
    half = frame[N // 2 :].astype(np.float64)
    w = scipy.signal.get_window("hann", half.size)  # periodic Hann (fftbins=True)
    return np.abs(4.0 / half.size * np.fft.rfft(w * half)) ** 2


def _ours(frame: np.ndarray, bins: range, reach: int | None = None) -> np.ndarray:
    rect = scipy.fft.rfft(frame.astype(np.float32))
    offsets, weights = newest_half_taps(N) if reach is None else newest_half_taps(N, reach)
    return np.array([newest_half_power_at(rect, j, N, offsets, weights) for j in bins])


@pytest.mark.parametrize(
    "kind", ["octave jump", "low note", "high note", "white noise", "tone then silence"]
)
def test_matches_the_half_windows_own_fft(kind):
    rng = np.random.default_rng(4)
    if kind == "octave jump":  # the older half holds the fingered note, the newest its octave
        x = render([NoteEvent(440.0, 1.0, jump_at_s=0.5, jump_kind="vented")], 48000, seed=2).audio[22000 : 22000 + N]
    elif kind == "low note":
        x = render([NoteEvent(130.81, 0.5)], 48000, seed=3).audio[8000 : 8000 + N]
    elif kind == "high note":
        x = render([NoteEvent(2093.0, 0.5)], 48000, seed=3).audio[8000 : 8000 + N]
    elif kind == "white noise":
        x = 0.1 * rng.standard_normal(N)
    else:  # all the energy in the older half: the newest half reads (almost) nothing
        x = np.zeros(N)
        x[: N // 2] = 0.5 * np.sin(2 * np.pi * 440.0 * np.arange(N // 2) / 48000)
    bins = range(0, 900)
    ref = _reference(np.asarray(x))
    ref[0] = 0.0  # bin 0 reads 0 by definition
    ours = _ours(np.asarray(x), bins)
    # amplitudes within -66 dB of the frame's peak amplitude (the taps left out weigh -72 dB on
    # the tones above, measured; single-precision FFT input adds ~-130 dB)
    strongest = np.abs(x).max()  # what a sine of the frame's peak amplitude would read
    err = np.abs(np.sqrt(ours) - np.sqrt(ref[: len(bins)]))
    assert err.max() <= 10 ** (-66 / 20) * strongest
    if kind == "octave jump":
        # and where the note is, they agree to 0.05 dB
        top = ref[: len(bins)] > 1e-4 * ref.max()
        np.testing.assert_allclose(10 * np.log10(ours[top]), 10 * np.log10(ref[: len(bins)][top]), atol=0.05)


def test_fewer_taps_fail_the_bound():
    # the check can fail: with odd offsets only to +-7 the error reaches past -66 dB
    x = render([NoteEvent(440.0, 1.0, jump_at_s=0.5, jump_kind="vented")], 48000, seed=2).audio[22000 : 22000 + N]
    bins = range(0, 900)
    err = np.abs(np.sqrt(_ours(x, bins, reach=7)) - np.sqrt(_reference(x)[: len(bins)]))
    assert err.max() > 10 ** (-66 / 20) * np.abs(x).max()


@pytest.mark.parametrize("band_bins", [32, 20, 50])
def test_band_floor_is_the_20th_percentile_of_each_band(band_bins):
    # outside reference: numpy.partition (the order statistic int(0.2 band) of each band), scaled
    # by 1 / -ln(0.8), the mean of exponentially distributed noise over its 20th percentile
    from dsp.spectrum import band_floor

    rng = np.random.default_rng(band_bins)
    power = rng.exponential(size=858) * np.repeat(rng.uniform(0.1, 10.0, size=858 // 10 + 1), 10)[:858]
    out = np.empty_like(power)
    band_floor(power, out, band_bins)
    q = int(0.2 * band_bins)
    n_bands = power.size // band_bins
    for b in range(n_bands):
        stop = power.size if b == n_bands - 1 else (b + 1) * band_bins
        want = np.partition(power[b * band_bins : (b + 1) * band_bins], q)[q] / -np.log(0.8)
        np.testing.assert_allclose(out[b * band_bins : stop], want, rtol=1e-14)  # the right order statistic
