"""Register monitor: follows the held (fingered) note and reports register jumps.

Physics (Fletcher & Rossing, *The Physics of Musical Instruments*, 1998): an open pipe
sounds all harmonics of its fingered note; when it jumps to the octave (mode 2) the
fingered note's fundamental and odd harmonics vanish and only the multiples of 2 f0
remain; the twelfth (mode 3) keeps only the multiples of 3 f0.

The monitor is judged frame by frame on spectral evidence measured *at the held note's
harmonics* (powers of harmonics k = 1..8 of the held note, taken from a short, recent
window), not on a smoothed pitch track:

* ``r2`` = odd / even energy of the held note (dB), ``r3`` = energy off / on the
  multiples of 3. Each has a baseline: a slow average (``baseline_s``) learnt while the
  note is steady.
* **jumped** (mode m = 2 or 3) when, in continuous tone, ``r_m`` falls at least
  ``collapse_db`` below its baseline *and* either the energy on the multiples of m rose by
  ``even_rise_db`` against ~100 ms earlier (the new mode's fundamental takes over; this
  holds in a reverberant room, where the held note's odd harmonics decay only slowly) or
  the collapse is total (``deep_collapse_db``). It is reported at the first such frame,
  or up to ``kind_wait_s`` later while the level still climbs (see kind, below). A jump
  holds through a lost frame and through a stray reading not yet confirmed as a new note;
  another upper mode after it is a new note.
* kind, judged on the frame that reports the jump (at most ``kind_wait_s``, 20 ms, after
  the jump is found, while the level still climbs ``rising_db_per_s``, 40 dB/s): **overblown** when the short-window level stands at least ``rise_db``
  (2.5 dB) above the *settled blowing level* of the held note, or stood so on its way into
  the change, else **vented**. Overblowing raises the blowing pressure: the level rises and
  the odd harmonics collapse before the upper mode takes over (Fletcher & Rossing 1998, the
  regime change); venting (thumb hole cracked open) keeps the level, within about -3..+2 dB
  (common practice). The settled level (dBFS) is learnt on the held note's intact
  first-register frames: followed through the warm-up, then a slow average (``baseline_s``)
  of the frames within ``settled_tol_db`` (1 dB) above it. It stops learning when the
  level climbs past that (the breath rising, 0-300 ms before a break, by 3-14 dB), going
  back to its value of 150 ms before, which the start of the rise had not moved; nor does
  it learn while the odd harmonics fade. The baselines of ``r2`` and ``r3`` stop learning
  with it. A level held above it for ``crescendo_s`` (0.4 s) is a crescendo, the new
  settled level. (Until 2026-12 the kind was judged against the level ~70-150 ms before
  the change, which a breath rising for 80-200 ms had already raised: overblown changes
  were told vented.) In a room the level of the upper mode's partials differs from the
  first mode's by how the room's response falls on them (several dB), so a vent near
  +2 dB can read overblown there; the rise on the way in is measured on the first mode's
  own partials, which the room colours alike before and during it. And overblown when the
  energy on the partials the new mode keeps (the evens, the multiples of 3) stood at least
  ``rise_db`` above its settled value ``_KEPT_LAG`` frames (45 ms) before the report: the
  breath raises all partials while the fading fundamental can hold the level down. Level
  alone is not trusted to find the jump.
* **cracked attack**: a note whose attack spoke its octave or twelfth (mode 2 or 3) for a
  few tens of ms before its fundamental (mode 1) took over. Seen in a note begun after
  silence, within ``crack_window_s`` (0.15 s) of its start, either as the pitch falling
  from the held note to its half or third (while the held note sounded, that lower note's
  odd harmonics, or those off the 3s, did not outweigh the kept ones), or,
  when the pitch named the fundamental from the start, as its own odd (off-3) harmonics
  rising ``_CRACK_RISE_DB`` (10 dB) from under ``_DOMINATED_DB`` (-3 dB) to outweigh the
  kept ones. The held note becomes the fundamental at once; the frames are "steady" in
  the first register, marked with the jump code CRACKED ("cracked") for ``crack_show_s``
  (0.25 s) from the report: no break of the breath, the note not broken. Reported ~30-50 ms
  after the fundamental takes over (by ready_s). Not judged while locked.
* **weakening** while ``r2`` sits ``weaken_db`` or more under its baseline without a jump
  (the odd harmonics fading toward collapse).
* a **new note** (held note replaced) on a voiced pitch that is no mode 1..3 of the held
  note for ``confirm_s``, or on the first voiced frame after ``silence_s`` of silence.
  With :meth:`RegisterMonitor.lock`, the target is the held note and never replaced.
* **no jump** while energy sits *between* the held note's harmonics (at 3/2, 4/3, 5/3 ...
  of it) within ``new_note_db`` of the harmonics a jump would keep: a note a fifth or a
  fourth up, slurred, shares some harmonics with the held note, but a register change
  sounds none between them. Nor while the pitch still reads the held note and the short
  window's peak near its 2nd (3rd) harmonic lies more than ``UPPER_OFF_CENTS`` (50 c) from
  it, or is missing: a seventh or a minor ninth up (a semitone beside the twelfth) arriving,
  whose fundamental the short window cannot part from the held note's harmonic by the
  power in a few bins alone. And while a note is still in its warm-up, a higher mode of
  it that persists for ``confirm_s`` becomes the held note (the first reading was a
  passing one, such as the common sub-multiple of two overlapping notes in a room).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numba import njit
from numpy.typing import NDArray

from dsp.frame import JumpKind

__all__ = [
    "EVIDENCE_HARMONICS",
    "EVIDENCE_MODES",
    "UPPER_OFF_CENTS",
    "RegisterMonitor",
    "RegisterReading",
    "cents_apart",
    "monitor_arrays",
    "monitor_config",
    "monitor_lock",
    "monitor_reset",
    "monitor_update",
    "summarise_row",
]

EVIDENCE_HARMONICS = 8
"""Harmonics of the held note in each evidence row."""

EVIDENCE_MODES = 3
"""Evidence rows: held = sounding / m for m = 1..3."""

_TINY = 1e-30
UPPER_OFF_CENTS = 50.0
"""Farthest the sounding upper mode lies from the held note's harmonic, cents: as for the
pitch reading's relation to the held note (a slurred seventh up is 100 c off the octave)."""
# Vanishing harmonics at least this far under the kept ones, dB. Benchmark corpus: true jumps
# read -6.6 dB and lower at detection; a note's end in a reverberant room (its octave
# outlasting the fundamental) read +1.2 and -0.5 dB, and was taken for a vent at +3 dB.
_DOMINATED_DB = -3.0
# Rise of a young note's odd (off-3) harmonics, from a ratio under _DOMINATED_DB, that shows
# its fundamental took over from a cracked attack, dB. On the constructed signals of
# tests/dsp/test_register_field.py (tuning seeds 1000-1069): 40 of 40 cracks of 40-60 ms
# found, none on 30 plain attacks (10 ms - 50 ms rise), dry and in rooms.
_CRACK_RISE_DB = 10.0
# Frames (5 ms each) before a jump's report at which the kept partials' rise is read: a
# vent's new mode, crossfading for ~30 ms before it is found (and in the 43 ms evidence
# window before that), has not yet added to them. Tuning seeds only: 6 and 12 frames were
# tried on the field scenes (benchmarks/corpus.py rise-break, vents, seeds 1000-1029) and on
# tests/dsp/test_register_field.py; 9 told every field change right.
_KEPT_LAG = 9


