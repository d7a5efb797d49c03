"""The sound card's clock: the frequency of a long steady tone, and a rate fitted to frame counts.

Two pure estimators for calibrating an input's sample clock (``bench calibrate``):

* :func:`measure_tone` finds the frequency of a steady tone over a whole recording, with its
  standard error. A coarse frequency comes from the interpolated peak of a Hann-windowed,
  zero-padded FFT (the coarse DFT search of Rife & Boorstyn 1974, refined by a parabola through
  the log magnitudes of the peak bin and its neighbours). The fine estimate is the slope of the
  tone's phase over the whole file: the recording is cut into ``K`` contiguous segments, each
  segment's complex amplitude at the coarse frequency is taken with a Hann window (its phase
  belongs to the segment's centre), and a straight line is fitted by least squares to the
  unwrapped phases against time. Its slope is the frequency offset from the coarse value
  (frequency estimation by linear regression of the phase, Tretter, IEEE Trans. Inf. Theory
  31(6):832-835, 1985, *from memory*). The standard error of the slope comes from the fit's own
  residuals, so it includes any wander of the tone and the room, and it is never reported
  below the Cramer-Rao bound of Rife & Boorstyn (IEEE Trans. Inf. Theory, 1974; volume and pages
  20(5):591-598 *from memory*):
  ``var(omega) >= 12 / (SNR N (N^2 - 1))`` (rad/sample)^2 with ``SNR = A^2 / (2 sigma^2)``.
* :func:`fit_frame_rate` fits ``frames = a + rate * t`` by ordinary least squares to
  (monotonic time, frames delivered) pairs gathered over a whole run, and gives the slope with
  its standard error.

:func:`clock_ppm` turns either into the clock's error in parts per million::

    clock_ppm = (true sample rate / nominal sample rate - 1) * 1e6

A card that runs fast takes more samples per true second than it claims, so a tone of true
frequency ``f_ref`` reads ``f_ref / (1 + ppm / 1e6)`` on the nominal rate: it reads low, and
``ppm = (f_ref / f_read - 1) * 1e6`` is positive. Every reading of that card is corrected by
``f * (1 + ppm / 1e6)``.

Pure: numpy in, frozen results out; no files, devices or clocks.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "MAX_OFFSET",
    "MIN_TONE_S",
    "STEADY_PPM",
    "FrameRateFit",
    "ToneFrequency",
    "clock_ppm",
    "clock_ppm_from_tone",
    "fit_frame_rate",
    "measure_tone",
]

MAX_OFFSET = 0.01
"""Largest relative distance (1 %, about 17 cents) between the stated and the found tone."""
STEADY_PPM = 20.0
"""Largest distance (ppm) of a quarter of the recording's frequency from the whole's, beyond
five of the quarter's standard errors, for the tone to count as steady (moving 1 cm/s towards
the microphone shifts a tone by v/c = 0.01/343 = 29 ppm, c at 20 degC from REFERENCES section 3:
hold still)."""
MIN_TONE_S = 2.0
"""Shortest recording :func:`measure_tone` takes, seconds."""
MIN_SEGMENTS = 16
_MAX_SEGMENT_S = 0.5  # phase step per segment stays far below pi for a coarse error < 0.1 Hz
_COARSE_MAX_SAMPLES = 1 << 19
_LEVEL_SPREAD = 4.0  # a segment's tone amplitude may sit this factor from the median (12 dB)
_LOW_HZ = 20.0
_NEAR_PEAK_DB = 30.0  # the tone near the stated frequency may sit this far below the strongest (its harmonics)
_WANDER_RATIO = 4.0  # phase scatter (rad) over relative level scatter above which the tone wanders
_PHASE_FLOOR_RAD = 0.01  # phase scatter always tolerated (a clean tone's rounding)
_PHASE_LIMIT_RAD = 0.3  # phase scatter never tolerated: a segment SNR near 10 dB, or a moving tone


@dataclass(frozen=True, slots=True)
class ToneFrequency:
    """The frequency of a steady tone over a recording.

    Attributes
    ----------
    freq_hz : float, Hz
        On the nominal sample rate.
    freq_se_hz : float >= 0, Hz
        Standard error: the larger of the phase fit's and the Cramer-Rao bound's.
    fit_se_hz : float >= 0, Hz
        Standard error from the phase fit's residuals.
    crb_hz : float >= 0, Hz
        Cramer-Rao bound on the standard deviation (Rife & Boorstyn 1974) at the measured SNR.
    snr_db : float, dB
        Tone power over the power of everything else in the recording.
    duration_s : float, s
        Length used, seconds of the nominal rate.
    segments : int
        Segments whose phases were fitted.
    quarter_spread_ppm : float >= 0, ppm
        Largest distance of a quarter's frequency from the whole's.
    """

    freq_hz: float
    freq_se_hz: float
    fit_se_hz: float
    crb_hz: float
    snr_db: float
    duration_s: float
    segments: int
    quarter_spread_ppm: float


@dataclass(frozen=True, slots=True)
class FrameRateFit:
    """A straight line through (time, frames delivered): the rate a device delivers frames at.

    Attributes
    ----------
    rate_hz : float, frames per second of the reference clock
    rate_se_hz : float >= 0, frames per second
        Standard error of the slope: ``hypot(fit_se_hz, parts_se_hz)``.
    fit_se_hz : float >= 0, frames per second
        Standard error of the slope from the least-squares residuals (holds for independent
        timing scatter of the points).
    parts_se_hz : float >= 0, frames per second
        The wander of the rate itself (timing errors that accumulate, which leave the residuals
        correlated and the least-squares error too small): lines are fitted to contiguous
        parts of the run, and the variance of their slopes beyond what their own least-squares
        errors explain, divided by the number of parts, is its square (batch means; the
        average of the parts' rates is the whole's). 0 when the parts agree as independent
        scatter predicts, or the run has too few points to be cut.
    duration_s : float, s
        Time the fitted points span.
    points : int
        Points fitted (after leaving out late callbacks).
    residual_rms_frames : float, frames
        Scatter of the points about the line.
    """

    rate_hz: float
    rate_se_hz: float
    fit_se_hz: float
    parts_se_hz: float
    duration_s: float
    points: int
    residual_rms_frames: float

    @property
    def rate_wanders(self) -> bool:
        """True when the rate's wander is the larger part of the standard error."""
        return self.parts_se_hz > self.fit_se_hz


