"""The analyser's one compiled call per chunk of frames: copy, FFT, measure, hold, register.

:func:`analyse_chunk` takes up to a chunk of frames out of the analyser's sample store, in
single precision (rounding noise ~1e-7 of the peak, far under any microphone's floor); takes
their FFTs (pocketfft, called from inside numba through rocket-fft; one per frame, the newest
half window's spectrum is read out of it); measures each frame
(:func:`dsp.measure.measure_frames`); keeps a sounding note voiced on weaker evidence
(hysteresis); ends the reading with the note (:func:`dsp.voicing.end_of_note`: the tail
in a room is no note); steps the register monitor (:func:`dsp.register.monitor_update`); and, once a
jump is past a frame's centre while the window still shows the held note (reverberation),
measures the frame's pitch on the harmonics of mode x held note. One row of ``out`` per
frame; Python only turns the rows into :class:`dsp.frame.Frame` objects. The monitor's jump
code goes into the row as it is, the cracked-attack mark on steady frames included.

numba caches each kernel against its own file only: this file changes with the monitor's
state layout (dsp/register.py) so that no stale compiled call outlives a merge.
"""

from __future__ import annotations

import math

import numpy as np
import rocket_fft  # noqa: F401  (registers scipy.fft for numba)
import scipy.fft
from numba import njit
from numpy.typing import NDArray

from dsp.harmonics import N_REPORTED, balance_row
from dsp.measure import (
    CURVATURE_GAIN,
    CURVATURE_NOISE,
    FIT_SNR_DB,
    N_FIT_HARMONICS,
    N_SEGMENTS,
    copy_frames,
    measure_frames,
)
from dsp.pitch import refine_f0
from dsp.register import (
    EVIDENCE_MODES,
    JUMPED,
    NO_JUMP,
    OUT_HELD,
    OUT_JUMP,
    OUT_MODE,
    OUT_REGISTER,
    UNVOICED,
    cents_apart,
    monitor_update,
)
from dsp.voicing import end_of_note

__all__ = [
    "N_OUT",
    "O_CLARITY",
    "O_CLIP",
    "O_F0",
    "O_H1",
    "O_HELD",
    "O_JUMP",
    "O_LEVEL",
    "O_ODD_EVEN",
    "O_REGISTER",
    "analyse_chunk",
    "chunk_params",
    "store_block",
]

# columns of a frame's row in ``out``: f0 (Hz, nan unvoiced), clarity (0..1), level (dBFS),
# clipped (0/1), odd/even (dB, nan unvoiced), register and jump codes (dsp.register), held
# note (Hz, nan none), H1..H8 (dB re the strongest, nan unvoiced)
O_F0, O_CLARITY, O_LEVEL, O_CLIP, O_ODD_EVEN, O_REGISTER, O_JUMP, O_HELD, O_H1 = 0, 1, 2, 3, 4, 5, 6, 7, 8
N_OUT = O_H1 + N_REPORTED

# the scalar parameters, in one vector
_P_RATE, _P_LO_BIN, _P_HI_BIN, _P_FAST_KEEP, _P_LIMIT, _P_FMIN, _P_FMAX, _P_OVERRIDE, _P_HOLD = range(9)
# carried from chunk to chunk: the previous frame's f0 (Hz, nan none), frames jumped so far
CARRY_PREV_F0, CARRY_JUMPED_RUN = 0, 1


def chunk_params(
    sample_rate: float,
    lo_bin: int,
    hi_bin: int,
    fast_keep: int,
    limit_hz: float,
    fmin_hz: float,
    fmax_hz: float,
    override_frames: int,
    hold_cents: float,
) -> NDArray[np.float64]:
    """The parameter vector of :func:`analyse_chunk`.

    sample_rate, limit_hz, fmin_hz, fmax_hz in Hz; lo_bin, hi_bin: peak search bins
    ``lo_bin <= k < hi_bin``; fast_keep: bins of the half-window spectrum used;
    override_frames: jumped frames after which the pitch is measured at mode x held note;
    hold_cents: how far a frame on weaker evidence may sit from the previous voiced f0.
    """
    return np.array(
        [sample_rate, lo_bin, hi_bin, fast_keep, limit_hz, fmin_hz, fmax_hz, override_frames, hold_cents],
        dtype=np.float64,
    )


