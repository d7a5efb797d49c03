"""One compiled pass over each frame: spectrum, noise floor, f0, clarity, level, register evidence.

The analyser's compiled pass (:mod:`dsp.chunk`) takes a chunk of frames' FFTs and hands
them here; :func:`measure_frames` measures every frame on its own (numba, no Python per
operation), so a frame's result never depends on the block sizes it was fed in. Steps:

1. Hann power of the ~85 ms window and its noise floor (:mod:`dsp.spectrum`);
2. coarse f0 from the strongest peaks, refined by weighted least squares over the
   reassigned harmonic frequencies, with the window's smoothing of a curving pitch
   (vibrato) taken out (:mod:`dsp.pitch`);
3. voicing: clarity = 1 - (power density between the harmonics) / (density on them), the
   strongest harmonic >= 20 dB over the local floor, energy present across the window's
   centre (clicks and knocks fail it), mains hum (f0 within 0.5 % of 50, 60, 100, 120, 150
   or 180 Hz) rejected; weaker "sustain" evidence for a note already sounding;
4. level (whole window and newest quarter), clipping, H1..H8 and odd/even balance;
5. the register monitor's evidence: powers at ``k f0 / m`` (k = 1..8, m = 1..3) in the
   newest half window, read out of the whole window's DFT
   (:func:`dsp.spectrum.newest_half_power_at`), summarised in dB
   (:func:`dsp.register.summarise_row`).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit
from numpy.typing import NDArray

from dsp.harmonics import balance_row
from dsp.pitch import coarse_f0, refine_f0, strongest_peaks
from dsp.register import EVIDENCE_HARMONICS, EVIDENCE_MODES, summarise_row
from dsp.spectrum import band_floor, hann_power, newest_half_power_at

__all__ = ["CLIP_THRESHOLD", "CURVATURE_GAIN", "CURVATURE_NOISE", "FIT_SNR_DB", "MAINS_HZ", "MAINS_TOLERANCE", "N_FIT_HARMONICS", "N_SEGMENTS", "copy_frames", "measure_frames"]

MAINS_HZ = np.array([50.0, 60.0, 100.0, 120.0, 150.0, 180.0])
"""Mains hum and its harmonics, Hz: never a note."""
MAINS_TOLERANCE = 0.005  # mains frequency stays within +-0.4 %: common practice (grid codes)
N_FIT_HARMONICS = 12  # harmonics in the refinement (H12 of a duct flute is ~50 dB down)
FIT_SNR_DB = 10.0  # harmonics under this SNR over the floor stay out of the refinement
CURVATURE_GAIN = 3.21
"""k_narrow / (k_wide - k_narrow): the reassigned frequency of a partial whose frequency
curves as ``q t^2`` about the window centre reads ``k q T^2`` high, T the window length,
k_wide = 0.01374 under Hann^2 and k_narrow = 0.01048 under Hann^3 (measured here with exact
quadratic chirps; +-1.3 % with the partial's place between bins)."""
CURVATURE_NOISE = 1.5  # difference of the two readings, in fit standard errors, below which it is shrunk
CLARITY_MIN = 0.5
PEAK_SNR_MIN_DB = 20.0  # strongest harmonic over the local floor; noise maxima reach ~10 dB
CLARITY_HOLD = 0.3
PEAK_SNR_HOLD_DB = 14.0
FLATNESS_MIN = 0.005  # centre segments within 23 dB of the loudest: level steps pass, knocks (decaying ~10 dB per segment) do not
CLIP_THRESHOLD = 0.999  # |x| at or above this counts as clipped (full scale is 1.0)
N_SEGMENTS = 8
"""Equal segments of the window whose levels are measured (flatness, newest quarter, end of a note)."""
_N_PEAKS = 10  # spectral peaks for the coarse match
_CLARITY_HARMONICS = 40
_FLOOR_BAND_BINS = 32
_RELATIVE_FLOOR = 1e-12  # floor never under this share of the strongest bin (digitally clean tones)
_TINY_POWER = 1e-30
_KEPT_SHARE = 10.0 ** (-15.0 / 10.0)  # harmonics within 15 dB of the strongest count in _kept_db


@njit(cache=True, nogil=True)
def _clarity(power: NDArray[np.float64], f0: float, bin_hz: float, lo_bin: int, hi_bin: int, limit_hz: float) -> float:
    """1 - (power density between the harmonics of ``f0``) / (density on them), clipped 0..1.

    "On" a harmonic: the 3 bins nearest it (>= 97 % of a Hann-windowed sine's energy);
    "between": the other bins from the lowest search bin up to half a harmonic above the
    last harmonic counted (at most 40, below the peak search limit). A periodic tone has
    empty valleys (clarity near 1); noise fills both alike (near 0), even for a low
    candidate whose harmonics cover half the bins.
    """
    n_bins = power.size
    e_on = 0.0
    n_h = 0
    for k in range(1, _CLARITY_HARMONICS + 1):
        pos = f0 * k
        if pos > limit_hz:
            continue
        c = min(int(np.rint(pos / bin_hz)), n_bins - 2)
        e_on += power[c - 1] + power[c] + power[c + 1]
        n_h += 1
    if n_h == 0:
        return 0.0
    top = min(int(np.rint((n_h + 0.5) * f0 / bin_hz)), hi_bin)
    top = max(top, lo_bin + 1)
    e_all = 0.0
    for b in range(lo_bin, top + 1):
        e_all += power[b]
    n_on = 3.0 * n_h
    e_off = max(e_all - e_on, 0.0)
    n_off = max(top - lo_bin + 1 - n_on, 1.0)
    ratio = (e_off / n_off) / max(e_on / n_on, 1e-300)
    return min(max(1.0 - ratio, 0.0), 1.0)


@njit(cache=True, nogil=True)
def _kept_db(power: NDArray[np.float64], half_power: NDArray[np.float64], f0: float, bin_hz: float, fast_hz: float,
             limit_hz: float) -> float:
    """Highest (newest half window / whole window) power ratio over H1..H8 of ``f0``, dB.

    Powers summed over the 3 bins nearest each harmonic (a Hann-windowed sine's sum varies
    < 0.1 dB with its place between bins, so a steady harmonic reads ~0 dB); ``half_power``
    holds those bins already (the register evidence reads them); harmonics more than 30 dB
    under the strongest are left out (_KEPT_SHARE). -inf when none counts.
    """
    n_bins = power.size
    n_half = half_power.size
    full = np.zeros(8)
    half = np.zeros(8)
    top = 0.0
    for k in range(8):
        pos = f0 * (k + 1)
        if pos >= limit_hz:
            break
        c = min(max(int(np.rint(pos / bin_hz)), 1), n_bins - 2)
        full[k] = power[c - 1] + power[c] + power[c + 1]
        c = min(max(int(np.rint(pos / fast_hz)), 1), n_half - 2)
        half[k] = max(half_power[c - 1], 0.0) + max(half_power[c], 0.0) + max(half_power[c + 1], 0.0)
        top = max(top, full[k])
    best = -np.inf
    for k in range(8):
        if full[k] > 0.0 and full[k] >= _KEPT_SHARE * top and half[k] > 0.0:
            best = max(best, 10.0 * math.log10(half[k] / full[k]))
    return best


@njit(cache=True, nogil=True)
def _upper_off_cents(r: NDArray[np.complex64], half_power: NDArray[np.float64], f0: float, fast_hz: float, n: int,
                     half_offsets: NDArray[np.int64], half_weights: NDArray[np.complex128], limit_hz: float,
                     out: NDArray[np.float64]) -> None:  # fmt: skip
    """Where the newest half window's peak near ``m f0`` lies (m = 2, 3), cents from ``m f0``, into ``out``.

    The strongest bin within two of ``m f0`` and its neighbours, parabolic interpolation on
    their dB (Smith & Serra, PARSHL, 1987; for a Hann main lobe the bias is a few hundredths
    of a bin). inf where no bin within two of ``m f0`` is a local maximum (nothing sounds
    there); nan where ``m f0`` is past ``limit_hz`` or too near either end of the spectrum. Reads ``half_power`` bins not yet read (-1) and keeps them.
    """
    n_half = half_power.size
    for idx in range(2):
        out[idx] = np.nan
        pos = f0 * (idx + 2)
        if not math.isfinite(pos) or pos >= limit_hz:
            continue
        c = int(np.rint(pos / fast_hz))
        if c - 3 < 1 or c + 3 > n_half - 1:
            continue
        best = -1
        top = 0.0
        for j in range(c - 3, c + 4):
            if half_power[j] < 0.0:
                half_power[j] = newest_half_power_at(r, j, n, half_offsets, half_weights)
            if c - 2 <= j <= c + 2 and half_power[j] > top:
                top = half_power[j]
                best = j
        if best < 0 or half_power[best - 1] >= top or half_power[best + 1] >= top:
            out[idx] = np.inf  # no local maximum within two bins: nothing sounds on m f0
            continue
        a = 10.0 * math.log10(half_power[best - 1] + _TINY_POWER)
        b = 10.0 * math.log10(top + _TINY_POWER)
        g = 10.0 * math.log10(half_power[best + 1] + _TINY_POWER)
        den = a - 2.0 * b + g
        delta = 0.5 * (a - g) / den if den < 0.0 else 0.0
        out[idx] = 1200.0 * math.log2((best + delta) * fast_hz / pos)


@njit(cache=True, nogil=True)
def copy_frames(store: NDArray[np.float64], first: int, hop: int, out: NDArray[np.float32]) -> None:
    """Frame ``i`` of ``out`` (n_frames, n) = ``store[first + i hop :][:n]`` in single precision."""
    n = out.shape[1]
    for i in range(out.shape[0]):
        start = first + i * hop
        for j in range(n):
            out[i, j] = store[start + j]


@njit(cache=True, nogil=True)
def measure_frames(
    store: NDArray[np.float64],
    first: int,
    hop: int,
    n: int,
    rect: NDArray[np.complex64],
    half_offsets: NDArray[np.int64],
    half_weights: NDArray[np.complex128],
    sample_rate: float,
    lo_bin: int,
    hi_bin: int,
    fast_keep: int,
    limit_hz: float,
    fmin_hz: float,
    fmax_hz: float,
    hum_lo_hz: NDArray[np.float64],
    hum_hi_hz: NDArray[np.float64],
    power: NDArray[np.float64],
    floor: NDArray[np.float64],
    f0_out: NDArray[np.float64],
    clarity_out: NDArray[np.float64],
    level_out: NDArray[np.float64],
    fast_level_out: NDArray[np.float64],
    clip_out: NDArray[np.bool_],
    voiced_out: NDArray[np.bool_],
    sustain_out: NDArray[np.bool_],
    harm_db_out: NDArray[np.float64],
    odd_even_out: NDArray[np.float64],
    evidence_out: NDArray[np.float64],
    seg_ms_out: NDArray[np.float64],
    kept_db_out: NDArray[np.float64],
    upper_off_out: NDArray[np.float64],
) -> None:
    """Measure ``rect.shape[0]`` frames; frame ``i`` is ``store[first + i hop :][:n]``.

    Parameters
    ----------
    store : 1-D float64, full scale 1.0
        Samples.
    first, hop, n : samples
        Start of frame 0 in ``store``, frame step, frame size.
    rect : complex64, (n_frames, n/2 + 1)
        Rectangular-window DFT of each frame (n points).
    half_offsets, half_weights : :func:`dsp.spectrum.newest_half_taps`
        What reads the newest half window's Hann spectrum out of ``rect``.
    sample_rate : Hz
    lo_bin, hi_bin : peak search bins ``lo_bin <= k < hi_bin``
    fast_keep : bins of the half-window spectrum used
    limit_hz, fmin_hz, fmax_hz : Hz
        Highest harmonic used; range of fundamentals reported.
    hum_lo_hz, hum_hi_hz : Hz
        Mains bands rejected.
    power, floor : (n_frames, keep) out
        Hann power and noise floor of each frame (``keep = power.shape[1]``).
    f0_out ... evidence_out : out
        Refined f0 (Hz, nan if none), clarity (0..1), level and newest-quarter level
        (dBFS, -inf for digital silence), clipping, voiced, sustain, H1..H8 (dB re the
        strongest), odd/even (dB), register evidence (n_frames, 3, 4) dB.
    seg_ms_out : (n_frames, 2 N_SEGMENTS) out
        Mean square of each eighth of the window, oldest first, then the same of the first
        difference of the samples (for :mod:`dsp.voicing`).
    kept_db_out : (n_frames,) out
        How well the best-kept harmonic of f0 (H1..H8 within 15 dB of the strongest) holds
        in the newest half window against the whole window, dB: ~0 for a steady tone or a
        fading subset of harmonics, negative when all fall (for :mod:`dsp.voicing`).
    upper_off_out : (n_frames, 2) out
        Where the newest half window's peak near 2 f0 and 3 f0 lies, cents from them (inf
        where no peak, nan where not measured): a register change sounds on them, a slurred seventh or ninth beside
        them (for :mod:`dsp.register`).
    """
    n_frames = rect.shape[0]
    keep = power.shape[1]
    bin_hz = sample_rate / n
    half = n // 2
    fast_hz = sample_rate / half
    half_power = np.empty(fast_keep)  # newest half window's Hann power, -1 until read
    peak_freq = np.empty(_N_PEAKS)
    peak_pow = np.empty(_N_PEAKS)
    amp = np.empty(N_FIT_HARMONICS)
    ev = np.empty((EVIDENCE_MODES, EVIDENCE_HARMONICS))
    seg = np.empty(N_SEGMENTS)
    for i in range(n_frames):
        r = rect[i]
        p = power[i]
        fl = floor[i]
        hann_power(r, n, keep, p)
        band_floor(p, fl, _FLOOR_BAND_BINS)
        top = 0.0
        for k in range(lo_bin, hi_bin):
            if p[k] > top:  # noqa: PLR1730  numba kernel: kept as written
                top = p[k]
        for k in range(keep):
            fl[k] = max(fl[k], top * _RELATIVE_FLOOR)
        count = strongest_peaks(r, p, fl, lo_bin, hi_bin, bin_hz, peak_freq, peak_pow)
        coarse, _ = coarse_f0(peak_freq, peak_pow, count, fmin_hz * 0.97, fmax_hz * 1.03)
        f0, snr_db = refine_f0(
            r, p, fl, coarse, bin_hz, n, limit_hz, amp, FIT_SNR_DB, CURVATURE_GAIN, CURVATURE_NOISE
        )
        finite = math.isfinite(f0)
        f0_safe = f0 if finite else 1000.0
        clarity = _clarity(p, f0_safe, bin_hz, lo_bin, hi_bin, limit_hz) if finite else 0.0

        start = first + i * hop
        total = 0.0
        top_x = 0.0
        bottom_x = 0.0
        for s in range(N_SEGMENTS):
            # four running sums in a fixed order: the same result wherever the frame lies
            lo = start + s * n // N_SEGMENTS
            hi = start + (s + 1) * n // N_SEGMENTS
            a0 = a1 = a2 = a3 = 0.0
            b0 = b1 = b2 = b3 = 0.0  # the same of the first difference (weights a partial by f^2)
            prev = store[lo - 1] if s > 0 else store[lo]
            j = lo
            while j + 4 <= hi:
                v0, v1, v2, v3 = store[j], store[j + 1], store[j + 2], store[j + 3]
                a0 += v0 * v0
                a1 += v1 * v1
                a2 += v2 * v2
                a3 += v3 * v3
                d0, d1, d2, d3 = v0 - prev, v1 - v0, v2 - v1, v3 - v2
                b0 += d0 * d0
                b1 += d1 * d1
                b2 += d2 * d2
                b3 += d3 * d3
                prev = v3
                top_x = max(top_x, max(max(v0, v1), max(v2, v3)))
                bottom_x = min(bottom_x, min(min(v0, v1), min(v2, v3)))
                j += 4
            while j < hi:
                v0 = store[j]
                a0 += v0 * v0
                b0 += (v0 - prev) * (v0 - prev)
                prev = v0
                top_x = max(top_x, v0)
                bottom_x = min(bottom_x, v0)
                j += 1
            seg[s] = (a0 + a1) + (a2 + a3)
            total += seg[s]
            seg_ms_out[i, s] = seg[s] / (hi - lo)
            seg_ms_out[i, N_SEGMENTS + s] = ((b0 + b1) + (b2 + b3)) / (hi - lo)
        peak = max(top_x, -bottom_x)
        ms = total / n
        ms_fast = (seg[N_SEGMENTS - 2] + seg[N_SEGMENTS - 1]) / (n - (N_SEGMENTS - 2) * n // N_SEGMENTS)  # newest quarter (~21 ms)
        level = 10.0 * math.log10(ms) if ms > 0.0 else -np.inf
        level_out[i] = level
        fast_level_out[i] = 10.0 * math.log10(ms_fast) if ms_fast > 0.0 else -np.inf
        clip_out[i] = peak >= CLIP_THRESHOLD
        loudest = 1e-300
        for s in range(N_SEGMENTS):
            loudest = max(loudest, seg[s])
        quiet = seg[2]
        for s in range(3, N_SEGMENTS - 2):
            quiet = min(quiet, seg[s])
        flat = quiet >= FLATNESS_MIN * loudest
        hum = False
        for h in range(hum_lo_hz.size):
            if hum_lo_hz[h] <= f0_safe <= hum_hi_hz[h]:
                hum = True
        usable = finite and fmin_hz <= f0_safe <= fmax_hz and flat and not hum and level > -100.0
        f0_out[i] = f0
        clarity_out[i] = clarity
        voiced_out[i] = usable and clarity >= CLARITY_MIN and snr_db >= PEAK_SNR_MIN_DB
        sustain_out[i] = usable and clarity >= CLARITY_HOLD and snr_db >= PEAK_SNR_HOLD_DB
        odd_even_out[i] = balance_row(amp, harm_db_out[i])

        half_power[:] = -1.0
        for m in range(EVIDENCE_MODES):
            for k in range(EVIDENCE_HARMONICS):
                pos = f0_safe * (k + 1) / (m + 1)
                if pos >= limit_hz:
                    ev[m, k] = 0.0
                    continue
                c = min(max(int(np.rint(pos / fast_hz)), 1), fast_keep - 2)
                best = 0.0
                for j in range(c - 1, c + 2):
                    if half_power[j] < 0.0:  # bins shared by several hypotheses are read once
                        half_power[j] = newest_half_power_at(r, j, n, half_offsets, half_weights)
                    best = max(best, half_power[j])
                ev[m, k] = best
        summarise_row(ev, evidence_out[i])
        kept_db_out[i] = _kept_db(p, half_power, f0_safe, bin_hz, fast_hz, limit_hz)
        _upper_off_cents(r, half_power, f0_safe, fast_hz, n, half_offsets, half_weights, limit_hz, upper_off_out[i])

