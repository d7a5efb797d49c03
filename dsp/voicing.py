"""The end of a note: a reading ends when the direct sound stops, not when the room falls silent.

In a room the analyser's ~85 ms window goes on holding a clean periodic tone after the
player stops: the reverberant tail, which decays at the room's rate (60 dB in T60, the
definition of the reverberation time: Sabine, *Collected Papers on Acoustics*, 1922; ISO
3382-1:2009) and passes every voicing test of :mod:`dsp.measure` for up to half a second.
:func:`end_of_note` ends the reading causally, per frame, from what that frame's window
already holds: the mean squares of its 8 equal segments (:data:`dsp.measure.N_SEGMENTS`,
~10.7 ms each at 48 kHz; segment 0 the oldest, the frame's centre between segments 3 and 4),
the same of the samples' first difference (which weights each partial by f^2), and how well
the best-kept harmonic holds in the newest half window (``kept_db``).

The room's steady noise is taken out of every segment's level before rules 1 and 2 (and the
steadiness of rule 3) are asked: its mean square is the quietest segment seen, allowed to
rise :data:`NOISE_RISE_DB_PER_S` while no note sounds (a minimum tracker after Martin, IEEE
Trans. Speech Audio Process. 9(5), 2001), and a level with the noise out never reads under
:data:`NOISE_KEEP` of it (a tail sunk into the noise reads ragged, not steady). Without
this, a tail 5-10 dB over a noisy room's floor falls too slowly to be seen. Where broadband
noise covers the differenced level (its level before the fall under :data:`DIFF_CLEAR`
times its noise), rules 1 and 2 ask the plain level alone.

Levels (dB) of a frame: ``pre`` = segments 2-3 (the ~21 ms before the centre), ``at`` =
segment 4 (the ~11 ms after it), ``after`` = the loudest of segments 5-7.

1. **Stop** (the direct sound ended by this frame's centre): ``at <= pre - STOP_AT_DB``
   (0.5 dB) and ``after <= pre - STOP_AFTER_DB`` (3.5 dB), in the plain *and* the
   differenced levels (or rule 2 in the latter), and every harmonic of the note within
   15 dB of its strongest has fallen ``KEPT_DB`` (1 dB) in the newest half window. A
   diminuendo (10-20 dB/s: 0.8 dB over 40 ms) and a slurred step (level kept) do not do
   this; a register change's fading harmonics (the odd ones before an octave, all but the
   multiples of 3 before a twelfth) leave the kept ones standing; a room's swing of the
   level under a vibrato (the room's response differs from one frequency to the next)
   does not move the plain and the differenced levels alike.
2. **Free decay** (a stop into a wet room, whose step is small): ``at`` is ``DECAY_DB``
   (3 dB) or more under ``peak`` (the highest ``pre`` of the note, allowed to fall
   ``PEAK_FALL_DB_PER_S``, 30 dB/s, faster than any diminuendo) while the least-squares
   slope of segments 2-7 is ``DECAY_SLOPE_DB_PER_S`` (60 dB/s: a T60 of 1 s) or steeper,
   in both level sets, and ``kept_db <= -KEPT_DECAY_DB`` (0.5 dB).
3. After either, this frame and those that follow are unvoiced (the *ended* state) until
   one of: ``at`` rises ``BACK_RISE_DB`` (3 dB) over its lowest since the end *and* is back
   within ``BACK_NEAR_DB`` (4 dB) of the note's level (a dip recovers, a tail does not climb
   back); ``at`` stands ``FRESH_RISE_DB`` (6 dB) over the loudest of segments 0-2 (a new
   note out of a tail); the whole window's segments stay within ``STEADY_DB`` (3 dB) of
   each other for ``STEADY_FRAMES`` (10) frames in a row at a level within
   ``STEADY_NEAR_DB`` (20 dB) of the ended note's (a new, softer note under the dying tail:
   a free decay falls >= 6.4 dB across the window for T60 <= 0.8 s); or the measure has
   found no tone for ``QUIET_FRAMES`` (20) frames.

Handling noise that rings (a thump or a click in a room) ends by rule 2 as it decays.

Constants were set on constructed scenes (tests/dsp/test_voicing_field.py, tuning seeds
1000-1099 only). Known limits: a note that weakens into an overblow in a reverberant room
with vibrato can be ended ~0.1 s before the octave sounds (the room's swing of the kept even
harmonics hides them), so the octave reads as a new note; a dip as steep as a free decay
(8 dB in 60 ms) ends the reading until the level climbs back; where the tail is as loud as the direct sound the stop is a
~3 dB step and may be found up to ~100 ms late; in rooms with T60 well over 1 s a tail can
look steady and voice again; staccato gaps shorter than ~60 ms stay partly voiced; the
rising edge of a low thump (a lone partial, 30-120 Hz) still reads as a tone for a few
frames. Per frame: a few dozen flops on levels already measured (one more running sum in
the measure's pass over the samples). State: one float64 vector of :data:`N_VOICING_STATE`,
carried across chunks and cleared by :func:`voicing_reset`.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit
from numpy.typing import NDArray

from dsp.measure import N_SEGMENTS

__all__ = [
    "BACK_NEAR_DB",
    "BACK_RISE_DB",
    "DECAY_DB",
    "DECAY_SLOPE_DB_PER_S",
    "DIFF_CLEAR",
    "FRESH_RISE_DB",
    "KEPT_ALL_DB",
    "KEPT_DB",
    "KEPT_DECAY_DB",
    "NOISE_KEEP",
    "NOISE_RISE_DB_PER_S",
    "N_VOICING_STATE",
    "PEAK_FALL_DB_PER_S",
    "QUIET_FRAMES",
    "STEADY_DB",
    "STEADY_FRAMES",
    "STEADY_NEAR_DB",
    "STOP_AFTER_DB",
    "STOP_AT_DB",
    "end_of_note",
    "voicing_reset",
]

STOP_AT_DB = 0.5
"""Fall of the segment after the centre under the ~21 ms before it, dB (rule 1)."""
STOP_AFTER_DB = 3.5
"""Fall of the loudest of the newest three segments under the same, dB (rule 1)."""
DECAY_DB = 3.0
"""Fall of the level at the centre under the note's peak, dB (rule 2)."""
DECAY_SLOPE_DB_PER_S = 60.0
"""Slope of a free decay over the newer 3/4 window, dB/s (rule 2): 60 dB / T60 for T60 <= 1 s; a
diminuendo (10-20 dB/s) is far slower."""
PEAK_FALL_DB_PER_S = 30.0
"""Fastest fall the note's peak follows, dB/s: over a 10-20 dB-per-second diminuendo."""
BACK_RISE_DB = 3.0
"""Rise of the level at the centre over its lowest since the end that voices again, dB."""
BACK_NEAR_DB = 4.0
"""... provided it is back within this of the note's level, dB."""
FRESH_RISE_DB = 6.0
"""Rise of the level at the centre over the loudest of segments 0-2: a new note, dB."""
KEPT_DB = 1.0
"""Every harmonic of the note must have fallen at least this far in the newest half window, dB."""
KEPT_DECAY_DB = 0.5
"""The same for a free decay (rule 2), dB (a decaying harmonic reads its newest half under the
whole window; a held one, ~0 dB)."""
STEADY_DB = 3.0
"""Spread of the window's segment levels under which a tone is steady, not a tail, dB: a
free decay falls 60 dB / T60, >= 6.4 dB over the window for T60 <= 0.8 s."""
STEADY_NEAR_DB = 20.0
"""... at a level within this of the ended note's (a tail steady in the room noise is not), dB."""
STEADY_FRAMES = 10
"""Frames in a row (50 ms at a 5 ms hop) a window must be steady to voice after an end."""
QUIET_FRAMES = 20
"""Frames without a tone that forget an ended note (100 ms at a 5 ms hop)."""