@dataclass(frozen=True, slots=True)
class RegisterReading:
    """Monitor output for one frame.

    Attributes
    ----------
    register : "steady" | "weakening" | "jumped" | None
        None when unvoiced.
    jump : "overblown" | "vented" | "cracked" | None
        "cracked" marks steady frames just after a cracked attack (see the module).
    held_f0_hz : float or None, Hz
        Held (fingered) note; the lock target when locked.
    mode : int
        Sounding mode relative to the held note (1, 2, 3); 0 when unvoiced.
    """

    register: Literal["steady", "weakening", "jumped"] | None
    jump: JumpKind | None
    held_f0_hz: float | None
    mode: int


@njit(cache=True, nogil=True)
def summarise_row(powers: NDArray[np.float64], out: NDArray[np.float64]) -> None:
    """Energy sums of the held note's harmonics, in dB, for each mode hypothesis.

    ``powers`` (3, 8): powers at harmonics k = 1..8 of the held note under the hypotheses
    "the pipe sounds mode m" (m = 1..3). ``out`` (3, 4), dB: per hypothesis, the odd
    harmonics, the even ones, those off the multiples of 3, those on them.

    Examples
    --------
    >>> out = np.empty((3, 4))
    >>> summarise_row(np.tile([1.0, 0.1, 0.01, 0.1, 0.0, 0.0, 0.0, 0.0], (3, 1)), out)
    >>> out[0].round(2).tolist()
    [0.04, -6.99, 0.79, -20.0]
    """
    for m in range(EVIDENCE_MODES):
        p = powers[m]
        odd = p[0] + p[2] + p[4] + p[6]
        even = p[1] + p[3] + p[5] + p[7]
        on3 = p[2] + p[5]
        off3 = p[0] + p[1] + p[3] + p[4] + p[6] + p[7]
        out[m, 0] = 10.0 * math.log10(odd + _TINY)
        out[m, 1] = 10.0 * math.log10(even + _TINY)
        out[m, 2] = 10.0 * math.log10(off3 + _TINY)
        out[m, 3] = 10.0 * math.log10(on3 + _TINY)


# -- the monitor's state, in flat arrays a compiled step can update --------------------------
# configuration (float64 vector)
_C_COLLAPSE, _C_DEEP, _C_COLLAPSED_RATIO, _C_EVEN_RISE, _C_WEAKEN, _C_RISE = 0, 1, 2, 3, 4, 5
_C_SILENCE, _C_CONFIRM, _C_WARMUP, _C_ALPHA, _C_WEAK, _C_REF_FAR, _C_REF_NEAR = 6, 7, 8, 9, 10, 11, 12
_C_NEW_NOTE, _C_GRID_SPACING, _C_KIND_WAIT, _C_RISING, _C_FADE_SPAN, _C_FADE_DB = 13, 14, 15, 16, 17, 18
_C_SETTLED_TOL, _C_CRESCENDO, _C_CRACK_WINDOW, _C_CRACK_SHOW = 19, 20, 21, 22
_N_CONFIG = 23
# state (float64 vector; nan stands for "none"; counters are whole numbers)
_S_TARGET, _S_HELD, _S_STATE, _S_JUMP, _S_MODE, _S_UNVOICED, _S_PENDING, _S_PENDING_RUN = 0, 1, 2, 3, 4, 5, 6, 7
_S_IN_NOTE, _S_BASE_R2, _S_BASE_R3, _S_WEAK_RUN, _S_BACK_RUN, _S_HIST_POS, _S_RISE_PEAK, _S_SETTLED_LEVEL = (
    8, 9, 10, 11, 12, 13, 14, 15,
)
# the last reading: register code, jump code, held note (Hz, nan none), mode
OUT_REGISTER, OUT_JUMP, OUT_HELD, OUT_MODE = 16, 17, 18, 19
_S_KIND_WAITED = 20  # frames a jump's report waited for a still-rising level
# frames the level has stood above the settled level (_S_SETTLED_LEVEL, dBFS, nan none; the
# highest level of that stretch in _S_RISE_PEAK, dBFS);
# frames the "cracked" mark has still to show; over the young note's frames, the lowest
# odd/even ratio of its sub-octave and off/on-3 ratio of its sub-twelfth, and the lowest of
# its own two ratios (dB): how absent a lower fundamental, or its own odd (off-3) harmonics, were
_S_ABOVE_RUN, _S_CRACK_LEFT, _S_SUB2_MIN, _S_SUB3_MIN, _S_OWN2_MIN, _S_OWN3_MIN = 21, 22, 23, 24, 25, 26
_S_ATTACKED = 27  # 1: the held note began at an onset after silence (or took over from one in warm-up)
# settled energy on the held note's even harmonics and on its multiples of 3 (dB), learnt with
# the settled level: the partials an octave (a twelfth) keeps
_S_SETTLED_EVEN, _S_SETTLED_MULT3 = 28, 29
N_STATE = 30
# history rings, one row each: short-window level, energy on the evens, on the 3s, settled level
_H_LEVEL, _H_EVEN, _H_MULT3, _H_SETTLED = 0, 1, 2, 3
_N_HIST = 4

UNVOICED, STEADY, WEAKENING, JUMPED = -1, 0, 1, 2
"""Register codes of :data:`OUT_REGISTER`."""
NO_JUMP, OVERBLOWN, VENTED, CRACKED = 0, 1, 2, 3
"""Jump codes of :data:`OUT_JUMP` (CRACKED: on a steady first-register frame, see the module)."""
REGISTER_NAMES: dict[int, Literal["steady", "weakening", "jumped"] | None] = {
    UNVOICED: None, STEADY: "steady", WEAKENING: "weakening", JUMPED: "jumped"
}
JUMP_NAMES: dict[int, JumpKind | None] = {
    NO_JUMP: None, OVERBLOWN: "overblown", VENTED: "vented", CRACKED: "cracked"
}


