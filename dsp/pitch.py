"""Fundamental frequency of batches of frames: spectral peaks, a coarse harmonic match, and a
weighted least-squares refinement over reassigned harmonic frequencies.

Coarse step: the strongest spectral peaks of each frame, their frequencies reassigned
(see :mod:`dsp.spectrum`), propose candidates ``peak / m`` (m = 1..4). A candidate scores
the share of peak energy lying on its harmonics, less a penalty for the share of its
harmonic slots (up to the highest matched one) left empty. The penalty guards against
octave errors both ways: a sub-octave explains the same peaks but leaves its odd slots
empty (downward error; decisive for high notes with only two or three partials), while the
octave above cannot explain the odd harmonics of a note whose fundamental is weaker than
its 2nd harmonic (upward error).

Refinement: each harmonic ``k`` of the coarse candidate gives a frequency ``f_k``,
reassigned under a Hann^2 window (Auger & Flandrin 1995; the Hann^2 derivative window is
smooth at the frame edges, so far partials leak into it as 1/d^4 only) and averaged over
the peak bin and its neighbours by power. With independent errors of variance
proportional to ``noise / A_k^2``, the maximum-likelihood fundamental of
``f_k = k f0 + e_k`` is the weighted least-squares solution
``f0 = sum(w_k k f_k) / sum(w_k k^2)``, ``w_k = A_k^2 / noise_k`` (the harmonic weighting
of e.g. Christensen & Jakobsson, *Multi-Pitch Estimation*, Morgan & Claypool 2009, ch. 2,
from memory). For low notes (harmonics closer than 12 bins) the leakage of the two
neighbours on each side and of the negative-frequency images is first subtracted with the
exact Dirichlet kernel (two passes), which removes the interference bias that limits them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from dsp.spectrum import BatchSpectrum

__all__ = ["PeakSet", "CoarsePitch", "RefinedPitch", "find_peaks", "estimate_coarse_f0", "refine_f0"]

_FloatArray = NDArray[np.float64]
_IntArray = NDArray[np.intp]
_BoolArray = NDArray[np.bool_]

_DIVISORS = np.array([1.0, 2.0, 3.0, 4.0])
_MAX_MATCH_HARMONIC = 24
_MATCH_TOLERANCE = 0.015  # share of the candidate f0 a peak may sit off its harmonic (26 cents at H1)
_EMPTY_PENALTY = 0.35
_CLEAN_BELOW_BINS = 12.0  # harmonic spacing (bins) under which leakage is modelled


@dataclass(frozen=True, slots=True)
class PeakSet:
    """The strongest spectral peaks of each frame.

    Attributes
    ----------
    freq_hz : ndarray of float, shape (n_frames, n_peaks), Hz
        Reassigned peak frequencies (0 where ``valid`` is False).
    power : ndarray of float, shape (n_frames, n_peaks)
        Hann power at the peak bin (0 where not valid).
    valid : ndarray of bool, shape (n_frames, n_peaks)
    """

    freq_hz: _FloatArray
    power: _FloatArray
    valid: _BoolArray


@dataclass(frozen=True, slots=True)
class CoarsePitch:
    """Coarse fundamental per frame.

    Attributes
    ----------
    f0_hz : ndarray of float, shape (n_frames,), Hz
        nan where no candidate was found.
    explained : ndarray of float, shape (n_frames,), 0..1
        Share of peak energy on the candidate's harmonics.
    """

    f0_hz: _FloatArray
    explained: _FloatArray


@dataclass(frozen=True, slots=True)
class RefinedPitch:
    """Refined fundamental and its harmonic partials, per frame.

    Attributes
    ----------
    f0_hz : ndarray of float, shape (n_frames,), Hz
        nan where the refinement had no usable harmonic.
    harmonic_hz : ndarray of float, shape (n_frames, n_harmonics), Hz
        Reassigned frequency of harmonic k = 1..n_harmonics (nan where unused).
    harmonic_amp : ndarray of float, shape (n_frames, n_harmonics)
        Amplitude of each harmonic (peak amplitude, scalloping removed).
    harmonic_bin : ndarray of int, shape (n_frames, n_harmonics)
        Peak bin of each harmonic.
    used : ndarray of bool, shape (n_frames, n_harmonics)
        Harmonics that entered the fit.
    best_snr_db : ndarray of float, shape (n_frames,), dB
        SNR of the strongest fitted harmonic against the local floor (-inf if none).
    """

    f0_hz: _FloatArray
    harmonic_hz: _FloatArray
    harmonic_amp: _FloatArray
    harmonic_bin: _IntArray
    used: _BoolArray
    best_snr_db: _FloatArray


def find_peaks(
    spec: BatchSpectrum,
    floor: _FloatArray,
    lo_bin: int,
    hi_bin: int,
    *,
    n_peaks: int = 12,
    snr_db: float = 12.0,
    range_db: float = 50.0,
) -> PeakSet:
    """Strongest local maxima of each frame's Hann power spectrum.

    Parameters
    ----------
    spec : BatchSpectrum
    floor : ndarray of float, shape (n_frames, n_bins)
        Noise floor per bin (see :func:`dsp.spectrum.band_floor`).
    lo_bin, hi_bin : int
        Search bins ``lo_bin <= k < hi_bin`` (``lo_bin >= 1``).
    n_peaks : int >= 1
        Peaks kept per frame.
    snr_db : float, dB
        A peak must stand this far above the floor.
    range_db : float, dB
        ... and no further than this below the frame's strongest peak.

    Returns
    -------
    PeakSet
    """
    p = spec.power
    mid = p[:, lo_bin:hi_bin]
    left = p[:, lo_bin - 1 : hi_bin - 1]
    right = p[:, lo_bin + 1 : hi_bin + 1]
    top = mid.max(axis=1, keepdims=True)
    ok = (mid > left) & (mid >= right)
    ok &= mid > floor[:, lo_bin:hi_bin] * 10.0 ** (snr_db / 10.0)
    ok &= mid >= top * 10.0 ** (-range_db / 10.0)
    score = np.where(ok, mid, np.float32(0.0))
    k = min(n_peaks, score.shape[1])
    idx = (-score).argpartition(k - 1, axis=1)[:, :k]
    pk_pow = score[_row_index(score.shape[0], 2), idx]
    valid = pk_pow > 0.0
    freq = spec.reassigned_bins(idx + lo_bin) * spec.bin_hz
    return PeakSet(
        freq_hz=np.where(valid, freq, 0.0),
        power=pk_pow,
        valid=valid,
    )


def estimate_coarse_f0(peaks: PeakSet, fmin_hz: float, fmax_hz: float) -> CoarsePitch:
    """Coarse fundamental from the peak set by harmonic matching.

    Parameters
    ----------
    peaks : PeakSet
    fmin_hz, fmax_hz : float, Hz
        Candidate range.

    Returns
    -------
    CoarsePitch

    Examples
    --------
    >>> f = np.array([[440.0, 880.0, 1320.0, 0.0]])
    >>> p = np.array([[0.1, 1.0, 0.3, 0.0]])  # fundamental weaker than the 2nd harmonic
    >>> c = estimate_coarse_f0(PeakSet(f, p, p > 0), 60.0, 4500.0)
    >>> float(c.f0_hz[0])
    440.0
    """
    f_pk = peaks.freq_hz
    p_pk = peaks.power
    n_frames, n_pk = f_pk.shape
    cand = (f_pk[:, :, None] / _DIVISORS[None, None, :]).reshape(n_frames, -1)
    cand_ok = np.repeat(peaks.valid, _DIVISORS.size, axis=1) & (cand >= fmin_hz) & (cand <= fmax_hz)
    safe = np.where(cand_ok, cand, 1.0)
    ratio = f_pk[:, None, :] / safe[:, :, None]
    harm = np.rint(ratio)
    match = (
        peaks.valid[:, None, :]
        & (harm >= 1.0)
        & (harm <= _MAX_MATCH_HARMONIC)
        & (np.abs(ratio - harm) <= _MATCH_TOLERANCE)
    )
    total = np.add.reduce(p_pk, 1)[:, None]
    explained = np.add.reduce((p_pk[:, None, :] * match), 2) / np.where(total > 0, total, 1.0)
    n_match = np.add.reduce(match, 2)
    top_h = np.maximum.reduce(np.where(match, harm, 0.0), 2)
    empty = 1.0 - n_match / np.maximum(top_h, 1.0)
    score = np.where(cand_ok, explained - _EMPTY_PENALTY * empty, -np.inf)
    best = score.argmax(1)
    rows = np.arange(n_frames)
    found = np.isfinite(score[rows, best])
    f0 = np.where(found, cand[rows, best], np.nan)
    return CoarsePitch(f0_hz=f0, explained=np.where(found, explained[rows, best], 0.0))


def refine_f0(
    spec: BatchSpectrum,
    floor: _FloatArray,
    coarse_hz: _FloatArray,
    limit_hz: float,
    *,
    n_harmonics: int = 20,
    snr_db: float = 10.0,
) -> RefinedPitch:
    """Refine a fundamental by weighted least squares over reassigned harmonic frequencies.

    Parameters
    ----------
    spec : BatchSpectrum
    floor : ndarray of float, shape (n_frames, n_bins)
    coarse_hz : ndarray of float, shape (n_frames,), Hz
        Starting estimate per frame (nan: skip the frame).
    limit_hz : float, Hz
        Highest harmonic frequency used.
    n_harmonics : int >= 1
    snr_db : float, dB
        Harmonics below this SNR are left out of the fit.

    Returns
    -------
    RefinedPitch
    """
    power = spec.power
    n_frames, n_bins = power.shape
    df = spec.bin_hz
    k, k2 = _harmonic_numbers(n_harmonics)
    f_c = np.where(np.isfinite(coarse_hz), coarse_hz, 0.0)
    expect = f_c[:, None] * k
    inside = (expect <= limit_hz) & (f_c[:, None] > 0.0)
    centre = np.minimum(np.maximum(np.rint(expect / df).astype(np.intp), 5), n_bins - 6)
    rows3 = _row_index(n_frames, 3)
    # peak bin within +-2 bins of the expected harmonic (the Hann main lobe); argmax takes
    # the first of equal maxima
    pick = power[rows3, centre[:, :, None] + _OFFS5].argmax(2)
    peak_bin = centre + (pick - 2)
    p3 = power[rows3, peak_bin[:, :, None] + _OFFS3]
    peak_pow = p3[:, :, 1]
    noise = np.maximum(floor[_row_index(n_frames, 2), peak_bin], 1e-30)
    snr_ok = peak_pow >= noise * 10.0 ** (snr_db / 10.0)
    # a real local maximum, not the slope of a neighbour
    is_max = (peak_pow >= p3[:, :, 0]) & (peak_pow >= p3[:, :, 2])
    tol_hz = np.maximum(0.5 * df, 0.02 * f_c[:, None])
    # a genuine partial reassigns near its harmonic; a neighbour's side lobe reassigns away
    bins_frac = reassign_hann2(spec, peak_bin)
    ok = inside & snr_ok & is_max & (np.abs(bins_frac * df - expect) <= tol_hz)
    # neighbours closer than _CLEAN_BELOW_BINS leak measurably even through Hann^2: only
    # those frames pay for the leakage model
    low = np.flatnonzero((f_c > 0.0) & (f_c < _CLEAN_BELOW_BINS * df))
    if low.size == 0:
        used = ok  # the check in ``ok`` was made on these very frequencies
    else:
        sub = BatchSpectrum(spec.rect[low], power[low], spec.bin_hz, spec.frame_size)
        bins_frac[low] = _clean_reassign(sub, peak_bin[low], ok[low])
        used = ok & (np.abs(bins_frac * df - expect) <= tol_hz)
    f_k = bins_frac * df
    w = np.where(used, peak_pow / noise, np.float32(0.0))
    num = np.add.reduce((w * k * np.where(used, f_k, 0.0)), 1)
    den = np.add.reduce((w * k2), 1)
    f0 = np.where(den > 0.0, num / np.where(den > 0.0, den, 1.0), np.nan)
    amp = np.sqrt(peak_pow) / np.maximum(_hann_gain(bins_frac - peak_bin), 0.5)
    amp = np.where(inside, amp, 0.0)
    return RefinedPitch(
        f0_hz=f0,
        harmonic_hz=np.where(used, f_k, np.nan),
        harmonic_amp=amp,
        harmonic_bin=peak_bin,
        used=used,
        best_snr_db=_best_snr_db(w),
    )


_OFFS3 = np.arange(-1, 2)
_OFFS5 = np.arange(-2, 3)
_OFFS7 = np.arange(-3, 4)
_POS3 = np.arange(-1.0, 2.0)
_ROWS: dict[tuple[int, int], _IntArray] = {}
_HARMONICS: dict[int, tuple[_FloatArray, _FloatArray]] = {}


def _row_index(n_rows: int, ndim: int) -> _IntArray:
    """Cached row index ``arange(n_rows)`` shaped to broadcast over ``ndim`` dimensions."""
    key = (n_rows, ndim)
    r = _ROWS.get(key)
    if r is None:
        r = np.arange(n_rows).reshape((n_rows,) + (1,) * (ndim - 1))
        r.setflags(write=False)
        if len(_ROWS) < 256:
            _ROWS[key] = r
    return r


def _harmonic_numbers(n: int) -> tuple[_FloatArray, _FloatArray]:
    """Cached harmonic numbers 1..n and their squares."""
    h = _HARMONICS.get(n)
    if h is None:
        k = np.arange(1, n + 1, dtype=np.float64)
        k2 = k**2
        k.setflags(write=False)
        k2.setflags(write=False)
        h = _HARMONICS[n] = (k, k2)
    return h


def _hann_gain(d: _FloatArray) -> _FloatArray:
    """Hann amplitude response ``|sinc(d) / (1 - d^2)|`` (1 at d = 0, 0.5 at d = +-1)."""
    pd = np.pi * d
    den = pd * (1.0 - d * d)
    near = np.abs(den) < 1e-9
    gain = np.abs(np.sin(pd) / np.where(near, 1.0, den))
    return np.where(near, np.where(np.abs(d) < 0.5, 1.0, 0.5), gain)


def _best_snr_db(w: _FloatArray) -> _FloatArray:
    """Largest SNR weight per frame in dB."""
    top = np.maximum.reduce(w, 1) if w.shape[1] else np.zeros(w.shape[0])
    with np.errstate(divide="ignore"):
        return np.asarray(10.0 * np.log10(top), dtype=np.float64)


def _dirichlet(delta: NDArray[Any], n: int) -> NDArray[np.complex128]:
    """DFT of an n-sample complex exponential ``delta`` bins from a bin (rectangular window)."""
    d = np.asarray(delta)
    den = np.sin(np.pi * d / n)
    small = np.abs(den) < 1e-12
    mag = np.where(small, float(n), np.sin(np.pi * d) / np.where(small, 1.0, den))
    return np.asarray(mag * np.exp(-1j * np.pi * d * (n - 1) / n))


_H2 = np.array([1.0 / 16.0, -0.25, 3.0 / 8.0, -0.25, 1.0 / 16.0])  # Hann^2 as bin taps


def _hann2_taps(
    a: NDArray[np.complex128],
    b: NDArray[np.complex128],
    c: NDArray[np.complex128],
    d: NDArray[np.complex128],
    e: NDArray[np.complex128],
) -> tuple[_FloatArray, NDArray[np.complex128]]:
    """Reassigned offset (bins) and Hann^2 value from rectangular bins b-2..b+2 (``a``..``e``).

    Hann^2 = 3/8 - 1/2 cos + 1/8 cos 2: its derivative (pi/N)(sin - sin 2 / 2) is smooth at
    the frame edges, so the derivative spectrum's side lobes fall as 1/d^4 (the plain Hann
    derivative, a sine window, falls only as 1/d^2 and lets far partials bias the estimate).
    The offset -Im(X_dh / X_h) N / 2 pi reduces to Re(((R-1 - R+1) - (R-2 - R+2)/2) / (4 X_h)).
    Element-wise sums, not a matrix product: the result of a frame must not depend on how
    many frames share the call (BLAS kernels may differ with the batch shape).
    """
    xh = (a + e) * (1.0 / 16.0) - (b + d) * 0.25 + c * 0.375
    num = (b - d) - 0.5 * (a - e)
    safe = np.where(xh != 0.0, xh, 1.0)
    return np.minimum(np.maximum((num / (4.0 * safe)).real, -2.0), 2.0), xh


def _hann2_offset(v: NDArray[np.complex128]) -> tuple[_FloatArray, NDArray[np.complex128]]:
    """:func:`_hann2_taps` of rectangular bins b-2..b+2 along the last axis."""
    return _hann2_taps(v[..., 0], v[..., 1], v[..., 2], v[..., 3], v[..., 4])


def _read5(spec: BatchSpectrum, peak_bin: _IntArray) -> tuple[_IntArray, NDArray[np.complex128]]:
    """Rectangular bins b-2..b+2 around each peak bin, as complex128."""
    j = peak_bin[:, :, None] + _OFFS5
    return j, spec.rect[_row_index(peak_bin.shape[0], 3), j].astype(np.complex128)


def reassign_hann2(spec: BatchSpectrum, peak_bin: _IntArray) -> _FloatArray:
    """Reassigned (fractional) bins under a Hann^2 window at integer ``peak_bin`` (>= 3).

    The power-weighted mean over the peak bin and its two neighbours: for a stationary
    partial all three reassign to the same frequency; for a gliding one (vibrato) each bin
    reassigns to the frequency at a different instant, and the mean stays at the window
    centre instead of jumping as the strongest bin changes.
    """
    v = spec.rect[_row_index(peak_bin.shape[0], 3), peak_bin[:, :, None] + _OFFS7].astype(np.complex128)
    # bins b-3 .. b+3; the three centres b-1, b, b+1 each read five of them
    off, xh = _hann2_taps(v[..., 0:3], v[..., 1:4], v[..., 2:5], v[..., 3:6], v[..., 4:7])
    w = xh.real * xh.real + xh.imag * xh.imag
    mean = np.add.reduce((w * (off + _POS3)), -1) / np.maximum(np.add.reduce(w, -1), 1e-300)
    out: _FloatArray = peak_bin + mean
    return out


def _clean_reassign(spec: BatchSpectrum, peak_bin: _IntArray, ok: _BoolArray, n_pass: int = 2) -> _FloatArray:
    """Hann^2 reassigned bins of each harmonic after subtracting its neighbours' leakage.

    The first estimate reassigns every harmonic on its own; each harmonic's complex
    amplitude is then read off the Hann^2 spectrum, and the exact leakage (Dirichlet
    kernel) of harmonics k-2..k+2 and of the negative-frequency images of k-1..k+1 is
    removed from the five rectangular bins the reassignment of harmonic k reads. Farther
    partials leak as 1/d^4 and are left. Two passes: the second models the leakage with
    the cleaned frequencies.
    """
    n = spec.frame_size
    n_h = peak_bin.shape[1]
    j, raw = _read5(spec, peak_bin)
    off, xh = _hann2_offset(raw)
    beta = peak_bin + off
    taps = np.arange(-2, 3, dtype=np.float64)
    shifts = [(s, False) for s in (-2, -1, 1, 2)] + [(s, True) for s in (-1, 0, 1)]
    for _ in range(n_pass):
        beta0 = np.where(ok, beta, peak_bin)
        d = (peak_bin - beta0)[:, :, None] + taps[None, None, :]
        dk = _dirichlet(d, n)
        kernel = (dk[..., 0] + dk[..., 4]) * (1.0 / 16.0) - (dk[..., 1] + dk[..., 3]) * 0.25 + dk[..., 2] * 0.375
        amp = np.where(ok, xh / kernel, 0.0)
        vals = raw.copy()
        for shift, image in shifts:
            src = np.arange(n_h) + shift
            valid = (src >= 0) & (src < n_h)
            src = np.minimum(np.maximum(src, 0), n_h - 1)
            a = np.where(valid[None, :], amp[:, src], 0.0)[:, :, None]
            b = beta0[:, src][:, :, None]
            if image:
                vals -= np.conj(a) * _dirichlet(j + b, n)
            else:
                vals -= a * _dirichlet(j - b, n)
        off, xh = _hann2_offset(vals)
        beta = peak_bin + off
    return np.asarray(beta, dtype=np.float64)