NOISE_RISE_DB_PER_S = 3.0
"""Fastest rise of the room-noise estimate while no note sounds, dB/s (it falls at once)."""
KEPT_ALL_DB = 6.0
"""Fall of every harmonic in the newest half window that stands for the differenced level (rules
1, 2), dB: a thump's low ring decays 2-9 dB per segment under broadband noise that hides it in
the differenced level; a room's swing under a vibrato does not take every harmonic this far."""
DIFF_CLEAR = 4.0
"""The differenced level must stand this far over its room noise (6 dB) to be asked (rules 1, 2)."""
NOISE_KEEP = 0.01
"""A segment's level with the room noise taken out never reads under this share of the noise
(-20 dB): a tail that has sunk into the noise reads ragged, not level."""

N_VOICING_STATE = 8
_ENDED, _QUIET, _END_DB, _LOW_DB, _PEAK_D_DB, _STEADY, _NOISE, _NOISE_D = range(N_VOICING_STATE)
_PEAK_DB = _END_DB  # while a note sounds, the same slot holds its peak
_TINY = 1e-30


@njit(cache=True, nogil=True)
def voicing_reset(state: NDArray[np.float64]) -> None:
    """No note yet, and no room noise measured."""
    _forget(state)
    state[_NOISE] = np.nan
    state[_NOISE_D] = np.nan