@njit(cache=True, nogil=True)
def _clear_note(st: NDArray[np.float64], hist: NDArray[np.float64]) -> None:
    """Reset the per-note memory."""
    st[_S_IN_NOTE] = 0.0
    st[_S_BASE_R2] = -np.inf
    st[_S_BASE_R3] = -np.inf
    st[_S_WEAK_RUN] = 0.0
    st[_S_BACK_RUN] = 0.0
    for j in range(hist.shape[1]):
        hist[_H_LEVEL, j] = np.nan
        hist[_H_EVEN, j] = np.nan
        hist[_H_MULT3, j] = np.nan
        hist[_H_SETTLED, j] = np.nan
    st[_S_HIST_POS] = 0.0
    st[_S_RISE_PEAK] = -np.inf
    st[_S_SETTLED_LEVEL] = np.nan
    st[_S_SETTLED_EVEN] = np.nan
    st[_S_SETTLED_MULT3] = np.nan
    st[_S_ABOVE_RUN] = 0.0
    st[_S_KIND_WAITED] = 0.0
    st[_S_CRACK_LEFT] = 0.0
    st[_S_SUB2_MIN] = np.inf
    st[_S_SUB3_MIN] = np.inf
    st[_S_OWN2_MIN] = np.inf
    st[_S_OWN3_MIN] = np.inf
    st[_S_ATTACKED] = 0.0


@njit(cache=True, nogil=True)
def monitor_reset(cfg: NDArray[np.float64], st: NDArray[np.float64], hist: NDArray[np.float64]) -> None:
    """Forget the held note and all history (the lock target is kept)."""
    st[_S_HELD] = np.nan
    _set_register(st, STEADY, NO_JUMP, 1)
    st[_S_UNVOICED] = cfg[_C_SILENCE]  # as after a long silence
    st[_S_PENDING] = np.nan
    st[_S_PENDING_RUN] = 0.0
    _clear_note(st, hist)
    _emit(st, UNVOICED, NO_JUMP, st[_S_TARGET], 0)


@njit(cache=True, nogil=True)
def monitor_lock(st: NDArray[np.float64], hist: NDArray[np.float64], target_hz: float) -> None:
    """Judge the register against ``target_hz`` (Hz; nan releases)."""
    old = st[_S_TARGET]
    if (math.isnan(old) and math.isnan(target_hz)) or old == target_hz:
        return
    st[_S_TARGET] = target_hz
    _set_register(st, STEADY, NO_JUMP, 1)
    _clear_note(st, hist)
    if math.isnan(target_hz):
        st[_S_HELD] = np.nan


@njit(cache=True, nogil=True)
def _set_register(st: NDArray[np.float64], state: int, jump: int, mode: int) -> None:
    st[_S_STATE] = state
    st[_S_JUMP] = jump
    st[_S_MODE] = mode


@njit(cache=True, nogil=True)
def _emit(st: NDArray[np.float64], register: int, jump: int, held_hz: float, mode: int) -> None:
    """Write the frame's reading."""
    st[OUT_REGISTER] = register
    st[OUT_JUMP] = jump
    st[OUT_HELD] = held_hz
    st[OUT_MODE] = mode


@njit(cache=True, nogil=True)
def _mark(st: NDArray[np.float64]) -> int:
    """Jump code of a first-register frame: CRACKED while a cracked attack's mark shows."""
    return CRACKED if st[_S_CRACK_LEFT] > 0.0 else NO_JUMP


@njit(cache=True, nogil=True)
def _held_or_target(st: NDArray[np.float64]) -> float:
    """Held note to report, Hz (nan for none)."""
    held_hz: float = st[_S_HELD] if math.isnan(st[_S_TARGET]) else st[_S_TARGET]
    return held_hz


@njit(cache=True, nogil=True)
def _push(cfg: NDArray[np.float64], st: NDArray[np.float64], hist: NDArray[np.float64], level_db: float,
          even_db: float, mult3_db: float) -> None:  # fmt: skip
    """Append one frame to the history rings."""
    size = hist.shape[1]
    pos = int(st[_S_HIST_POS])
    i = pos % size
    hist[_H_LEVEL, i] = level_db
    hist[_H_EVEN, i] = even_db
    hist[_H_MULT3, i] = mult3_db
    hist[_H_SETTLED, i] = st[_S_SETTLED_LEVEL]
    st[_S_HIST_POS] = pos + 1


@njit(cache=True, nogil=True)
def _level_ago(st: NDArray[np.float64], hist: NDArray[np.float64], frames: int) -> float:
    """Short-window level (dBFS) ``frames`` before the last one pushed; nan when not held."""
    pos = int(st[_S_HIST_POS])
    if pos <= frames or frames >= hist.shape[1]:
        return np.nan
    level_db: float = hist[_H_LEVEL, (pos - 1 - frames) % hist.shape[1]]
    return level_db


@njit(cache=True, nogil=True)
def _reference(cfg: NDArray[np.float64], st: NDArray[np.float64], ring: NDArray[np.float64]) -> float:
    """Median of a ring over frames ``ref_far`` .. ``ref_near`` back (nan if none)."""
    near, far, pos = int(cfg[_C_REF_NEAR]), int(cfg[_C_REF_FAR]), int(st[_S_HIST_POS])
    if pos < near + 1:
        return np.nan
    last = pos - 1
    vals = np.empty(far - near + 1)
    count = 0
    for b in range(near, min(far, last) + 1):
        v = ring[(last - b) % ring.size]
        if math.isfinite(v):
            vals[count] = v
            count += 1
    if count == 0:
        return np.nan
    v = np.sort(vals[:count])
    mid = count // 2
    median: float = v[mid] if count % 2 else (v[mid - 1] + v[mid]) / 2.0
    return median


@njit(cache=True, nogil=True)
def _start_note(cfg: NDArray[np.float64], st: NDArray[np.float64], hist: NDArray[np.float64], f0_hz: float) -> None:
    """Make ``f0_hz`` the held note."""
    st[_S_HELD] = f0_hz if math.isnan(st[_S_TARGET]) else st[_S_TARGET]
    _set_register(st, STEADY, NO_JUMP, 1)
    st[_S_PENDING] = np.nan
    st[_S_PENDING_RUN] = 0.0
    _clear_note(st, hist)


@njit(cache=True, nogil=True)
def _pending_confirmed(cfg: NDArray[np.float64], st: NDArray[np.float64], f0_hz: float) -> bool:
    """Count ``f0_hz`` toward a new held note; True once it has persisted ``confirm_s``."""
    if not math.isnan(st[_S_PENDING]) and cents_apart(f0_hz, st[_S_PENDING]) <= 50.0:
        st[_S_PENDING_RUN] += 1.0
    else:
        st[_S_PENDING] = f0_hz
        st[_S_PENDING_RUN] = 1.0
    confirmed: bool = st[_S_PENDING_RUN] >= cfg[_C_CONFIRM]
    return confirmed


@njit(cache=True, nogil=True)
def cents_apart(a_hz: float, b_hz: float) -> float:
    """Distance between two frequencies, cents (>= 0)."""
    return abs(1200.0 * math.log2(a_hz / b_hz))