def clock_ppm(true_over_read: float) -> float:
    """The clock's error in ppm from the ratio of a true to a read frequency (or rate).

    Parameters
    ----------
    true_over_read : float > 0
        ``true sample rate / nominal sample rate``; equal to ``f_true / f_read`` of a tone.

    Returns
    -------
    float, ppm

    Examples
    --------
    >>> round(clock_ppm(48004.8 / 48000), 6)
    100.0
    """
    if not (math.isfinite(true_over_read) and true_over_read > 0):
        raise ValueError(f"ratio {true_over_read} must be a finite number above 0")
    return (true_over_read - 1.0) * 1e6


def clock_ppm_from_tone(reference_hz: float, tone: ToneFrequency) -> tuple[float, float]:
    """The clock's error (ppm) and its standard error (ppm) from a tone of known frequency.

    Parameters
    ----------
    reference_hz : float > 0, Hz
        The tone's true frequency.
    tone : ToneFrequency
        What :func:`measure_tone` read on the nominal rate.

    Returns
    -------
    (ppm, ppm_se) : tuple of float, ppm

    Examples
    --------
    >>> t = ToneFrequency(440 / (1 + 1e-4), 1e-5, 1e-5, 1e-6, 40.0, 10.0, 40, 0.1)
    >>> [round(v, 3) for v in clock_ppm_from_tone(440.0, t)]
    [100.0, 0.023]
    """
    ppm = clock_ppm(reference_hz / tone.freq_hz)
    se_ppm = 1e6 * reference_hz * tone.freq_se_hz / tone.freq_hz**2
    return ppm, se_ppm


def _coarse_peaks_hz(x: NDArray[np.float64], sample_rate: float, lo_hz: float, hi_hz: float) -> tuple[float, float, float]:
    """Hann, zero-padded x4 spectrum: the strongest peak above 20 Hz, the strongest between
    ``lo_hz`` and ``hi_hz`` (Hz, parabolic on log magnitude), and the second's level below the
    first (dB >= 0)."""
    n = min(len(x), _COARSE_MAX_SAMPLES)
    seg = x[:n] * np.hanning(n)
    nfft = 1 << math.ceil(math.log2(4 * n))
    mag = np.abs(np.fft.rfft(seg, nfft))

    def peak(lo: int, hi: int) -> tuple[float, float]:
        k = lo + int(np.argmax(mag[lo:hi]))
        a, b, c = (math.log(max(v, 1e-300)) for v in mag[k - 1 : k + 2])
        denom = a - 2 * b + c
        delta = 0.5 * (a - c) / denom if denom < 0 else 0.0
        return (k + delta) * sample_rate / nfft, float(mag[k])

    top_hz, top_mag = peak(max(1, math.ceil(_LOW_HZ * nfft / sample_rate)), len(mag) - 1)
    lo = max(1, math.floor(lo_hz * nfft / sample_rate))
    hi = min(len(mag) - 1, math.ceil(hi_hz * nfft / sample_rate) + 1)
    near_hz, near_mag = peak(lo, hi)
    return top_hz, near_hz, 20 * math.log10(top_mag / max(near_mag, 1e-300))