@njit(cache=True, nogil=True)
def _forget(state: NDArray[np.float64]) -> None:
    """No note (the room noise stays measured)."""
    state[_ENDED] = 0.0
    state[_QUIET] = 0.0
    state[_END_DB] = -np.inf
    state[_LOW_DB] = np.inf
    state[_PEAK_D_DB] = -np.inf
    state[_STEADY] = 0.0


@njit(cache=True, nogil=True)
def _db(ms: float) -> float:
    """Mean square to dB."""
    return 10.0 * math.log10(max(ms, _TINY))


@njit(cache=True, nogil=True)
def _falls(seg_ms: NDArray[np.float64], first: int, peak_db: float, seg_s: float) -> tuple[bool, bool, float]:
    """(stop, free decay, pre) on the levels ``seg_ms[first : first + N_SEGMENTS]`` (rules 1, 2)."""
    pre = _db(0.5 * (seg_ms[first + 2] + seg_ms[first + 3]))
    at = _db(seg_ms[first + 4])
    after = _db(max(seg_ms[first + 5], max(seg_ms[first + 6], seg_ms[first + 7])))
    stop = at <= pre - STOP_AT_DB and after <= pre - STOP_AFTER_DB
    decay = False
    if at <= max(pre, peak_db) - DECAY_DB:
        # least-squares slope of segments 2..7 (offsets -2.5..2.5 about their middle)
        s = 0.0
        for k in range(2, N_SEGMENTS):
            s += (k - 4.5) * _db(seg_ms[first + k])
        decay = s / 17.5 / seg_s <= -DECAY_SLOPE_DB_PER_S
    return stop, decay, pre


@njit(cache=True, nogil=True)
def _without_noise(state: NDArray[np.float64], seg_ms: NDArray[np.float64], voiced: bool,
                   hop_s: float) -> NDArray[np.float64]:
    """``seg_ms`` less the room's steady noise, plain and differenced (updates the noise estimate).

    The noise is the quietest segment seen, allowed to rise :data:`NOISE_RISE_DB_PER_S` while
    no note sounds (a minimum tracker: Martin, IEEE Trans. Speech Audio Process. 9(5), 2001).
    It starts at the first frame's quietest segment and falls at once, so it errs high: a
    stream that starts on a note has its noise measured at the first rest (until then the
    note itself reads as noise, and only the harmonics' fall can end it). A room that grows
    louder while notes follow each other without a rest is followed at the next rest.
    """
    out = np.empty(2 * N_SEGMENTS)
    rise = 10.0 ** (NOISE_RISE_DB_PER_S * hop_s / 10.0)
    for half, slot in ((0, _NOISE), (N_SEGMENTS, _NOISE_D)):
        low = seg_ms[half]
        for k in range(1, N_SEGMENTS):
            low = min(low, seg_ms[half + k])
        noise = state[slot]
        if math.isnan(noise):
            noise = low
        elif not voiced:
            noise = min(noise * rise, low)
        else:
            noise = min(noise, low)
        state[slot] = noise
        for k in range(N_SEGMENTS):
            out[half + k] = max(seg_ms[half + k] - noise, NOISE_KEEP * noise)
    return out