@njit(cache=True, nogil=True)
def monitor_update(
    cfg: NDArray[np.float64],
    st: NDArray[np.float64],
    hist: NDArray[np.float64],
    f0_hz: float,
    evidence_db: NDArray[np.float64],
    level_dbfs: float,
    upper_off_c: NDArray[np.float64],
) -> None:
    """Advance by one frame; the reading is left in ``st[OUT_REGISTER:OUT_MODE + 1]``.

    ``f0_hz``: sounding fundamental (Hz, nan when unvoiced); ``evidence_db`` (3, 4):
    :func:`summarise_row` of the powers at ``k f0 / m`` from a short recent window;
    ``level_dbfs``: that window's level (dBFS); ``upper_off_c`` (2,): where that window's
    peak near 2 f0 and 3 f0 lies, cents from them (inf where no peak, nan where not measured).
    """
    unlocked = math.isnan(st[_S_TARGET])
    if math.isnan(f0_hz):
        st[_S_UNVOICED] += 1.0
        # a jump lasts while the tone does: through a dropout shorter than silence_s (a
        # frame lost in the change itself, or in a reverberant tail), and no longer
        _push(cfg, st, hist, level_dbfs, np.nan, np.nan)
        if st[_S_UNVOICED] >= cfg[_C_SILENCE] and not math.isnan(st[_S_HELD]):
            st[_S_HELD] = st[_S_TARGET]
            _set_register(st, STEADY, NO_JUMP, 1)
            _clear_note(st, hist)
        _emit(st, UNVOICED, NO_JUMP, _held_or_target(st), 0)
        return
    after_silence = st[_S_UNVOICED] >= cfg[_C_SILENCE]
    st[_S_UNVOICED] = 0.0
    ref = st[_S_HELD] if unlocked else st[_S_TARGET]
    if math.isnan(ref) or (after_silence and unlocked):
        _start_note(cfg, st, hist, f0_hz)
        st[_S_ATTACKED] = 1.0
        ref = st[_S_HELD]
    elif after_silence:
        _set_register(st, STEADY, NO_JUMP, 1)
        _clear_note(st, hist)
    ratio = f0_hz / ref
    m = int(np.rint(ratio))
    related = 1 <= m <= EVIDENCE_MODES and cents_apart(ratio, m) <= 50.0
    if related and unlocked and st[_S_STATE] == JUMPED and m > 1 and m != st[_S_MODE]:
        # jumped, and now another upper mode sounds: a new note (in a room, a note's tail
        # can carry the held note into the next one), not the same jump
        related = False
    row = m - 1 if related else 0
    odd_db, even_db = evidence_db[row, 0], evidence_db[row, 1]
    off3_db, mult3_db = evidence_db[row, 2], evidence_db[row, 3]
    off_grid_db = _off_grid_db(cfg, f0_hz, m, evidence_db) if related else -np.inf
    r2 = odd_db - even_db
    r3 = off3_db - mult3_db
    # the held note's harmonics intact (neither its odd ones nor those off the 3s weaker
    # yet): its level is the blowing level a later jump is compared with
    intact = m == 1 and st[_S_STATE] == STEADY and r2 >= st[_S_BASE_R2] - 2.0 and r3 >= st[_S_BASE_R3] - 2.0
    # nor its level sinking fast (a fade begins in the level before it shows in the
    # ratios); a diminuendo sinks far slower than 40 dB/s
    if intact and level_dbfs - _level_ago(st, hist, int(cfg[_C_FADE_SPAN])) < -cfg[_C_FADE_DB]:
        intact = False
    if related and m == 1 and st[_S_STATE] != JUMPED:
        _follow_settled(cfg, st, hist, level_dbfs, even_db, mult3_db, intact)
        # how absent the sub-octave's odd harmonics (the sub-twelfth's off the 3s) are:
        # a note that speaks its octave or twelfth first has none (see _cracked)
        if st[_S_IN_NOTE] <= cfg[_C_CRACK_WINDOW]:
            st[_S_SUB2_MIN] = min(st[_S_SUB2_MIN], evidence_db[1, 0] - evidence_db[1, 1])
            st[_S_SUB3_MIN] = min(st[_S_SUB3_MIN], evidence_db[2, 2] - evidence_db[2, 3])
            _own_crack(cfg, st, r2, r3)

    if not related:
        _push(cfg, st, hist, level_dbfs, even_db, mult3_db)
        if not unlocked:
            # playing another note than the target: no register judgement to make
            _emit(st, STEADY, NO_JUMP, st[_S_TARGET], 1)
            return
        if _pending_confirmed(cfg, st, f0_hz):
            # a crack seen already on the note's own harmonics keeps its mark, reported once
            crack_left = cfg[_C_CRACK_SHOW] if _cracked(cfg, st, f0_hz) else st[_S_CRACK_LEFT]
            _start_note(cfg, st, hist, f0_hz)
            st[_S_CRACK_LEFT] = crack_left
            _steady_update(cfg, st, hist, f0_hz, r2, r3, level_dbfs, even_db, mult3_db, False, 1)
            return
        # a pitch that is no register of the held note, not yet confirmed as a new note:
        # a jump holds through it (one stray reading in a note's reverberant tail would
        # otherwise end the jump and report it again on the next frame)
        if st[_S_STATE] == JUMPED:
            _emit(st, JUMPED, int(st[_S_JUMP]), st[_S_HELD], int(st[_S_MODE]))
            return
        _emit(st, STEADY, _mark(st), st[_S_HELD], 1)
        return
    if unlocked and m > 1 and st[_S_STATE] != JUMPED and st[_S_IN_NOTE] < cfg[_C_WARMUP]:
        # a higher mode of a note only just begun: the held reading was a passing one (two
        # notes overlapping in a legato step in a reverberant room can read as their common
        # sub-multiple), and the sounding pitch, once confirmed, is the note
        if _pending_confirmed(cfg, st, f0_hz):
            attacked = st[_S_ATTACKED]  # the same onset
            _start_note(cfg, st, hist, f0_hz)
            st[_S_ATTACKED] = attacked
            _steady_update(cfg, st, hist, f0_hz, r2, r3, level_dbfs, even_db, mult3_db, False, 1)
            return
    else:
        st[_S_PENDING] = np.nan
        st[_S_PENDING_RUN] = 0.0

    if st[_S_STATE] == JUMPED:
        _push(cfg, st, hist, level_dbfs, even_db, mult3_db)
        octave = st[_S_MODE] == 2
        base = st[_S_BASE_R2] if octave else st[_S_BASE_R3]
        now = r2 if octave else r3
        back = m == 1 and now > max(base - cfg[_C_WEAKEN], cfg[_C_COLLAPSED_RATIO])
        st[_S_BACK_RUN] = st[_S_BACK_RUN] + 1.0 if back else 0.0
        if st[_S_BACK_RUN] >= cfg[_C_WEAK]:  # the held note's own harmonics are back
            _set_register(st, STEADY, NO_JUMP, 1)
            st[_S_BACK_RUN] = 0.0
            _steady_update(cfg, st, hist, f0_hz, r2, r3, level_dbfs, even_db, mult3_db, True, 1)
            return
        if unlocked:
            st[_S_HELD] = f0_hz / m
        _emit(st, JUMPED, int(st[_S_JUMP]), _held_or_target(st), int(st[_S_MODE]))
        return

    locked_fresh = not unlocked and m > 1 and not math.isfinite(st[_S_BASE_R2])
    if st[_S_IN_NOTE] >= cfg[_C_WARMUP] or locked_fresh:
        collapse = cfg[_C_COLLAPSE]
        if (
            collapse > st[_S_BASE_R2] - r2
            and collapse > st[_S_BASE_R3] - r3
            and (unlocked or math.isfinite(st[_S_BASE_R2]))
        ):
            jump_mode = 0  # no collapse to judge: what _jump_mode finds, without the calls
        else:
            jump_mode = _jump_mode(cfg, st, hist, m, r2, r3, even_db, mult3_db, off_grid_db, upper_off_c)
        if jump_mode:
            # against the settled blowing level, learnt before the breath began to rise
            # or the odd harmonics to fade (_follow_settled): a breath rising over
            # 100-300 ms into the break has raised the level long before the change
            ref_level = st[_S_SETTLED_LEVEL]
            if not math.isfinite(ref_level):
                ref_level = _reference(cfg, st, hist[_H_LEVEL])
            # no reference at all (a locked note that started in the upper register):
            # blowing too hard is the usual cause (common practice)
            rise = level_dbfs - ref_level if math.isfinite(ref_level) else np.inf
            # or the rise the held note itself made on its way into the change, still
            # going on: measured on the first register's own partials, which a room
            # colours alike before and after (the new mode's partials it may not)
            rise = max(rise, st[_S_RISE_PEAK] - ref_level)
            # or the partials the new mode keeps rose with the breath before the change,
            # while the fading fundamental held the level down: read _KEPT_LAG frames back,
            # before the new mode itself adds to them
            rise = max(rise, _kept_rise(st, hist, jump_mode))
            rising = level_dbfs - _level_ago(st, hist, 0) >= cfg[_C_RISING]
            if rise < cfg[_C_RISE] and rising and st[_S_KIND_WAITED] < cfg[_C_KIND_WAIT]:
                # the level still climbing: an overblown change caught early has not yet
                # reached its new level (a weakening first lowers it); report a frame later
                st[_S_KIND_WAITED] += 1.0
                _push(cfg, st, hist, level_dbfs, even_db, mult3_db)
                _emit(st, int(st[_S_STATE]), NO_JUMP, _held_or_target(st), 1)
                return
            st[_S_KIND_WAITED] = 0.0
            st[_S_CRACK_LEFT] = 0.0
            _set_register(st, JUMPED, OVERBLOWN if rise >= cfg[_C_RISE] else VENTED, jump_mode)
            _push(cfg, st, hist, level_dbfs, even_db, mult3_db)
            if unlocked:
                st[_S_HELD] = f0_hz / m
            _emit(st, JUMPED, int(st[_S_JUMP]), _held_or_target(st), jump_mode)
            return
        st[_S_KIND_WAITED] = 0.0
        if m > 1:
            # the octave (or twelfth) sounds with no collapse of the held note: a new note
            _push(cfg, st, hist, level_dbfs, even_db, mult3_db)
            if not unlocked:
                _emit(st, STEADY, NO_JUMP, st[_S_TARGET], 1)
                return
            if math.isnan(st[_S_PENDING]):
                st[_S_PENDING] = f0_hz
            st[_S_PENDING_RUN] += 1.0
            if st[_S_PENDING_RUN] >= 2.0 * cfg[_C_CONFIRM]:
                _start_note(cfg, st, hist, f0_hz)
                _steady_update(cfg, st, hist, f0_hz, r2, r3, level_dbfs, even_db, mult3_db, False, 1)
                return
            _emit(st, int(st[_S_STATE]), _mark(st), _held_or_target(st), 1)
            return
    _steady_update(cfg, st, hist, f0_hz, r2, r3, level_dbfs, even_db, mult3_db, False, m)


