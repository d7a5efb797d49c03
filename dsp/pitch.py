"""Fundamental frequency of one frame: spectral peaks, a coarse harmonic match, and a
weighted least-squares refinement over reassigned harmonic frequencies (compiled, per frame).

Coarse step: the strongest spectral peaks of the frame, their frequencies reassigned
(see :mod:`dsp.spectrum`), propose candidates ``peak / m`` (m = 1..4). A candidate scores
the share of peak energy lying on its harmonics, less a penalty for the share of its
harmonic slots (up to the highest matched one) left empty. The penalty guards against
octave errors both ways: a sub-octave explains the same peaks but leaves its odd slots
empty (downward error; decisive for high notes with only two or three partials), while the
octave above cannot explain the odd harmonics of a note whose fundamental is weaker than
its 2nd harmonic (upward error). A slot counts once however many peaks it holds (a room or
a vibrato can split a partial in two), only peaks within 30 dB of the strongest fill slots
(a stray weak peak high up would stretch the true note's slots), and a candidate with
neither its 1st nor its 2nd harmonic filled is no note (two notes overlapping in a room
share a sub-multiple that explains both).

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

Where the harmonics disagree beyond their noise, the errors are not noise alone: a
reverberant room lays its tail on each harmonic with its own phase, and under a vibrato
the tail holds past frequencies that pull each harmonic's reading its own way (by several
cents at a direct-to-reverberant ratio of 6 dB). The fit then takes a random-effects
model (DerSimonian & Laird 1986): each harmonic's reading of f0 has its noise variance
plus a common spread, estimated from the disagreement, so that the strong harmonics count
more equally in cents instead of the fundamental alone.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit
from numpy.typing import NDArray

from dsp.spectrum import (
    hann2_reassigned_bin,
    hann2_taps,
    hann3_reassigned_bin,
    hann_gain,
    hann_reassigned_bin,
)

__all__ = ["coarse_f0", "refine_f0", "strongest_peaks"]

_FloatArray = NDArray[np.float64]
_BoolArray = NDArray[np.bool_]

_N_DIVISORS = 4
_MAX_MATCH_HARMONIC = 24
_MATCH_TOLERANCE = 0.015  # share of the candidate f0 a peak may sit off its harmonic (26 cents at H1)
_EMPTY_PENALTY = 0.35
_SLOT_RANGE_DB = 30.0
"""Peaks within this of the strongest fill harmonic slots (a duct flute's 6th harmonic lies
~30 dB under the fundamental: :func:`dsp.synth.register_profile_db`, common practice)."""
_LOWEST_HARMONIC = 2  # a candidate's lowest harmonic among the peaks is at most its 2nd
_CLEAN_BELOW_BINS = 12.0  # harmonic spacing (bins) under which leakage is modelled
_CENTS_PER_LN = 1200.0 / math.log(2.0)
_REASSIGN_VAR = 0.5
"""Variance (bins^2) of a Hann^2 reassigned frequency times the peak's power SNR over the
floor: 0.39-0.52 measured here on sines in white noise (peak SNR 35-64 dB)."""
_CORRECTED_VAR_RATIO = 4.4
"""Variance of a harmonic's reading with the curvature correction (``y + (1 + gain)(y_narrow
- y)``) over that of its Hann^2 reading: 2.2 / 0.5, from the variances and covariance of the
Hann^2 and Hann^3 readings measured here as for ``_REASSIGN_VAR``."""
_SPREAD_MARGIN = 2.0
"""Standard deviations of Q (noise alone) under which the harmonics count as agreeing: tuned
here (0, 1, 2, 3 tried) on the constructed vibrato notes, dry (strong vibrato 10-40 c at 4-7
Hz: p95 0.74 -> 0.46 c, 0.42 c without the spread) and in rooms (p95 3.37 -> 3.49 c, 9.3 c
without)."""
_SPREAD_FLOOR_HZ = 3000.0
"""Harmonics above this (Hz) have a floor of ``_SPREAD_FLOOR_CENTS`` times their frequency over
it: tuned here (2, 3 kHz and none tried) on the constructed notes (strong dry vibrato p95
0.46 -> 0.43 c; room 3.49 -> 3.52 c)."""
_SPREAD_SNR_DB = 20.0
"""Harmonics this far over the floor (power, dB) judge the spread and, once there is one,
alone make the fit (noise maxima reach ~10 dB; :data:`dsp.measure.PEAK_SNR_MIN_DB` is the
same 20 dB for the strongest harmonic of a voiced frame)."""
_SPREAD_FLOOR_CENTS = 1.0
"""Disagreement between harmonics (cents, standard deviation) left out of the random-effects
spread: tuned here on constructed vibrato notes (tuning seeds 1000-1007; 0.3, 0.6, 1.0 tried),
dry and in two rooms."""


@njit(cache=True, nogil=True)
def _between_harmonic_var(y: _FloatArray, var: _FloatArray, used: _BoolArray) -> float:
    """Variance (Hz^2) of the harmonics' readings of f0 beyond their noise, 0 if none.

    The method-of-moments estimate of a random-effects model (DerSimonian & Laird,
    *Controlled Clinical Trials* 7:177-188, 1986): ``y_k`` (f0 read on harmonic k) has
    variance ``var_k`` from noise plus a common ``s2`` from what differs between harmonics
    (a reverberant room's tail lies on each harmonic with its own phase; under vibrato it
    pulls each one's reading a different way). ``Q = sum (y_k - ybar)^2 / var_k`` exceeds its
    noise-only expectation ``n - 1`` by ``s2 (S1 - S2 / S1)``, ``S1 = sum 1/var_k``,
    ``S2 = sum 1/var_k^2``; here only its excess over ``_SPREAD_MARGIN`` standard deviations
    of Q counts. A steady note in noise gives ``s2 = 0`` (weights as before); a reverberant
    one equalises the harmonics' weights in cents.
    """
    s1 = 0.0
    s2 = 0.0
    sy = 0.0
    n_used = 0
    for h in range(y.size):
        if used[h]:
            iv = 1.0 / var[h]
            s1 += iv
            s2 += iv * iv
            sy += iv * y[h]
            n_used += 1
    if n_used < 2:
        return 0.0
    ybar = sy / s1
    q = 0.0
    for h in range(y.size):
        if used[h]:
            q += (y[h] - ybar) ** 2 / var[h]
    # Q of noise alone is chi-square with n - 1 degrees of freedom (sd sqrt(2 (n - 1))): only a
    # Q clearly above it counts, so that a dry note does not equalise its weights by chance
    dof = n_used - 1.0
    return max(0.0, (q - dof - _SPREAD_MARGIN * math.sqrt(2.0 * dof)) / (s1 - s2 / s1))


@njit(cache=True, nogil=True)
def strongest_peaks(
    rect: NDArray[np.complex64],
    power: _FloatArray,
    floor: _FloatArray,
    lo_bin: int,
    hi_bin: int,
    bin_hz: float,
    freq_out: _FloatArray,
    power_out: _FloatArray,
    snr_db: float = 12.0,
    range_db: float = 50.0,
) -> int:
    """Strongest local maxima of one frame's Hann power, strongest first; returns their count.

    Search bins ``lo_bin <= k < hi_bin`` (``lo_bin >= 1``); a peak stands ``snr_db`` over
    the floor and no more than ``range_db`` under the frame's strongest bin. Up to
    ``freq_out.size`` peaks are written: reassigned frequency (Hz) and Hann power.
    """
    n_max = freq_out.size
    top = 0.0
    for k in range(lo_bin, hi_bin):
        if power[k] > top:  # noqa: PLR1730  numba kernel: kept as written
            top = power[k]
    snr = 10.0 ** (snr_db / 10.0)
    low = top * 10.0 ** (-range_db / 10.0)
    bins = np.empty(n_max, dtype=np.int64)
    count = 0
    for k in range(lo_bin, hi_bin):
        p = power[k]
        if not (p > power[k - 1] and p >= power[k + 1] and p > floor[k] * snr and p >= low and p > 0.0):
            continue
        if count == n_max and p <= power_out[n_max - 1]:
            continue
        # insertion into the list sorted by power, strongest first (equal powers: lower bin first)
        j = count if count < n_max else n_max - 1
        while j > 0 and power_out[j - 1] < p:
            if j < n_max:
                power_out[j] = power_out[j - 1]
                bins[j] = bins[j - 1]
            j -= 1
        power_out[j] = p
        bins[j] = k
        if count < n_max:
            count += 1
    for j in range(count):
        freq_out[j] = hann_reassigned_bin(rect, bins[j]) * bin_hz
    return count


@njit(cache=True, nogil=True)
def coarse_f0(freq: _FloatArray, power: _FloatArray, count: int, fmin_hz: float, fmax_hz: float) -> tuple[float, float]:
    """Coarse fundamental (Hz, nan if none) and the share of peak energy it explains (0..1).

    ``freq``/``power``: the first ``count`` peaks of :func:`strongest_peaks` (Hz, power).

    Examples
    --------
    >>> f = np.array([440.0, 880.0, 1320.0])
    >>> p = np.array([0.1, 1.0, 0.3])  # fundamental weaker than the 2nd harmonic
    >>> float(coarse_f0(f, p, 3, 60.0, 4500.0)[0])
    440.0
    """
    total = 0.0
    strongest = 0.0
    for i in range(count):
        total += power[i]
        strongest = max(strongest, power[i])
    if total <= 0.0:
        total = 1.0
    # peaks this far under the strongest explain energy but fill no slot (a weak high
    # harmonic or a noise maximum would otherwise stretch a candidate's slots to it)
    slot_min = strongest * 10.0 ** (-_SLOT_RANGE_DB / 10.0)
    best_score = -np.inf
    best_f0 = np.nan
    best_explained = 0.0
    for j in range(count):
        for m in range(1, _N_DIVISORS + 1):
            cand = freq[j] / m
            if not (fmin_hz <= cand <= fmax_hz):
                continue
            on = 0.0
            n_match = 0
            slots = np.int64(0)  # harmonic slots holding a peak, one bit each
            top_h = 0.0
            low_h = np.inf
            for i in range(count):
                ratio = freq[i] / cand
                h = np.rint(ratio)
                if 1.0 <= h <= _MAX_MATCH_HARMONIC and abs(ratio - h) <= _MATCH_TOLERANCE:
                    on += power[i]
                    if power[i] < slot_min:
                        continue
                    bit = np.int64(1) << np.int64(h)
                    if not (slots & bit):  # a slot counts once, however many peaks it holds
                        slots |= bit
                        n_match += 1
                    if h > top_h:  # noqa: PLR1730  numba kernel: kept as written
                        top_h = h
                    if h < low_h:  # noqa: PLR1730  numba kernel: kept as written
                        low_h = h
            if low_h > _LOWEST_HARMONIC:
                # neither its fundamental nor its octave among the peaks: no sounding note of
                # an open pipe, but the common sub-multiple of two notes overlapping in a room
                continue
            explained = on / total
            score = explained - _EMPTY_PENALTY * (1.0 - n_match / max(top_h, 1.0))
            if score > best_score:
                best_score, best_f0, best_explained = score, cand, explained
    return best_f0, best_explained


@njit(cache=True, nogil=True)
def _dirichlet(d: float, n: int) -> complex:
    """DFT of an n-sample complex exponential ``d`` bins from a bin (rectangular window)."""
    den = math.sin(math.pi * d / n)
    mag = float(n) if abs(den) < 1e-12 else math.sin(math.pi * d) / den
    ph = math.pi * d * (n - 1) / n
    return mag * complex(math.cos(ph), -math.sin(ph))


@njit(cache=True, nogil=True)
def _clean_reassign(
    rect: NDArray[np.complex64], peak_bin: NDArray[np.int64], ok: _BoolArray, n: int, beta: _FloatArray, n_pass: int = 2
) -> None:
    """Hann^2 reassigned bins of each harmonic after subtracting its neighbours' leakage, into ``beta``.

    The first estimate reassigns every harmonic on its own; each harmonic's complex
    amplitude is then read off the Hann^2 spectrum, and the exact leakage (Dirichlet
    kernel) of harmonics k-2..k+2 and of the negative-frequency images of k-1..k+1 is
    removed from the five rectangular bins the reassignment of harmonic k reads. Farther
    partials leak as 1/d^4 and are left. Two passes: the second models the leakage with
    the cleaned frequencies.
    """
    n_h = peak_bin.size
    raw = np.empty((n_h, 5), dtype=np.complex128)
    vals = np.empty((n_h, 5), dtype=np.complex128)
    xh = np.empty(n_h, dtype=np.complex128)
    amp = np.empty(n_h, dtype=np.complex128)
    beta0 = np.empty(n_h)
    for h in range(n_h):
        for t in range(5):
            raw[h, t] = rect[peak_bin[h] + t - 2]
        off, xh[h] = hann2_taps(raw[h, 0], raw[h, 1], raw[h, 2], raw[h, 3], raw[h, 4])
        beta[h] = peak_bin[h] + off
    for _ in range(n_pass):
        for h in range(n_h):
            beta0[h] = beta[h] if ok[h] else peak_bin[h]
        for h in range(n_h):
            if not ok[h]:
                amp[h] = 0.0
                continue
            base = peak_bin[h] - beta0[h]
            kernel = (
                (_dirichlet(base - 2.0, n) + _dirichlet(base + 2.0, n)) * (1.0 / 16.0)
                - (_dirichlet(base - 1.0, n) + _dirichlet(base + 1.0, n)) * 0.25
                + _dirichlet(base, n) * 0.375
            )
            amp[h] = xh[h] / kernel
        for h in range(n_h):
            for t in range(5):
                v = raw[h, t]
                j = peak_bin[h] + t - 2
                for shift in (-2, -1, 1, 2):
                    src = h + shift
                    if 0 <= src < n_h:
                        v -= amp[src] * _dirichlet(j - beta0[src], n)
                for shift in (-1, 0, 1):
                    src = h + shift
                    if 0 <= src < n_h:
                        v -= amp[src].conjugate() * _dirichlet(j + beta0[src], n)
                vals[h, t] = v
        for h in range(n_h):
            off, xh[h] = hann2_taps(vals[h, 0], vals[h, 1], vals[h, 2], vals[h, 3], vals[h, 4])
            beta[h] = peak_bin[h] + off


@njit(cache=True, nogil=True)
def refine_f0(
    rect: NDArray[np.complex64],
    power: _FloatArray,
    floor: _FloatArray,
    coarse_hz: float,
    bin_hz: float,
    n: int,
    limit_hz: float,
    amp_out: _FloatArray,
    snr_db: float,
    curvature_gain: float,
    curvature_noise: float,
) -> tuple[float, float]:
    """Refined fundamental (Hz, nan if no harmonic was usable) and the SNR of the strongest
    fitted harmonic (dB, -inf if none), by weighted least squares over reassigned harmonics,
    each harmonic weighted by its noise variance plus the harmonics' spread beyond noise
    (:func:`_between_harmonic_var`; where there is a spread, only harmonics 20 dB over the
    floor enter).

    Harmonics ``k = 1 .. amp_out.size`` of ``coarse_hz`` up to ``limit_hz`` are sought within
    +-2 bins (the Hann main lobe) of their expected bin; those ``snr_db`` over the floor, at
    a real local maximum and reassigned near their harmonic enter the fit. ``amp_out``
    receives each harmonic's amplitude (peak amplitude, scalloping removed; 0 above
    ``limit_hz``). ``rect``/``power``/``floor``: the frame's DFT bins, Hann power, noise floor.

    A window reads a curving pitch (vibrato) as its weighted average, high or low by
    ``k f''`` with ``k`` set by the window's width. Above the leakage-model range the same
    harmonics are also read under the narrower Hann^3 window (same weights); the two
    readings differ by ``(k_wide - k_narrow) f''``, so ``f0 + (1 + curvature_gain) d``
    (``d`` the narrow reading less the wide one, ``curvature_gain = k_narrow / (k_wide -
    k_narrow)``) is the pitch at the window centre. The step is shrunk, as
    ``d^2 / (d^2 + tau^2)``, where ``d`` is within noise: ``tau = curvature_noise`` fit
    standard errors (``1 / sqrt(sum w k^2)`` bins), so a steady note in noise keeps its
    wide-window reading (the noise of the weighted mean alone, not the spread).
    """
    n_h = amp_out.size
    n_bins = power.size
    amp_out[:] = 0.0
    if not (coarse_hz > 0.0):
        return np.nan, -np.inf
    snr = 10.0 ** (snr_db / 10.0)
    tol_hz = max(0.5 * bin_hz, 0.02 * coarse_hz)
    peak_bin = np.empty(n_h, dtype=np.int64)
    ok = np.zeros(n_h, dtype=np.bool_)
    inside = np.zeros(n_h, dtype=np.bool_)
    beta = np.empty(n_h)
    weight = np.empty(n_h)
    for h in range(n_h):
        expect = coarse_hz * (h + 1)
        centre = min(max(int(np.rint(expect / bin_hz)), 5), n_bins - 6)
        best = centre - 2
        for b in range(centre - 1, centre + 3):  # the first of equal maxima
            if power[b] > power[best]:
                best = b
        peak_bin[h] = best
        p = power[best]
        noise = max(floor[best], 1e-30)
        weight[h] = p / noise
        beta[h] = hann2_reassigned_bin(rect, best)
        inside[h] = expect <= limit_hz
        # a real local maximum, not the slope of a neighbour; a genuine partial reassigns
        # near its harmonic, a neighbour's side lobe reassigns away
        ok[h] = (
            inside[h]
            and p >= noise * snr
            and p >= power[best - 1]
            and p >= power[best + 1]
            and abs(beta[h] * bin_hz - expect) <= tol_hz
        )
    if coarse_hz < _CLEAN_BELOW_BINS * bin_hz:
        # neighbours closer than _CLEAN_BELOW_BINS leak measurably even through Hann^2
        _clean_reassign(rect, peak_bin, ok, n, beta)
    # per harmonic: its reading of f0 (Hz) under Hann^2 and Hann^3, and the noise variance
    # of the former (Hz^2)
    y = np.empty(n_h)
    y_narrow = np.empty(n_h)
    var = np.empty(n_h)
    used = np.zeros(n_h, dtype=np.bool_)
    n_used = 0
    top_w = 0.0
    narrow = coarse_hz >= _CLEAN_BELOW_BINS * bin_hz
    for h in range(n_h):
        k = h + 1.0
        if ok[h] and abs(beta[h] * bin_hz - coarse_hz * k) <= tol_hz:
            w = weight[h]
            used[h] = True
            n_used += 1
            y[h] = beta[h] * bin_hz / k
            var[h] = _REASSIGN_VAR * bin_hz * bin_hz / (w * k * k)
            if w > top_w:  # noqa: PLR1730  numba kernel: kept as written
                top_w = w
            if narrow:
                if peak_bin[h] >= 5 and peak_bin[h] + 5 <= rect.size:
                    y_narrow[h] = hann3_reassigned_bin(rect, peak_bin[h]) * bin_hz / k
                else:
                    narrow = False
        if inside[h]:
            amp_out[h] = math.sqrt(power[peak_bin[h]]) / max(hann_gain(beta[h] - peak_bin[h]), 0.5)
    if n_used == 0:
        return np.nan, -np.inf
    # the harmonics' disagreement beyond noise, judged on their readings with the window's
    # smoothing of a curving pitch taken out (as below, per harmonic), and beyond a small
    # floor: what remains of a vibrato after that correction differs a little from harmonic
    # to harmonic even in a dry room
    g = 1.0 + curvature_gain
    floor_hz = _SPREAD_FLOOR_CENTS * coarse_hz / _CENTS_PER_LN
    # only harmonics well over the floor: a noise maximum passing the tests above is no
    # partial, and its reading strays far more than the noise variance of a partial says
    strong_snr = 10.0 ** (_SPREAD_SNR_DB / 10.0)
    strong = np.zeros(n_h, dtype=np.bool_)
    z = np.empty(n_h)
    var_z = np.empty(n_h)
    for h in range(n_h):
        if used[h] and weight[h] >= strong_snr:
            strong[h] = True
            # a vibrato's excursion in Hz grows with the harmonic, and with it what the
            # smooth-chirp correction leaves: the floor grows above _SPREAD_FLOOR_HZ
            grow = max(1.0, (h + 1.0) * coarse_hz / _SPREAD_FLOOR_HZ)
            floor2 = floor_hz * floor_hz * grow * grow
            if narrow:
                z[h] = y[h] + g * (y_narrow[h] - y[h])
                var_z[h] = _CORRECTED_VAR_RATIO * var[h] + floor2
            else:
                z[h] = y[h]
                var_z[h] = var[h] + floor2
    spread = _between_harmonic_var(z, var_z, strong)
    num = 0.0
    num_narrow = 0.0
    den = 0.0
    noise_den = 0.0  # sum u^2 var: the noise variance of the weighted mean is noise_den / den^2
    for h in range(n_h):
        if used[h] and (strong[h] or spread == 0.0):  # the weak ones only where all agree
            u = 1.0 / (var[h] + spread)
            num += u * y[h]
            den += u
            noise_den += u * u * var[h]
            if narrow:
                num_narrow += u * y_narrow[h]
    f0 = num / den
    if narrow and curvature_gain > 0.0 and f0 > 0.0:
        f0_narrow = num_narrow / den
        d = 1200.0 * math.log2(f0_narrow / f0)  # cents
        # shrunk where noise alone explains the difference, full above; the noise of d
        # scales as the fit's standard error from noise, sqrt(sum u^2 var) / sum u Hz
        # (= 1 / sqrt(sum w k^2) bins when the harmonics agree within their noise)
        tau = curvature_noise * _CENTS_PER_LN * math.sqrt(noise_den / _REASSIGN_VAR) / den / f0
        d2 = d * d
        f0 = f0 * 2.0 ** ((1.0 + curvature_gain) * d * d2 / (d2 + tau * tau + 1e-300) / 1200.0)
    best_snr_db = 10.0 * math.log10(top_w) if top_w > 0.0 else -np.inf
    return f0, best_snr_db
