"""Hann-window spectra of frame batches, with frequency reassignment.

One real FFT per frame (rectangular window) gives everything: the Hann-window spectrum
is a three-tap combination of neighbouring bins, and so is the spectrum under the
window's time derivative, which frequency reassignment needs (Auger & Flandrin,
"Improving the readability of time-frequency and time-scale representations by the
reassignment method", IEEE Trans. Signal Processing 43(5):1068-1089, 1995).

All functions work on batches: arrays of shape (n_frames, ...).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.fft  # type: ignore[import-untyped]
from numpy.typing import NDArray

__all__ = ["BatchSpectrum", "analyse_spectrum", "hann_kernel_gain", "band_floor"]

_FloatArray = NDArray[np.float64]
_IntArray = NDArray[np.intp]
_OFFS3 = np.arange(-1, 2)


@dataclass(frozen=True, slots=True)
class BatchSpectrum:
    """Spectra of a batch of frames, up to a highest bin.

    Attributes
    ----------
    rect : ndarray of complex64, shape (n_frames, n_bins + 1)
        Rectangular-window DFT bins ``0 .. n_bins`` (not normalised).
    power : ndarray of float32, shape (n_frames, n_bins)
        Hann-window power spectrum ``|X_h|^2`` of bins ``0 .. n_bins - 1``,
        amplitude-normalised: a sine of amplitude ``a`` at a bin centre reads ``a^2``
        (bin 0 is set to 0).
    bin_hz : float, Hz
        Bin spacing ``sample_rate / frame_size``.
    frame_size : int, samples
    """

    rect: NDArray[np.complex64]
    power: NDArray[np.float32]
    bin_hz: float
    frame_size: int

    def reassigned_bins(self, bins: _IntArray) -> _FloatArray:
        """Reassigned (fractional) bin position of the energy seen at integer ``bins`` >= 1."""
        rows = _rows(self.rect, bins)
        v = self.rect[rows[..., None], bins[..., None] + _OFFS3].astype(np.complex128)
        lo, mid, hi = v[..., 0], v[..., 1], v[..., 2]
        xh = 0.5 * mid - 0.25 * (lo + hi)
        # Hann h(n) = 0.5 - 0.5 cos(2 pi n / N): h'(n) = (pi/N) sin(2 pi n / N), whose DFT is
        # (pi/N)(R[k-1] - R[k+1]) / 2i; the reassigned offset -Im(X_dh / X_h) in bins reduces
        # to Re((R[k-1] - R[k+1]) / (4 X_h)).
        safe = np.where(xh != 0.0, xh, 1.0)
        offset = ((lo - hi) / (4.0 * safe)).real
        out: _FloatArray = bins + np.minimum(np.maximum(offset, -2.0), 2.0)
        return out


def analyse_spectrum(frames: NDArray[np.floating[Any]], sample_rate: float, n_bins: int | None = None) -> BatchSpectrum:
    """Spectra of a batch of frames (one single-precision real FFT per frame).

    Parameters
    ----------
    frames : ndarray of float (float32 is used as is), shape (n_frames, frame_size)
        Consecutive analysis frames (rectangular, not yet windowed).
    sample_rate : float > 0, Hz
    n_bins : int or None
        Bins kept (default all, ``frame_size // 2``).

    Returns
    -------
    BatchSpectrum

    Examples
    --------
    >>> n = 1024
    >>> x = np.cos(2 * np.pi * 100.25 * np.arange(n) / n)[None, :]
    >>> s = analyse_spectrum(x, float(n))
    >>> round(float(s.reassigned_bins(np.array([[100]]))[0, 0]), 4)
    100.25
    >>> round(float(s.power[0, 100]), 3)  # Hann scalloping at 1/4 bin: gain 0.960, power 0.922
    0.922
    """
    n = frames.shape[1]
    keep = n // 2 if n_bins is None else min(int(n_bins), n // 2)
    # single precision: rounding noise ~1e-7 of the peak, far under any microphone's floor
    rect = scipy.fft.rfft(frames.astype(np.float32, copy=False), axis=1, workers=1)[:, : keep + 1]
    # Hann combination 0.5 R[k] - 0.25 (R[k-1] + R[k+1]), normalised by 4/n
    xh = (2.0 / n) * rect[:, 1:keep] - (1.0 / n) * (rect[:, : keep - 1] + rect[:, 2 : keep + 1])
    power = np.empty((rect.shape[0], keep), dtype=np.float32)
    power[:, 0] = 0.0
    re, im = xh.real, xh.imag
    np.add(re * re, im * im, out=power[:, 1:])
    return BatchSpectrum(rect=rect, power=power, bin_hz=sample_rate / n, frame_size=n)


def _rows(padded: NDArray[Any], bins: _IntArray) -> _IntArray:
    """Row index array broadcastable against ``bins``."""
    shape = (padded.shape[0],) + (1,) * (bins.ndim - 1)
    return np.arange(padded.shape[0]).reshape(shape)


def hann_kernel_gain(offset_bins: _FloatArray) -> _FloatArray:
    """Amplitude response of the Hann window to a sine ``offset_bins`` from a bin centre (1 at 0).

    Examples
    --------
    >>> round(float(hann_kernel_gain(np.array(0.5))), 4)
    0.8488
    """
    d = np.asarray(offset_bins, dtype=np.float64)
    denom = 1.0 - d * d
    near = np.abs(denom) < 1e-9
    gain = np.sinc(d) / np.where(near, 1.0, denom)
    return np.asarray(np.where(near, 0.5, np.abs(gain)), dtype=np.float64)


def band_floor(power: NDArray[np.float32], band_bins: int = 32) -> NDArray[np.float32]:
    """Noise floor per bin from the lower quantile of fixed-width bands.

    The 20th percentile of the Hann power in each band of ``band_bins`` bins, scaled to the
    mean of noise (for Gaussian noise the power of a bin is exponentially distributed, whose
    20th percentile is ``-ln(0.8) = 0.223`` of the mean). A low quantile and not the median:
    a low note's harmonics are only ~5 bins apart and their main lobes fill most bins; the
    valleys between them still show the floor.

    Parameters
    ----------
    power : ndarray of float, shape (n_frames, n_bins)
    band_bins : int >= 8

    Returns
    -------
    ndarray of float32, shape (n_frames, n_bins)

    Examples
    --------
    >>> p = np.random.default_rng(0).exponential(2.0, size=(1, 4096)).astype(np.float32)
    >>> bool(1.8 < float(band_floor(p).mean()) < 2.2)
    True
    """
    n_frames, n_bins = power.shape
    n_bands = max(1, n_bins // band_bins)
    used = n_bands * band_bins
    bands = power[:, :used].reshape(n_frames, n_bands, band_bins)
    q = int(0.2 * band_bins)
    level = np.partition(bands, q, axis=2)[:, :, q] * np.float32(1.0 / -np.log(0.8))
    return level[:, _band_index(n_bins, band_bins, n_bands)]


_BAND_INDEX: dict[tuple[int, int, int], _IntArray] = {}


def _band_index(n_bins: int, band_bins: int, n_bands: int) -> _IntArray:
    """Cached band of each bin; bins past the last full band belong to it."""
    key = (n_bins, band_bins, n_bands)
    idx = _BAND_INDEX.get(key)
    if idx is None:
        idx = np.minimum(np.arange(n_bins) // band_bins, n_bands - 1)
        idx.setflags(write=False)
        if len(_BAND_INDEX) < 64:
            _BAND_INDEX[key] = idx
    return idx