@njit(cache=True, nogil=True)
def _follow_settled(cfg: NDArray[np.float64], st: NDArray[np.float64], hist: NDArray[np.float64], level_db: float,
                    even_db: float, mult3_db: float, intact: bool) -> None:  # fmt: skip
    """Learn the settled blowing level of the held note (dBFS) on a first-register frame.

    Followed directly through the warm-up, then a slow average (``baseline_s``) of the
    intact frames whose level stays within ``settled_tol_db`` above it. A level above
    that is the breath rising (into a break, or a crescendo): learning stops, and on its
    first such frame the reference goes back to its value ``ref_far`` frames (150 ms)
    earlier, which the start of the rise had not yet moved. Standing above for
    ``crescendo_s`` makes the level the new settled one (a crescendo, not a rise into a
    break). Frames with fading harmonics (not intact) teach nothing. The energies on the
    even harmonics and on the multiples of 3 are learnt on the same frames, each only while
    it too stays within ``settled_tol_db`` above its settled value.
    """
    if not math.isfinite(level_db):
        return
    ref = st[_S_SETTLED_LEVEL]
    if not math.isfinite(ref) or st[_S_IN_NOTE] <= cfg[_C_WARMUP]:
        st[_S_SETTLED_LEVEL] = level_db
        st[_S_SETTLED_EVEN] = even_db
        st[_S_SETTLED_MULT3] = mult3_db
        st[_S_ABOVE_RUN] = 0.0
        st[_S_RISE_PEAK] = -np.inf
        return
    if level_db > ref + cfg[_C_SETTLED_TOL]:
        if st[_S_ABOVE_RUN] == 0.0:
            before = hist[_H_SETTLED, int(st[_S_HIST_POS]) % hist.shape[1]]  # the oldest in the ring
            if before < ref:  # False for nan
                st[_S_SETTLED_LEVEL] = before
        st[_S_ABOVE_RUN] += 1.0
        st[_S_RISE_PEAK] = max(st[_S_RISE_PEAK], level_db)
        if st[_S_ABOVE_RUN] >= cfg[_C_CRESCENDO]:
            st[_S_SETTLED_LEVEL] = level_db
            st[_S_ABOVE_RUN] = 0.0
            st[_S_RISE_PEAK] = -np.inf
        return
    st[_S_ABOVE_RUN] = 0.0
    st[_S_RISE_PEAK] = -np.inf
    if intact:
        a = cfg[_C_ALPHA]
        st[_S_SETTLED_LEVEL] = ref + a * (level_db - ref)
        for value, slot in ((even_db, _S_SETTLED_EVEN), (mult3_db, _S_SETTLED_MULT3)):
            kept = st[slot]
            if not math.isfinite(kept):
                st[slot] = value
            elif math.isfinite(value) and value <= kept + cfg[_C_SETTLED_TOL]:
                st[slot] = kept + a * (value - kept)