@njit(cache=True, nogil=True)
def analyse_chunk(
    store: NDArray[np.float64],
    first: int,
    hop: int,
    x32: NDArray[np.float32],
    power: NDArray[np.float64],
    floor: NDArray[np.float64],
    params: NDArray[np.float64],
    hum_hz: NDArray[np.float64],
    half_offsets: NDArray[np.int64],
    half_weights: NDArray[np.complex128],
    cfg: NDArray[np.float64],
    st: NDArray[np.float64],
    hist: NDArray[np.float64],
    carry: NDArray[np.float64],
    voicing: NDArray[np.float64],
    out: NDArray[np.float64],
) -> None:
    """Analyse ``x32.shape[0]`` frames; frame ``i`` is ``store[first + i hop :][:n]``, n = ``x32.shape[1]``.

    Parameters
    ----------
    store : 1-D float64, full scale 1.0
        Samples.
    x32, power, floor : work arrays (n_frames, n) float32, (n_frames, keep) float64
        Frames in single precision; Hann power and noise floor of each frame.
    params : :func:`chunk_params`
    hum_hz : (2, k), Hz
        Mains bands rejected (lower and upper edges).
    half_offsets, half_weights : :func:`dsp.spectrum.newest_half_taps` of n
    cfg, st, hist : the register monitor's arrays (:class:`dsp.register.RegisterMonitor`)
    carry : float64 (2,), updated
        Previous frame's f0 and the count of jumped frames, from the last chunk.
    voicing : float64 (:data:`dsp.voicing.N_VOICING_STATE`,), updated
        State of the end-of-note rule (:func:`dsp.voicing.end_of_note`).
    out : (n_frames, N_OUT) out
        One row per frame (the ``O_*`` columns).
    """
    n_frames, n = x32.shape
    sr = params[_P_RATE]
    limit_hz = params[_P_LIMIT]
    override = params[_P_OVERRIDE]
    hold = params[_P_HOLD]
    copy_frames(store, first, hop, x32)
    rect = scipy.fft.rfft(x32)
    f0_a = np.empty(n_frames)
    clarity_a = np.empty(n_frames)
    level_a = np.empty(n_frames)
    fast_level_a = np.empty(n_frames)
    clip_a = np.empty(n_frames, dtype=np.bool_)
    voiced_a = np.empty(n_frames, dtype=np.bool_)
    sustain_a = np.empty(n_frames, dtype=np.bool_)
    harm_db_a = np.empty((n_frames, N_REPORTED))
    odd_even_a = np.empty(n_frames)
    evidence_a = np.empty((n_frames, EVIDENCE_MODES, 4))
    seg_ms_a = np.empty((n_frames, 2 * N_SEGMENTS))
    kept_db_a = np.empty(n_frames)
    upper_off_a = np.empty((n_frames, 2))
    measure_frames(
        store, first, hop, n, rect, half_offsets, half_weights, sr, int(params[_P_LO_BIN]), int(params[_P_HI_BIN]),
        int(params[_P_FAST_KEEP]), limit_hz, params[_P_FMIN], params[_P_FMAX], hum_hz[0], hum_hz[1], power, floor,
        f0_a, clarity_a, level_a, fast_level_a, clip_a, voiced_a, sustain_a, harm_db_a, odd_even_a, evidence_a,
        seg_ms_a, kept_db_a, upper_off_a,
    )  # fmt: skip
    seg_s = n / N_SEGMENTS / sr
    hop_s = hop / sr
    amp = np.empty(N_FIT_HARMONICS)
    prev = carry[CARRY_PREV_F0]
    jumped_run = carry[CARRY_JUMPED_RUN]
    for i in range(n_frames):
        f0 = f0_a[i] if voiced_a[i] else np.nan
        if math.isnan(f0) and not math.isnan(prev) and sustain_a[i] and cents_apart(f0_a[i], prev) <= hold:
            f0 = f0_a[i]
        f0 = end_of_note(voicing, f0, seg_ms_a[i], kept_db_a[i], seg_s, hop_s)  # the tail of a stopped note is not the note
        monitor_update(cfg, st, hist, f0, evidence_a[i], fast_level_a[i], upper_off_a[i])
        row = out[i]
        held = st[OUT_HELD]
        harm = row[O_H1 : O_H1 + N_REPORTED]
        if math.isnan(f0):
            jumped_run = 0.0
        else:
            jumped_run = jumped_run + 1.0 if st[OUT_REGISTER] == JUMPED else 0.0
            mode = st[OUT_MODE]
            if (
                mode > 1
                and not math.isnan(held)
                and jumped_run > override
                and cents_apart(f0, held) <= 50.0
            ):
                # the held note's odd harmonics may linger (reverberation) while the
                # octave sounds, and the pitch reads the held note: measure the sounding
                # note at mode x held. Only once the change is past this frame's centre:
                # the monitor judges the newest half window, whose centre leads this
                # frame's by a quarter window
                f0, _ = refine_f0(
                    rect[i], power[i], floor[i], mode * held, sr / n, n, limit_hz, amp, FIT_SNR_DB, CURVATURE_GAIN,
                    CURVATURE_NOISE,
                )  # fmt: skip
                if math.isfinite(f0):
                    row[O_ODD_EVEN] = balance_row(amp, harm)
                else:
                    f0 = np.nan
            else:
                harm[:] = harm_db_a[i]
                row[O_ODD_EVEN] = odd_even_a[i]
        prev = f0
        voiced = not math.isnan(f0)
        if not voiced:
            harm[:] = np.nan
            row[O_ODD_EVEN] = np.nan
        row[O_F0] = f0
        row[O_CLARITY] = clarity_a[i]
        row[O_LEVEL] = level_a[i]
        row[O_CLIP] = 1.0 if clip_a[i] else 0.0
        row[O_REGISTER] = st[OUT_REGISTER] if voiced else UNVOICED
        row[O_JUMP] = st[OUT_JUMP] if voiced else NO_JUMP
        row[O_HELD] = held
    carry[CARRY_PREV_F0] = prev
    carry[CARRY_JUMPED_RUN] = jumped_run


@njit(cache=True, nogil=True)
def store_block(store: NDArray[np.float64], at: int, x: NDArray[np.floating]) -> int:
    """Copy ``x`` into ``store[at:]``; return the index of its first non-finite sample, else -1."""
    bad = -1
    for j in range(x.size):
        v = x[j]
        if not math.isfinite(v) and bad < 0:
            bad = j
        store[at + j] = v
    return bad