def _segment_phases(
    x: NDArray[np.float64], omega: float, seg_len: int, n_seg: int
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Each segment's Hann-windowed complex amplitude at ``omega`` (rad/sample): centres (samples), phases, amplitudes."""
    w = np.hanning(seg_len + 2)[1:-1]  # nonzero, symmetric about the centre
    m = np.arange(seg_len)
    kernel = w * np.exp(-1j * omega * m)
    blocks = x[: n_seg * seg_len].reshape(n_seg, seg_len)
    starts = np.arange(n_seg) * seg_len
    z = (blocks @ kernel) * np.exp(-1j * omega * starts)
    centres = starts + (seg_len - 1) / 2.0
    amplitude = 2.0 * np.abs(z) / w.sum()
    return centres.astype(np.float64), np.unwrap(np.angle(z)), amplitude


def _line_fit(t: NDArray[np.float64], y: NDArray[np.float64]) -> tuple[float, float, float, NDArray[np.float64]]:
    """Least-squares line y = a + b t: slope, its standard error, intercept, residuals."""
    tm = float(t.mean())
    dt = t - tm
    sxx = float(dt @ dt)
    b = float(dt @ (y - y.mean())) / sxx
    a = float(y.mean()) - b * tm
    resid = y - (a + b * t)
    dof = max(len(t) - 2, 1)
    se = math.sqrt(float(resid @ resid) / dof / sxx)
    return b, se, a, resid


def measure_tone(
    samples: ArrayLike,
    sample_rate: float,
    reference_hz: float,
    *,
    max_offset: float = MAX_OFFSET,
    steady_ppm: float = STEADY_PPM,
) -> ToneFrequency:
    """The frequency of a long steady tone near ``reference_hz``, with its standard error.

    Parameters
    ----------
    samples : array_like, shape (n,), float
        The recording, mono; at least :data:`MIN_TONE_S` seconds (10 s or more for a
        calibration).
    sample_rate : float > 0, Hz
        Nominal sample rate of the recording.
    reference_hz : float > 0, Hz
        The stated frequency of the tone.
    max_offset : float > 0
        Largest relative distance between the stated and the found frequency (default 1 %).
    steady_ppm : float > 0, ppm
        Largest distance of a quarter's frequency from the whole's (beyond five of its
        standard errors).

    Returns
    -------
    ToneFrequency

    Raises
    ------
    ValueError
        One line: too short, silent, no tone within ``max_offset`` of ``reference_hz``, a
        level that comes and goes, or a frequency that wanders.

    Notes
    -----
    Method: the module docstring (interpolated FFT peak, then the phase slope over the whole
    recording by least squares; Cramer-Rao bound of Rife & Boorstyn 1974 as the floor of the
    standard error). Segments are contiguous and Hann-windowed, so their phase errors are
    independent and the fit's standard error holds; the window costs a factor ~1.2 in standard
    deviation against the bound for white noise.

    Examples
    --------
    >>> sr = 48000
    >>> t = np.arange(5 * sr) / sr
    >>> tone = measure_tone(np.sin(2 * np.pi * 440.01 * t), sr, 440.0)
    >>> round(tone.freq_hz, 6)
    440.01
    """
    x = np.asarray(samples, dtype=np.float64)
    if x.ndim != 1:
        raise ValueError(f"samples must be one channel (1-D), got shape {x.shape}")
    if not (math.isfinite(sample_rate) and sample_rate > 0):
        raise ValueError(f"sample_rate {sample_rate} Hz must be above 0")
    if not (math.isfinite(reference_hz) and _LOW_HZ <= reference_hz < 0.45 * sample_rate):
        raise ValueError(
            f"reference frequency {reference_hz} Hz is outside {_LOW_HZ:g}-{0.45 * sample_rate:g} Hz at "
            f"{sample_rate:g} Hz; give the tone's frequency in Hz"
        )
    duration_s = len(x) / sample_rate
    if duration_s < MIN_TONE_S:
        raise ValueError(f"the recording lasts {duration_s:.2f} s; record at least {MIN_TONE_S:g} s of the tone (10 s or more)")
    if not np.isfinite(x).all():
        raise ValueError("the recording holds NaN or infinite samples; record the tone again")
    x = x - x.mean()
    power = float(x @ x) / len(x)
    if power <= 0.0:
        raise ValueError("the recording is silent; play the reference tone while recording")

    # the peak near the stated frequency; the strongest peak anywhere only names a wrong tone
    top_hz, coarse_hz, below_db = _coarse_peaks_hz(x, sample_rate, reference_hz * (1 - 2 * max_offset),
                                                   reference_hz * (1 + 2 * max_offset))  # fmt: skip
    if below_db > _NEAR_PEAK_DB or abs(coarse_hz / reference_hz - 1.0) > max_offset:
        found_hz = top_hz if below_db > _NEAR_PEAK_DB else coarse_hz
        cents = 1200 * math.log2(found_hz / reference_hz)
        raise ValueError(
            f"the strongest tone is at {found_hz:.2f} Hz, {cents:+.0f} cents from the stated {reference_hz:g} Hz "
            f"(more than {100 * max_offset:g} %); check --reference-hz or the tone played"
        )

    seg_len = int(min(_MAX_SEGMENT_S * sample_rate, len(x) // MIN_SEGMENTS))
    n_seg = len(x) // seg_len
    omega = 2 * math.pi * coarse_hz / sample_rate
    for _ in range(2):  # the second pass demodulates at the refined frequency: small residual phases
        centres, phases, amplitude = _segment_phases(x, omega, seg_len, n_seg)
        slope, slope_se, _, resid = _line_fit(centres, phases)
        omega += slope

    median_amp = float(np.median(amplitude))
    low = np.flatnonzero((amplitude < median_amp / _LEVEL_SPREAD) | (amplitude > median_amp * _LEVEL_SPREAD))
    if median_amp <= 0 or low.size:
        at_s = centres[low[0]] / sample_rate if low.size else 0.0
        raise ValueError(
            f"the tone is not steady: its level changes more than {20 * math.log10(_LEVEL_SPREAD):.0f} dB "
            f"(first at {at_s:.1f} s); record a tone that sounds evenly all through"
        )

    # Additive noise moves a segment's complex amplitude as much across (phase) as along
    # (level); a frequency that wanders moves only the phase. Phase scatter well beyond the
    # level's is a wandering tone, whatever the noise's spectrum near it.
    phase_rms = float(np.sqrt(np.mean(resid**2)))
    level_rel = float(np.std(amplitude) / np.mean(amplitude))
    if phase_rms > min(max(_WANDER_RATIO * level_rel, _PHASE_FLOOR_RAD), _PHASE_LIMIT_RAD):
        raise ValueError(
            f"the tone is not steady: its phase wanders {phase_rms:.2f} rad rms about a steady tone's "
            f"(level scatter {100 * level_rel:.0f} %); use a steady, clean reference "
            "(a played note or a moving microphone will not do)"
        )

    freq_hz = omega * sample_rate / (2 * math.pi)
    fit_se_hz = slope_se * sample_rate / (2 * math.pi)
    if abs(freq_hz / reference_hz - 1.0) > max_offset:
        cents = 1200 * math.log2(freq_hz / reference_hz)
        raise ValueError(
            f"the tone reads {freq_hz:.3f} Hz, {cents:+.0f} cents from the stated {reference_hz:g} Hz "
            f"(more than {100 * max_offset:g} %); check --reference-hz or the tone played"
        )

    # steadiness: each quarter's own phase slope against the whole's
    q = n_seg // 4
    spread_ppm = 0.0
    for i in range(4):
        sl = slice(i * q, (i + 1) * q)
        q_slope, q_se, _, _ = _line_fit(centres[sl], phases[sl])
        q_slope -= slope  # phases were taken at the previous omega; slope is the last refinement
        dist_ppm = abs(q_slope) / omega * 1e6
        allowed_ppm = steady_ppm + 5 * q_se / omega * 1e6
        spread_ppm = max(spread_ppm, dist_ppm)
        if dist_ppm > allowed_ppm:
            q_hz = (omega + q_slope) * sample_rate / (2 * math.pi)
            raise ValueError(
                f"the tone is not steady: quarter {i + 1} of the recording reads {q_hz:.4f} Hz, "
                f"{dist_ppm:.0f} ppm from the whole's {freq_hz:.4f} Hz (limit {allowed_ppm:.0f}); "
                "use a steady reference and keep still while it sounds"
            )

    amp = median_amp
    n = float(n_seg * seg_len)
    noise_var = max(power - amp**2 / 2.0, power * 1e-12)
    snr = amp**2 / (2.0 * noise_var)
    crb_omega = math.sqrt(12.0 / (snr * n * (n * n - 1.0)))
    crb_hz = crb_omega * sample_rate / (2 * math.pi)
    return ToneFrequency(
        freq_hz=freq_hz,
        freq_se_hz=max(fit_se_hz, crb_hz),
        fit_se_hz=fit_se_hz,
        crb_hz=crb_hz,
        snr_db=10 * math.log10(snr),
        duration_s=n / sample_rate,
        segments=n_seg,
        quarter_spread_ppm=spread_ppm,
    )


def fit_frame_rate(time_s: ArrayLike, frames: ArrayLike, *, reject_late: bool = True, parts: int = 8) -> FrameRateFit:
    """Fit ``frames = a + rate * time_s`` by least squares over the whole run.

    Parameters
    ----------
    time_s : array_like, shape (n,), seconds
        Reference-clock times (the system's monotonic clock) at which ``frames`` were counted.
    frames : array_like, shape (n,)
        Frames the device had delivered by then.
    reject_late : bool
        Leave out points more than 6 median absolute deviations off a first fit, then fit
        again. A callback run late (the machine busy) is counted at a later time than its
        frames arrived; such delays are one-sided outliers that would tilt the line.
    parts : int >= 2
        Contiguous parts (equal numbers of points) whose own slopes give the second standard
        error (batch means; needs 5 points a part).

    Returns
    -------
    FrameRateFit

    Raises
    ------
    ValueError
        Fewer than 10 points, times not increasing, or no time spanned.

    Examples
    --------
    >>> t = np.arange(1000) * 0.01
    >>> fit = fit_frame_rate(t, 48004.8 * t + 7.0)
    >>> round(fit.rate_hz, 6), fit.points
    (48004.8, 1000)
    """
    t = np.asarray(time_s, dtype=np.float64)
    f = np.asarray(frames, dtype=np.float64)
    if t.shape != f.shape or t.ndim != 1:
        raise ValueError(f"time_s {t.shape} and frames {f.shape} must be 1-D and the same length")
    if len(t) < 10:
        raise ValueError(f"{len(t)} points are too few to fit a rate; count for longer (10 points at least)")
    if not (np.isfinite(t).all() and np.isfinite(f).all()):
        raise ValueError("times and frame counts must be finite")
    if np.any(np.diff(t) < 0) or t[-1] <= t[0]:
        raise ValueError("times must increase; give monotonic-clock times in the order counted")
    t0 = t[0]
    tt = t - t0  # small numbers for the fit
    rate, se, _, resid = _line_fit(tt, f)
    if reject_late:
        mad = float(np.median(np.abs(resid - np.median(resid))))
        keep = np.abs(resid - np.median(resid)) <= 6 * 1.4826 * mad if mad > 0 else np.ones(len(t), bool)
        if keep.sum() >= 10 and not keep.all():
            tt, f = tt[keep], f[keep]
            rate, se, _, resid = _line_fit(tt, f)
    parts_se = 0.0
    if parts >= 2 and len(tt) >= 5 * parts:
        bounds = np.linspace(0, len(tt), parts + 1).astype(int)
        fits = [_line_fit(tt[a:b], f[a:b]) for a, b in itertools.pairwise(bounds)]
        slopes = np.array([fit[0] for fit in fits])
        own_var = float(np.mean([fit[1] ** 2 for fit in fits]))  # what independent scatter explains
        excess_var = float(np.var(slopes, ddof=1)) - own_var
        parts_se = math.sqrt(max(excess_var, 0.0) / parts)
    return FrameRateFit(
        rate_hz=rate,
        rate_se_hz=math.hypot(se, parts_se),
        fit_se_hz=se,
        parts_se_hz=parts_se,
        duration_s=float(tt[-1] - tt[0]),
        points=len(tt),
        residual_rms_frames=float(math.sqrt(float(resid @ resid) / len(resid))),
    )