@njit(cache=True, nogil=True)
def _kept_rise(st: NDArray[np.float64], hist: NDArray[np.float64], jump_mode: int) -> float:
    """Rise of the partials mode ``jump_mode`` keeps, ``_KEPT_LAG`` frames back, over their settled energy (dB)."""
    pos = int(st[_S_HIST_POS])
    if pos <= _KEPT_LAG:
        return -np.inf
    row, slot = (_H_EVEN, _S_SETTLED_EVEN) if jump_mode == 2 else (_H_MULT3, _S_SETTLED_MULT3)
    then = hist[row, (pos - 1 - _KEPT_LAG) % hist.shape[1]]
    rise: float = then - st[slot]
    return rise if math.isfinite(rise) else -np.inf


@njit(cache=True, nogil=True)
def _cracked(cfg: NDArray[np.float64], st: NDArray[np.float64], f0_hz: float) -> bool:
    """Whether ``f0_hz``, about to replace the held note, shows that note was a cracked attack.

    The held note is young (within ``crack_window_s`` of its start, an onset after
    silence: not a note slurred into, nor a pitch reading drifting in a room), sounds 2 or 3 times
    ``f0_hz`` (within 50 cents), and while it sounded the new note's odd harmonics (for
    2; those off the 3s for 3) did not outweigh the ones it kept, on one frame at least
    (0 dB; a plain note's fundamental leads its harmonics by far more): the pipe spoke its
    octave or twelfth, not a note whose lower fundamental the pitch reading missed. (By
    the first voiced frame the newest half window already holds some of the fundamental.)
    """
    held = st[_S_HELD]
    if not math.isnan(st[_S_TARGET]) or math.isnan(held) or st[_S_IN_NOTE] > cfg[_C_CRACK_WINDOW]:
        return False
    if st[_S_ATTACKED] == 0.0 or st[_S_CRACK_LEFT] > 0.0:
        return False  # not begun at an onset, or reported already
    ratio = held / f0_hz
    lowest = np.inf
    if cents_apart(ratio, 2.0) <= 50.0:
        lowest = st[_S_SUB2_MIN]
    elif cents_apart(ratio, 3.0) <= 50.0:
        lowest = st[_S_SUB3_MIN]
    cracked: bool = lowest <= 0.0
    return cracked


@njit(cache=True, nogil=True)
def _own_crack(cfg: NDArray[np.float64], st: NDArray[np.float64], r2: float, r3: float) -> None:
    """Mark a cracked attack read on the held note's own harmonics (young note, mode 1 pitch).

    The pitch reading named the fundamental from the start, but the newest half window
    first held mostly its even harmonics (or its multiples of 3): its odd ones (those off
    the 3s) ``_DOMINATED_DB`` or more under the kept ones; now they rose ``_CRACK_RISE_DB``
    above that and outweigh the kept ones: the fundamental has taken over. Reported once
    per note. (The attack of a crack of 40-60 ms is over before the first voiced frame's
    newest half window is free of the fundamental: the ratios then read -3 to -10 dB.)
    """
    crack = False
    for ratio, slot in ((r2, _S_OWN2_MIN), (r3, _S_OWN3_MIN)):
        lowest = st[slot]
        if lowest <= _DOMINATED_DB and ratio >= max(lowest + _CRACK_RISE_DB, 0.0):
            crack = True
        st[slot] = min(lowest, ratio)
    if crack and st[_S_ATTACKED] != 0.0:
        st[_S_CRACK_LEFT] = cfg[_C_CRACK_SHOW]
        st[_S_OWN2_MIN] = -np.inf  # once: nothing rises above -inf + collapse_db
        st[_S_OWN3_MIN] = -np.inf


@njit(cache=True, nogil=True)
def _off_grid_db(cfg: NDArray[np.float64], f0_hz: float, m: int, evidence_db: NDArray[np.float64]) -> float:
    """Energy between the held note's harmonics (dB), for a frame sounding its mode ``m``.

    A register change keeps the sounding partials on the held note's harmonics; a note
    a fifth, fourth or sixth away puts its own fundamental between them (at 3/2, 4/3,
    5/3 of the held note). The evidence rows hold those places: powers at ``k f0 / 2``
    and ``k f0 / 3``. For mode 1 the odd k of the first and the k off the 3s of the
    second lie between the harmonics; for mode 2 the second's k off the 3s (2/3, 4/3 ...
    of the held note); for mode 3 the first's odd k (3/2, 9/2 ...). Places closer to a
    harmonic than ``grid_spacing_hz`` are left out: there the short window cannot part
    them from the harmonic itself.
    """
    held_hz = f0_hz / m
    halves = held_hz / 2.0 >= cfg[_C_GRID_SPACING]
    thirds = held_hz / 3.0 >= cfg[_C_GRID_SPACING]
    out = -np.inf
    if halves and (m == 1 or m == 3):
        out = evidence_db[1, 0]
    if thirds and (m == 1 or m == 2):
        out = max(out, evidence_db[2, 2])
    return out


@njit(cache=True, nogil=True)
def _jump_mode(cfg: NDArray[np.float64], st: NDArray[np.float64], hist: NDArray[np.float64], m: int, r2: float,
               r3: float, even_db: float, mult3_db: float, off_grid_db: float,
               upper_off_c: NDArray[np.float64]) -> int:  # fmt: skip
    """Mode the pipe jumped to (2 or 3) on this frame's evidence, else 0.

    ``off_grid_db``: :func:`_off_grid_db`; within ``new_note_db`` of the kept harmonics
    it is another note arriving (a legato step), no jump. ``upper_off_c``: while the
    pitch still reads the held note (m = 1), the newest half window's peak near its 2nd
    (3rd) harmonic more than :data:`UPPER_OFF_CENTS` from it, or no peak there at all, is
    a note a seventh or a ninth (a semitone off the twelfth) up arriving, no jump to mode
    2 (3): a register change sounds the held note's own harmonics, as the pitch reading's
    relation to it does (50 c).
    """
    if not math.isnan(st[_S_TARGET]) and (m == 2 or m == 3) and not math.isfinite(st[_S_BASE_R2]):
        # locked, and the note never sounded in the first register: judge the target's
        # own harmonics directly, with no baseline
        ratio = r2 if m == 2 else r3
        return m if ratio <= cfg[_C_COLLAPSED_RATIO] - cfg[_C_COLLAPSE] else 0
    if (
        (m == 2 or (m == 1 and not abs(upper_off_c[0]) > UPPER_OFF_CENTS))
        and off_grid_db < even_db - cfg[_C_NEW_NOTE]
        and _collapsed(cfg, st, st[_S_BASE_R2] - r2, r2, even_db, hist[_H_EVEN])
    ):
        return 2
    if (
        (m == 3 or (m == 1 and not abs(upper_off_c[1]) > UPPER_OFF_CENTS))
        and off_grid_db < mult3_db - cfg[_C_NEW_NOTE]
        and _collapsed(cfg, st, st[_S_BASE_R3] - r3, r3, mult3_db, hist[_H_MULT3])
    ):
        return 3
    return 0


