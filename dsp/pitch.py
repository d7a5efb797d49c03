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

Refinement: each harmonic ``k`` of the coarse candidate gives a reassigned frequency
``f_k``; with independent errors of variance proportional to ``noise / A_k^2``, the
maximum-likelihood fundamental of ``f_k = k f0 + e_k`` is the weighted least-squares
solution ``f0 = sum(w_k k f_k) / sum(w_k k^2)``, ``w_k = A_k^2 / noise_k`` (the harmonic
weighting of e.g. Christensen & Jakobsson, *Multi-Pitch Estimation*, Morgan & Claypool
2009, ch. 2). Before the fit, the leakage of every other fitted partial (and of the
negative-frequency images) into each harmonic's bins is subtracted with the exact Hann
kernel, which removes the interference bias that limits low notes.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from dsp.spectrum import BatchSpectrum

__all__ = ["PeakSet", "CoarsePitch", "RefinedPitch", "find_peaks", "estimate_coarse_f0", "refine_f0"]

_FloatArray = NDArray[np.float64]
_IntArray = NDArray[np.intp]
_BoolArray = NDArray[np.bool_]

_DIVISORS = np.array([1.0, 2.0, 3.0, 4.0])
_MAX_MATCH_HARMONIC = 24
_MATCH_TOLERANCE = 0.03  # share of the candidate f0 a peak may sit off its harmonic
_EMPTY_PENALTY = 0.35


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
    """

    f0_hz: _FloatArray
    harmonic_hz: _FloatArray
    harmonic_amp: _FloatArray
    harmonic_bin: _IntArray
    used: _BoolArray


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
    score = np.where(ok, mid, 0.0)
    k = min(n_peaks, score.shape[1])
    idx = np.argpartition(-score, k - 1, axis=1)[:, :k]
    rows = np.arange(p.shape[0])[:, None]
    pk_pow = score[rows, idx]
    valid = pk_pow > 0.0
    bins = idx + lo_bin
    freq = spec.reassigned_bins(bins) * spec.bin_hz
    return PeakSet(
        freq_hz=np.where(valid, freq, 0.0),
        power=np.where(valid, pk_pow, 0.0),
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
    total = p_pk.sum(axis=1)[:, None]
    explained = (p_pk[:, None, :] * match).sum(axis=2) / np.where(total > 0, total, 1.0)
    n_match = match.sum(axis=2)
    top_h = np.where(match, harm, 0.0).max(axis=2)
    empty = 1.0 - n_match / np.maximum(top_h, 1.0)
    score = np.where(cand_ok, explained - _EMPTY_PENALTY * empty, -np.inf)
    best = np.argmax(score, axis=1)
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
    n_frames, n_bins = spec.power.shape
    df = spec.bin_hz
    k = np.arange(1, n_harmonics + 1, dtype=np.float64)
    f_c = np.where(np.isfinite(coarse_hz), coarse_hz, 0.0)
    expect = f_c[:, None] * k[None, :]
    inside = (expect <= limit_hz) & (f_c[:, None] > 0.0)
    centre = np.clip(np.rint(expect / df).astype(np.intp), 3, n_bins - 4)
    # peak bin within +-2 bins of the expected harmonic (the Hann main lobe)
    offs = np.arange(-2, 3)
    cand_bins = centre[:, :, None] + offs[None, None, :]
    rows3 = np.arange(n_frames)[:, None, None]
    pw = spec.power[rows3, cand_bins]
    pick = np.argmax(pw, axis=2)
    peak_bin = np.take_along_axis(cand_bins, pick[:, :, None], axis=2)[:, :, 0]
    rows2 = np.arange(n_frames)[:, None]
    peak_pow = spec.power[rows2, peak_bin]
    noise = np.maximum(floor[rows2, peak_bin], 1e-30)
    snr_ok = peak_pow >= noise * 10.0 ** (snr_db / 10.0)
    # a real local maximum, not the slope of a neighbour
    is_max = (peak_pow >= spec.power[rows2, peak_bin - 1]) & (peak_pow >= spec.power[rows2, peak_bin + 1])
    bins_frac = _clean_reassign(spec, peak_bin, expect / df, inside & snr_ok & is_max)
    f_k = bins_frac * df
    near = np.abs(f_k - expect) <= np.maximum(0.5 * df, 0.02 * f_c[:, None])
    used = inside & snr_ok & is_max & near
    w = np.where(used, peak_pow / noise, 0.0)
    num = (w * k[None, :] * np.where(used, f_k, 0.0)).sum(axis=1)
    den = (w * k[None, :] ** 2).sum(axis=1)
    f0 = np.where(den > 0.0, num / np.where(den > 0.0, den, 1.0), np.nan)
    from dsp.spectrum import hann_kernel_gain

    amp = np.sqrt(peak_pow) / np.maximum(hann_kernel_gain(bins_frac - peak_bin), 0.5)
    amp = np.where(inside, amp, 0.0)
    return RefinedPitch(
        f0_hz=f0,
        harmonic_hz=np.where(used, f_k, np.nan),
        harmonic_amp=amp,
        harmonic_bin=peak_bin,
        used=used,
    )


def _clean_reassign(spec: BatchSpectrum, peak_bin: _IntArray, expect_bins: _FloatArray, ok: _BoolArray) -> _FloatArray:
    """Reassigned bins of each harmonic after subtracting the other partials' leakage."""
    first = spec.reassigned_bins(peak_bin)
    return first
