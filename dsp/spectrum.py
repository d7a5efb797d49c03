"""Hann-window spectra of one frame, with frequency reassignment (compiled, per frame).

One real FFT per frame (rectangular window) gives everything: the Hann-window spectrum
is a three-tap combination of neighbouring bins, and so is the spectrum under the
window's time derivative, which frequency reassignment needs (Auger & Flandrin,
"Improving the readability of time-frequency and time-scale representations by the
reassignment method", IEEE Trans. Signal Processing 43(5):1068-1089, 1995).

The functions take one frame's rectangular-window DFT bins ``rect`` (complex, not
normalised) and are compiled with numba: a frame's result never depends on how many
frames are analysed together.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit
from numpy.typing import NDArray

__all__ = ["band_floor", "hann2_reassigned_bin", "hann2_taps", "hann_gain", "hann_power", "hann_power_at", "hann_reassigned_bin", "newest_half_power_at", "newest_half_taps"]

_NOISE_SCALE = 1.0 / -math.log(0.8)  # mean of exponential noise over its 20th percentile


@njit(cache=True, nogil=True)
def hann_power_at(rect: NDArray[np.complex64], k: int, n: int) -> float:
    """Hann-window power ``|X_h|^2`` of bin ``k`` of an ``n``-point DFT (0 at bin 0).

    Amplitude-normalised: a sine of amplitude ``a`` at a bin centre reads ``a^2``. The Hann
    bin is ``0.5 R[k] - 0.25 (R[k-1] + R[k+1])``, normalised by ``4 / n``.
    """
    if k <= 0:
        return 0.0
    a = 2.0 / n
    b = 1.0 / n
    lo = rect[k - 1]
    hi = rect[k + 1]
    mid = rect[k]
    re: float = a * mid.real - b * (lo.real + hi.real)
    im: float = a * mid.imag - b * (lo.imag + hi.imag)
    return re * re + im * im


@njit(cache=True, nogil=True)
def hann_power(rect: NDArray[np.complex64], n: int, keep: int, out: NDArray[np.float64]) -> None:
    """:func:`hann_power_at` of bins ``0 .. keep - 1`` into ``out`` (``rect`` holds ``keep + 1`` bins or more)."""
    for k in range(keep):
        out[k] = hann_power_at(rect, k, n)


@njit(cache=True, nogil=True)
def band_floor(power: NDArray[np.float64], out: NDArray[np.float64], band_bins: int) -> None:
    """Noise floor per bin from the lower quantile of fixed-width bands, into ``out``.

    The 20th percentile of the Hann power in each band of ``band_bins`` bins, scaled to the
    mean of noise (for Gaussian noise the power of a bin is exponentially distributed, whose
    20th percentile is ``-ln(0.8) = 0.223`` of the mean). A low quantile and not the median:
    a low note's harmonics are only ~5 bins apart and their main lobes fill most bins; the
    valleys between them still show the floor. Bins past the last full band belong to it.
    """
    n_bins = power.size
    band_bins = min(band_bins, n_bins)
    n_bands = max(1, n_bins // band_bins)
    q = int(0.2 * band_bins)
    low = np.empty(q + 1)  # the q + 1 smallest values of a band, ascending
    for band in range(n_bands):
        s = band * band_bins
        # insertion without branches (a noisy band's order is unpredictable): each place keeps
        # its value, takes v, or takes its lower neighbour's, whichever lies between
        if q == 6:  # 32-bin bands, the analyser's: the seven places kept in registers
            l0 = l1 = l2 = l3 = l4 = l5 = l6 = np.inf
            for i in range(s, s + band_bins):
                v = power[i]
                l6 = min(l6, max(l5, v))
                l5 = min(l5, max(l4, v))
                l4 = min(l4, max(l3, v))
                l3 = min(l3, max(l2, v))
                l2 = min(l2, max(l1, v))
                l1 = min(l1, max(l0, v))
                l0 = min(l0, v)
            low[q] = l6
        else:
            for i in range(q + 1):
                low[i] = np.inf
            for i in range(s, s + band_bins):
                v = power[i]
                for j in range(q, 0, -1):
                    low[j] = min(low[j], max(low[j - 1], v))
                low[0] = min(low[0], v)
        level = low[q] * _NOISE_SCALE
        stop = n_bins if band == n_bands - 1 else s + band_bins
        for k in range(s, stop):
            out[k] = level


@njit(cache=True, nogil=True)
def hann_reassigned_bin(rect: NDArray[np.complex64], b: int) -> float:
    """Reassigned (fractional) bin of the energy seen at integer bin ``b`` >= 1 under Hann.

    Hann h(n) = 0.5 - 0.5 cos(2 pi n / N): h'(n) = (pi/N) sin(2 pi n / N), whose DFT is
    (pi/N)(R[k-1] - R[k+1]) / 2i; the reassigned offset -Im(X_dh / X_h) in bins reduces to
    Re((R[k-1] - R[k+1]) / (4 X_h)), clipped to +-2 bins.
    """
    lo = complex(rect[b - 1])
    hi = complex(rect[b + 1])
    xh = 0.5 * complex(rect[b]) - 0.25 * (lo + hi)
    safe = xh if xh != 0.0 else 1.0
    off = ((lo - hi) / (4.0 * safe)).real
    return b + min(max(off, -2.0), 2.0)


@njit(cache=True, nogil=True)
def hann2_taps(a: complex, b: complex, c: complex, d: complex, e: complex) -> tuple[float, complex]:
    """Reassigned offset (bins) and Hann^2 value from rectangular bins k-2..k+2 (``a``..``e``).

    Hann^2 = 3/8 - 1/2 cos + 1/8 cos 2: its derivative (pi/N)(sin - sin 2 / 2) is smooth at
    the frame edges, so the derivative spectrum's side lobes fall as 1/d^4 (the plain Hann
    derivative, a sine window, falls only as 1/d^2 and lets far partials bias the estimate).
    The offset -Im(X_dh / X_h) N / 2 pi reduces to Re(((R-1 - R+1) - (R-2 - R+2)/2) / (4 X_h)).
    """
    xh = (a + e) * (1.0 / 16.0) - (b + d) * 0.25 + c * 0.375
    num = (b - d) - 0.5 * (a - e)
    safe = xh if xh != 0.0 else 1.0
    return min(max((num / (4.0 * safe)).real, -2.0), 2.0), xh


@njit(cache=True, nogil=True)
def hann2_reassigned_bin(rect: NDArray[np.complex64], b: int) -> float:
    """Reassigned (fractional) bin under a Hann^2 window at integer bin ``b`` (>= 3).

    The power-weighted mean over the peak bin and its two neighbours: for a stationary
    partial all three reassign to the same frequency; for a gliding one (vibrato) each bin
    reassigns to the frequency at a different instant, and the mean stays at the window
    centre instead of jumping as the strongest bin changes.
    """
    num = 0.0
    den = 0.0
    for c in range(-1, 2):
        k = b + c
        off, xh = hann2_taps(
            complex(rect[k - 2]), complex(rect[k - 1]), complex(rect[k]), complex(rect[k + 1]), complex(rect[k + 2])
        )
        w = xh.real * xh.real + xh.imag * xh.imag
        num += w * (off + c)
        den += w
    return b + num / max(den, 1e-300)


@njit(cache=True, nogil=True)
def hann_gain(d: float) -> float:
    """Hann amplitude response ``|sinc(d) / (1 - d^2)|`` to a sine ``d`` bins off centre (1 at 0, 0.5 at +-1)."""
    pd = math.pi * d
    den = pd * (1.0 - d * d)
    if abs(den) < 1e-9:
        return 1.0 if abs(d) < 0.5 else 0.5
    return abs(math.sin(pd) / den)


@njit(cache=True, nogil=True)
def hann3_reassigned_bin(rect: NDArray[np.complex64], b: int) -> float:
    """Reassigned (fractional) bin under a Hann^3 window at integer bin ``b`` (>= 5).

    Hann^3 = 5/16 - 15/32 cos + 3/16 cos 2 - 1/32 cos 3, a narrower window in time than
    Hann^2; its spectrum and its derivative window's spectrum are seven-tap combinations of
    the rectangular bins, and the offset is Re(D / (2 X_w)) with
    D = a1 (R-1 - R+1) - 2 a2 (R-2 - R+2) + 3 a3 (R-3 - R+3). Power-weighted mean over the
    peak bin and its two neighbours, as :func:`hann2_reassigned_bin`.
    """
    a0, a1, a2, a3 = 0.3125, 0.46875, 0.1875, 0.03125
    num = 0.0
    den = 0.0
    for c in range(-1, 2):
        k = b + c
        m1 = complex(rect[k - 1])
        p1 = complex(rect[k + 1])
        m2 = complex(rect[k - 2])
        p2 = complex(rect[k + 2])
        m3 = complex(rect[k - 3])
        p3 = complex(rect[k + 3])
        xw = a0 * complex(rect[k]) - 0.5 * a1 * (m1 + p1) + 0.5 * a2 * (m2 + p2) - 0.5 * a3 * (m3 + p3)
        d = a1 * (m1 - p1) - 2.0 * a2 * (m2 - p2) + 3.0 * a3 * (m3 - p3)
        safe = xw if xw != 0.0 else 1.0
        off = min(max((d / (2.0 * safe)).real, -2.0), 2.0)
        w = xw.real * xw.real + xw.imag * xw.imag
        num += w * (off + c)
        den += w
    return b + num / max(den, 1e-300)


NEWEST_HALF_REACH = 23
"""Odd offsets |m| <= this in :func:`newest_half_taps`: the taps left out weigh <= -72 dB of the
strongest bin (measured here on synthetic flute tones 131-1175 Hz, jumps included)."""


def newest_half_taps(n: int, reach: int = NEWEST_HALF_REACH) -> tuple[NDArray[np.int64], NDArray[np.complex128]]:
    """Offsets and weights that give the newest half window's Hann spectrum from the whole window's DFT.

    The Hann window over samples ``n/2 .. n-1`` of an ``n``-sample frame (zero before) has
    the DFT ``G``; by the convolution theorem its windowed spectrum at half-window bin ``j``
    is ``(1/n) sum_m G[m] R[2j - m]``, ``R`` the frame's rectangular DFT. ``G`` is zero at
    every even ``m`` but 0 and +-2, and falls as ``1/m^3`` at odd ``m``: the sum is kept to
    those and to odd ``|m| <= reach``. Weights are normalised as :func:`hann_power_at` of the
    half window's own ``n/2``-point DFT (a sine of amplitude ``a`` reads ``a^2``).
    """
    half = n // 2
    g = np.zeros(n)
    g[half:] = 0.5 - 0.5 * np.cos(2.0 * np.pi * np.arange(half) / half)
    big_g = np.fft.fft(g)
    offsets = np.array([0, 2, -2, *[m for m in range(-reach, reach + 1) if m % 2]], dtype=np.int64)
    return offsets, big_g[offsets % n] * (4.0 / half) / n


@njit(cache=True, nogil=True)
def newest_half_power_at(
    rect: NDArray[np.complex64], j: int, n: int, offsets: NDArray[np.int64], weights: NDArray[np.complex128]
) -> float:
    """Hann power of bin ``j`` of the newest half window, from the whole window's DFT (0 at ``j <= 0``).

    ``rect``: the ``n``-point rectangular DFT of a real frame, bins ``0 .. n/2``; bins past
    either end are read by its symmetry. ``offsets``, ``weights``: :func:`newest_half_taps`.
    """
    if j <= 0:
        return 0.0
    last = n // 2
    re = 0.0
    im = 0.0
    for t in range(offsets.size):
        i = 2 * j - offsets[t]
        if i < 0:
            v = np.conj(rect[-i])
        elif i > last:
            v = np.conj(rect[n - i])
        else:
            v = rect[i]
        w = weights[t]
        re += w.real * v.real - w.imag * v.imag
        im += w.real * v.imag + w.imag * v.real
    return re * re + im * im