@njit(cache=True, nogil=True)
def _collapsed(cfg: NDArray[np.float64], st: NDArray[np.float64], drop: float, ratio: float, kept_db: float,
               ring: NDArray[np.float64]) -> bool:  # fmt: skip
    """Collapse of the held note's vanishing harmonics (odd ones, or those off the 3s).

    Either they fell ``collapse_db`` under their baseline, sit ``_DOMINATED_DB`` or more
    under the kept ones (the new mode's) and those rose ``even_rise_db`` -- what a jump
    does in a reverberant room, where the vanishing ones only decay -- or they fell
    ``deep_collapse_db`` and sit ``collapsed_ratio_db`` under the kept ones.
    """
    if drop < cfg[_C_COLLAPSE]:
        return False
    if drop >= cfg[_C_DEEP] and ratio <= cfg[_C_COLLAPSED_RATIO]:
        return True
    if ratio > _DOMINATED_DB:
        return False
    rose: bool = kept_db - _reference(cfg, st, ring) >= cfg[_C_EVEN_RISE]
    return rose


@njit(cache=True, nogil=True)
def _steady_update(cfg: NDArray[np.float64], st: NDArray[np.float64], hist: NDArray[np.float64], f0_hz: float,
                   r2: float, r3: float, level_dbfs: float, even_db: float, mult3_db: float, pushed: bool,
                   m_related: int) -> None:  # fmt: skip
    """Steady or weakening frame of the held note: learn baselines."""
    if not pushed:
        _push(cfg, st, hist, level_dbfs, even_db, mult3_db)
    st[_S_IN_NOTE] += 1.0
    st[_S_MODE] = 1
    st[_S_JUMP] = NO_JUMP
    if m_related > 1:
        # a foreign register during warm-up: no baseline to learn from it
        st[_S_STATE] = STEADY
        _emit(st, STEADY, _mark(st), _held_or_target(st), 1)
        return
    if math.isnan(st[_S_TARGET]):
        st[_S_HELD] = f0_hz
    warm = st[_S_IN_NOTE] > cfg[_C_WARMUP]
    weak = r2 <= st[_S_BASE_R2] - cfg[_C_WEAKEN] and warm
    st[_S_WEAK_RUN] = st[_S_WEAK_RUN] + 1.0 if weak else 0.0
    if st[_S_WEAK_RUN] >= cfg[_C_WEAK]:
        st[_S_STATE] = WEAKENING
    else:
        st[_S_STATE] = STEADY
        if st[_S_ABOVE_RUN] > 0.0:
            pass  # the breath rising (_follow_settled): the baselines keep the settled note's
        elif not math.isfinite(st[_S_BASE_R2]) or not warm:
            # the attack is no reference (a real flute's upper harmonics grow for tens
            # of ms): follow it directly until the note has settled
            st[_S_BASE_R2] = r2
            st[_S_BASE_R3] = r3
        else:
            # a slow average, not a peak hold: in a reverberant room the harmonics of a
            # note with vibrato beat by several dB, and a peak hold would read that as
            # a fall of the odd harmonics
            a = cfg[_C_ALPHA]
            st[_S_BASE_R2] += a * (r2 - st[_S_BASE_R2])
            st[_S_BASE_R3] += a * (r3 - st[_S_BASE_R3])
    jump = _mark(st)
    st[_S_CRACK_LEFT] = max(st[_S_CRACK_LEFT] - 1.0, 0.0)
    _emit(st, int(st[_S_STATE]), jump, _held_or_target(st), 1)


REGISTER_DEFAULTS = {
    "collapse_db": 15.0,
    "deep_collapse_db": 30.0,
    "collapsed_ratio_db": -10.0,
    "even_rise_db": 3.0,
    "weaken_db": 6.0,
    "rise_db": 2.5,
    "silence_s": 0.05,
    "confirm_s": 0.015,
    "warmup_s": 0.1,
    "baseline_s": 0.15,
    "weaken_hold_s": 0.02,
    "new_note_db": 10.0,
    "grid_spacing_hz": 60.0,
    "kind_wait_s": 0.02,
    "rising_db_per_s": 40.0,
    "settled_tol_db": 1.0,
    "crescendo_s": 0.4,
    "crack_window_s": 0.15,
    "crack_show_s": 0.25,
}
"""Default thresholds of :class:`RegisterMonitor` (dB, seconds)."""


def monitor_config(hop_s: float, **options: float) -> NDArray[np.float64]:
    """The configuration vector of a monitor stepping every ``hop_s`` seconds.

    Raises
    ------
    ValueError
        For a hop that is not a positive number of seconds.
    TypeError
        For an option name that is not one of :data:`REGISTER_DEFAULTS`.
    """
    if not (isinstance(hop_s, (int, float)) and hop_s > 0.0 and math.isfinite(hop_s)):
        raise ValueError(f"hop_s {hop_s!r} must be a positive number of seconds")
    unknown = sorted(set(options) - set(REGISTER_DEFAULTS))
    if unknown:
        raise TypeError(f"unknown register option {unknown[0]!r}; use one of {', '.join(REGISTER_DEFAULTS)}")
    o = {**REGISTER_DEFAULTS, **options}
    cfg = np.empty(_N_CONFIG)
    cfg[_C_COLLAPSE] = o["collapse_db"]
    cfg[_C_DEEP] = o["deep_collapse_db"]
    cfg[_C_COLLAPSED_RATIO] = o["collapsed_ratio_db"]
    cfg[_C_EVEN_RISE] = o["even_rise_db"]
    cfg[_C_WEAKEN] = o["weaken_db"]
    cfg[_C_RISE] = o["rise_db"]
    cfg[_C_SILENCE] = max(1, round(o["silence_s"] / hop_s))
    cfg[_C_CONFIRM] = max(1, round(o["confirm_s"] / hop_s))
    cfg[_C_WARMUP] = round(o["warmup_s"] / hop_s)
    cfg[_C_ALPHA] = 1.0 - math.exp(-hop_s / o["baseline_s"])
    cfg[_C_WEAK] = max(1, round(o["weaken_hold_s"] / hop_s))
    cfg[_C_NEW_NOTE] = o["new_note_db"]
    cfg[_C_GRID_SPACING] = o["grid_spacing_hz"]
    cfg[_C_KIND_WAIT] = round(o["kind_wait_s"] / hop_s)
    cfg[_C_RISING] = o["rising_db_per_s"] * hop_s
    cfg[_C_SETTLED_TOL] = o["settled_tol_db"]
    cfg[_C_CRESCENDO] = max(1, round(o["crescendo_s"] / hop_s))
    cfg[_C_CRACK_WINDOW] = round(o["crack_window_s"] / hop_s)
    cfg[_C_CRACK_SHOW] = max(1, round(o["crack_show_s"] / hop_s))
    cfg[_C_FADE_SPAN] = max(1, round(0.05 / hop_s))  # 50 ms, within the history ring
    cfg[_C_FADE_DB] = 2.0  # over 50 ms: 40 dB/s
    # reference span for rises: frames 150..70 ms before now
    cfg[_C_REF_FAR] = max(2, round(0.15 / hop_s))
    cfg[_C_REF_NEAR] = max(1, round(0.07 / hop_s))
    return cfg