@njit(cache=True, nogil=True)
def end_of_note(state: NDArray[np.float64], f0_hz: float, seg_ms: NDArray[np.float64], kept_db: float,
                seg_s: float, hop_s: float) -> float:
    """``f0_hz`` of this frame, or nan once the note has ended (rules in the module docstring).

    Parameters
    ----------
    state : float64 (N_VOICING_STATE,), updated
    f0_hz : float, Hz
        The frame's reading as measured (nan when unvoiced).
    seg_ms : float64 (2 N_SEGMENTS,), full scale 1.0
        Mean square of each equal segment of the window, oldest first; then the same of
        the first difference of the samples.
    kept_db : float, dB
        The best-kept harmonic's newest-half-window power re the whole window's
        (:func:`dsp.measure.measure_frames`): a stop lowers every harmonic, a register
        change's fading subset does not.
    seg_s, hop_s : float > 0, s
        Length of one segment; frame step.

    Returns
    -------
    float
        ``f0_hz``, or nan.

    Examples
    --------
    >>> st = np.empty(N_VOICING_STATE); voicing_reset(st)
    >>> steady = np.full(16, 1e-2)
    >>> end_of_note(st, 440.0, steady, 0.0, 0.0107, 0.005)
    440.0
    >>> stopped = np.tile([1e-2, 1e-2, 1e-2, 1e-2, 5e-3, 1e-3, 1e-3, 1e-3], 2)
    >>> math.isnan(end_of_note(st, 440.0, stopped, -3.0, 0.0107, 0.005))
    True
    """
    voiced = not math.isnan(f0_hz)
    tone_ms = _without_noise(state, seg_ms, voiced, hop_s)
    at = _db(seg_ms[4])
    if state[_ENDED] != 0.0:
        state[_QUIET] = 0.0 if voiced else state[_QUIET] + 1.0
        state[_LOW_DB] = min(state[_LOW_DB], at)
        back = at >= state[_LOW_DB] + BACK_RISE_DB and at >= state[_END_DB] - BACK_NEAR_DB
        fresh = at >= _db(max(seg_ms[0], max(seg_ms[1], seg_ms[2]))) + FRESH_RISE_DB
        lo_db = hi_db = _db(tone_ms[0])
        for k in range(1, N_SEGMENTS):
            lo_db = min(lo_db, _db(tone_ms[k]))
            hi_db = max(hi_db, _db(tone_ms[k]))
        # a free decay falls >= 6 dB across the window, and never stays level
        state[_STEADY] = state[_STEADY] + 1.0 if voiced and hi_db - lo_db <= STEADY_DB else 0.0
        steady = state[_STEADY] >= STEADY_FRAMES and at >= state[_END_DB] - STEADY_NEAR_DB
        if state[_QUIET] >= QUIET_FRAMES or (voiced and (back or fresh or steady)):
            _forget(state)
        else:
            return np.nan
    if not voiced:
        state[_PEAK_DB] = -np.inf
        state[_PEAK_D_DB] = -np.inf
        return f0_hz
    fall = PEAK_FALL_DB_PER_S * hop_s
    stop, decay, pre = _falls(tone_ms, 0, state[_PEAK_DB] - fall, seg_s)
    stop_d, decay_d, pre_d = _falls(tone_ms, N_SEGMENTS, state[_PEAK_D_DB] - fall, seg_s)
    peak = max(pre, state[_PEAK_DB] - fall)
    # where the room noise covers the differenced level, it cannot show the fall: the plain one decides
    if 0.5 * (seg_ms[N_SEGMENTS + 2] + seg_ms[N_SEGMENTS + 3]) < DIFF_CLEAR * state[_NOISE_D]:
        stop_d = decay_d = True
    if kept_db <= -KEPT_ALL_DB:  # every harmonic far down in the newest half: a knock's ring, whatever the noise
        stop_d = decay_d = True
    if (stop and (stop_d or decay_d) and kept_db <= -KEPT_DB) or (decay and decay_d and kept_db <= -KEPT_DECAY_DB):
        state[_ENDED] = 1.0
        state[_QUIET] = 0.0
        state[_END_DB] = _db(0.5 * (seg_ms[2] + seg_ms[3])) if stop else peak
        state[_LOW_DB] = at
        return np.nan
    state[_PEAK_DB] = peak
    state[_PEAK_D_DB] = max(pre_d, state[_PEAK_D_DB] - fall)
    return f0_hz