def monitor_arrays(cfg: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Fresh (state, history) arrays for ``cfg``, unlocked and reset."""
    st = np.zeros(N_STATE)
    st[_S_TARGET] = np.nan
    hist = np.empty((_N_HIST, int(cfg[_C_REF_FAR]) + 1))
    monitor_reset(cfg, st, hist)
    return st, hist


class RegisterMonitor:
    """Frame-by-frame register state of the held note.

    A thin shell over the compiled step :func:`monitor_update`, whose state lives in flat
    arrays (the analyser runs the same step inside its own compiled pass).

    Parameters
    ----------
    hop_s : float > 0, seconds
        Time between frames.
    collapse_db : float > 0, dB
        Drop of the held note's odd/even (or off/on-3) ratio under its baseline that counts
        as a collapse.
    deep_collapse_db : float > collapse_db, dB
        Drop that counts as a jump without further evidence.
    collapsed_ratio_db : float, dB
        A collapse also needs the ratio itself this low: the held note's odd (off-3)
        harmonics weaker than the even (on-3) ones by 10 dB. A drop from a huge baseline
        (a plain sine has no even harmonics at all) is no collapse.
    even_rise_db : float > 0, dB
        Rise of the energy on the new mode's harmonics, re ~100 ms before, that confirms a
        collapse.
    weaken_db : float > 0, dB
        Drop of the odd/even ratio under its baseline reported as weakening.
    rise_db : float > 0, dB
        Level above the settled blowing level, at the change or on the way into it, that
        makes a jump "overblown" (common practice: blowing harder raises the level several
        dB, a vent keeps it within about -3..+2 dB; the synthetic voice steps 8 dB).
    silence_s : float > 0, seconds
        Unvoiced time that ends the held note.
    confirm_s : float >= 0, seconds
        Time a foreign pitch must persist to become the new held note.
    warmup_s : float >= 0, seconds
        Time after a new note during which baselines are learnt and no jump is reported.
    baseline_s : float > 0, seconds
        Time constant of the baselines (exponential average over steady frames).
    weaken_hold_s : float > 0, seconds
        Time the odd/even ratio must stay ``weaken_db`` under its baseline before
        "weakening" is reported.
    new_note_db : float > 0, dB
        Energy between the held note's harmonics (at 3/2, 4/3, 5/3 ... f0) within this of
        the harmonics a jump would keep marks a new note arriving (a legato step up a
        fifth, fourth or sixth), not a register change.
    grid_spacing_hz : float > 0, Hz
        Closest spacing (f0/2, f0/3) at which the in-between energy is judged. The
        analyser's short window is 43 ms long at 48 kHz: its Hann main lobe reaches
        47 Hz either side, so 60 Hz leaves the harmonics' own skirts out.
    kind_wait_s : float >= 0, seconds
        Longest a found jump's report waits while the level still climbs faster than
        ``rising_db_per_s`` and has not yet risen ``rise_db``: caught early, an overblown
        change has not reached its new level.
    rising_db_per_s : float > 0, dB/s
        Climb of the short-window level that counts as still rising.
    settled_tol_db : float > 0, dB
        Level above the settled blowing level at which the breath counts as rising (the
        settled level stops learning; see the module).
    crescendo_s : float > 0, seconds
        Time the level may stand above the settled level before it becomes the new settled
        level (a crescendo rather than a rise into a break, which takes up to 0.3 s).
    crack_window_s : float >= 0, seconds
        Age of a note within which a fall to its fundamental is a cracked attack.
    crack_show_s : float > 0, seconds
        Time the "cracked" mark stays on the steady frames after a cracked attack.

    Examples
    --------
    >>> mon = RegisterMonitor(0.005)
    >>> ev = np.empty((3, 4))
    >>> summarise_row(np.tile([1.0, 0.1, 0.03, 0.01, 0.003, 0.001, 0.0005, 0.0002], (3, 1)), ev)
    >>> mon.update(440.0, ev.tolist(), -20.0).register
    'steady'
    """

    def __init__(self, hop_s: float, **options: float) -> None:
        self._cfg = monitor_config(hop_s, **options)  # checks hop_s
        self.hop_s = float(hop_s)
        self._st, self._hist = monitor_arrays(self._cfg)

    def reset(self) -> None:
        """Forget the held note and all history (the lock target is kept)."""
        monitor_reset(self._cfg, self._st, self._hist)

    def lock(self, target_hz: float | None) -> None:
        """Judge the register against ``target_hz`` (the fingered note); None releases.

        Raises
        ------
        ValueError
            For a target that is not a positive finite frequency.
        """
        if target_hz is not None and not (math.isfinite(target_hz) and target_hz > 0.0):
            raise ValueError(f"target_hz {target_hz!r} must be a positive frequency in Hz, or None to release")
        monitor_lock(self._st, self._hist, math.nan if target_hz is None else float(target_hz))

    @property
    def arrays(self) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
        """(configuration, state, history): what :func:`monitor_update` steps, shared, not copied."""
        return self._cfg, self._st, self._hist

    @property
    def target_hz(self) -> float | None:
        """Lock target, Hz (None when unlocked)."""
        t = float(self._st[_S_TARGET])
        return None if math.isnan(t) else t

    def update(self, f0_hz: float | None, evidence_db: Sequence[Sequence[float]], level_dbfs: float,
               upper_off_cents: tuple[float, float] | None = None) -> RegisterReading:
        """Advance by one frame.

        Parameters
        ----------
        f0_hz : float or None, Hz
            Sounding fundamental of the frame; None when unvoiced.
        evidence_db : 3 rows of 4 floats, dB
            :func:`summarise_row` of the powers at ``k f0 / m`` (k = 1..8; row m-1:
            the held note's harmonics if the pipe sounds mode m), from a short recent window.
        level_dbfs : float, dBFS
            Level of that short window.
        upper_off_cents : (float, float) or None, cents
            Where that window's peak near 2 f0 and 3 f0 lies, cents from them; None when
            not measured (no veto of a jump by it).

        Returns
        -------
        RegisterReading
        """
        ev = np.ascontiguousarray(evidence_db, dtype=np.float64).reshape(EVIDENCE_MODES, 4)
        off = np.full(2, np.nan) if upper_off_cents is None else np.asarray(upper_off_cents, dtype=np.float64)
        monitor_update(self._cfg, self._st, self._hist, math.nan if f0_hz is None else float(f0_hz), ev,
                       float(level_dbfs), off)  # fmt: skip
        return reading_of(self._st)


def reading_of(st: NDArray[np.float64]) -> RegisterReading:
    """The last reading left in a monitor state vector."""
    held = float(st[OUT_HELD])
    return RegisterReading(
        REGISTER_NAMES[int(st[OUT_REGISTER])], JUMP_NAMES[int(st[OUT_JUMP])], None if math.isnan(held) else held,
        int(st[OUT_MODE]),
    )  # fmt: skip
