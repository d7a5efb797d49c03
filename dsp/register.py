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
  the collapse is total (``deep_collapse_db``). It is reported at the first such frame.
* kind: **overblown** when the short-window level rose at least ``rise_db`` against
  ~100 ms before the change (blowing harder: common practice), else **vented** (thumb hole
  cracked open, level kept). Level alone is not trusted to find the jump.
* **weakening** while ``r2`` sits ``weaken_db`` or more under its baseline without a jump
  (the odd harmonics fading toward collapse).
* a **new note** (held note replaced) on a voiced pitch that is no mode 1..3 of the held
  note for ``confirm_s``, or on the first voiced frame after ``silence_s`` of silence.
  With :meth:`RegisterMonitor.lock`, the target is the held note and never replaced.
"""

from __future__ import annotations

import math
import statistics
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numba import njit  # type: ignore[import-untyped]
from numpy.typing import NDArray

__all__ = ["RegisterMonitor", "RegisterReading", "summarise_row", "EVIDENCE_HARMONICS", "EVIDENCE_MODES"]

EVIDENCE_HARMONICS = 8
"""Harmonics of the held note in each evidence row."""

EVIDENCE_MODES = 3
"""Evidence rows: held = sounding / m for m = 1..3."""

_TINY = 1e-30
# Vanishing harmonics at least this far under the kept ones, dB. Benchmark corpus: true jumps
# read -6.6 dB and lower at detection; a note's end in a reverberant room (its octave
# outlasting the fundamental) read +1.2 and -0.5 dB, and was taken for a vent at +3 dB.
_DOMINATED_DB = -3.0


@dataclass(frozen=True, slots=True)
class RegisterReading:
    """Monitor output for one frame.

    Attributes
    ----------
    register : "steady" | "weakening" | "jumped" | None
        None when unvoiced.
    jump : "overblown" | "vented" | None
    held_f0_hz : float or None, Hz
        Held (fingered) note; the lock target when locked.
    mode : int
        Sounding mode relative to the held note (1, 2, 3); 0 when unvoiced.
    """

    register: Literal["steady", "weakening", "jumped"] | None
    jump: Literal["overblown", "vented"] | None
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


class RegisterMonitor:
    """Frame-by-frame register state of the held note.

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
        Level rise at the change that makes a jump "overblown" (common practice: blowing
        harder raises the level several dB; the synthetic voice uses 8 dB).
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

    Examples
    --------
    >>> mon = RegisterMonitor(0.005)
    >>> ev = np.empty((3, 4))
    >>> summarise_row(np.tile([1.0, 0.1, 0.03, 0.01, 0.003, 0.001, 0.0005, 0.0002], (3, 1)), ev)
    >>> mon.update(440.0, ev.tolist(), -20.0).register
    'steady'
    """

    def __init__(
        self,
        hop_s: float,
        *,
        collapse_db: float = 15.0,
        deep_collapse_db: float = 30.0,
        collapsed_ratio_db: float = -10.0,
        even_rise_db: float = 3.0,
        weaken_db: float = 6.0,
        rise_db: float = 3.0,
        silence_s: float = 0.05,
        confirm_s: float = 0.015,
        warmup_s: float = 0.1,
        baseline_s: float = 0.15,
        weaken_hold_s: float = 0.02,
    ) -> None:
        if not (hop_s > 0.0 and math.isfinite(hop_s)):
            raise ValueError(f"hop_s {hop_s!r} must be a positive number of seconds")
        self.hop_s = float(hop_s)
        self.collapse_db = collapse_db
        self.deep_collapse_db = deep_collapse_db
        self.collapsed_ratio_db = collapsed_ratio_db
        self.even_rise_db = even_rise_db
        self.weaken_db = weaken_db
        self.rise_db = rise_db
        self._silence_frames = max(1, int(round(silence_s / hop_s)))
        self._confirm_frames = max(1, int(round(confirm_s / hop_s)))
        self._warmup_frames = int(round(warmup_s / hop_s))
        self._baseline_alpha = 1.0 - math.exp(-hop_s / baseline_s)
        self._weak_frames = max(1, int(round(weaken_hold_s / hop_s)))
        # reference span for rises: frames 150..70 ms before now
        self._ref_far = max(2, int(round(0.15 / hop_s)))
        self._ref_near = max(1, int(round(0.07 / hop_s)))
        self._hist_len = self._ref_far + 1
        self._target_hz: float | None = None
        self.reset()

    def reset(self) -> None:
        """Forget the held note and all history (the lock target is kept)."""
        self._held_hz: float | None = None
        self._state: Literal["steady", "weakening", "jumped"] = "steady"
        self._jump: Literal["overblown", "vented"] | None = None
        self._mode = 1
        self._unvoiced_run = self._silence_frames  # as after a long silence
        self._pending_hz: float | None = None
        self._pending_run = 0
        self._clear_note()

    def _clear_note(self) -> None:
        """Reset the per-note memory."""
        self._frames_in_note = 0
        self._base_r2 = -math.inf
        self._base_r3 = -math.inf
        self._weak_run = 0
        self._back_run = 0
        # rings of plain floats: one frame's bookkeeping costs no array operation
        self._hist_level = [math.nan] * self._hist_len
        self._hist_even = [math.nan] * self._hist_len
        self._hist_mult3 = [math.nan] * self._hist_len
        self._hist_steady = [False] * self._hist_len
        self._hist_pos = 0
        self._intact = False
        self._steady_level = math.nan  # level of the last steady stretch, >= 70 ms back

    def lock(self, target_hz: float | None) -> None:
        """Judge the register against ``target_hz`` (the fingered note); None releases.

        Raises
        ------
        ValueError
            For a target that is not a positive finite frequency.
        """
        if target_hz is not None:
            if not (math.isfinite(target_hz) and target_hz > 0.0):
                raise ValueError(f"target_hz {target_hz!r} must be a positive frequency in Hz, or None to release")
            target_hz = float(target_hz)
        if target_hz != self._target_hz:
            self._target_hz = target_hz
            self._state, self._jump, self._mode = "steady", None, 1
            self._clear_note()
            if target_hz is None:
                self._held_hz = None

    @property
    def target_hz(self) -> float | None:
        """Lock target, Hz (None when unlocked)."""
        return self._target_hz

    def _push(self, level_db: float, even_db: float, mult3_db: float) -> None:
        """Append one frame to the history rings."""
        i = self._hist_pos % self._hist_len
        self._hist_level[i] = level_db
        self._hist_even[i] = even_db
        self._hist_mult3[i] = mult3_db
        self._hist_steady[i] = self._intact
        self._hist_pos += 1
        if self._hist_pos > self._ref_near:
            j = (self._hist_pos - 1 - self._ref_near) % self._hist_len
            if self._hist_steady[j] and math.isfinite(self._hist_level[j]):
                self._steady_level = self._hist_level[j]

    def _reference(self, ring: list[float]) -> float:
        """Median of a ring over frames ``_ref_far`` .. ``_ref_near`` back (nan if none)."""
        if self._hist_pos < self._ref_near + 1:
            return math.nan
        last = self._hist_pos - 1
        vals = [ring[(last - b) % self._hist_len] for b in range(self._ref_near, min(self._ref_far, last) + 1)]
        vals = [v for v in vals if math.isfinite(v)]
        return statistics.median(vals) if vals else math.nan

    def _start_note(self, f0_hz: float) -> None:
        """Make ``f0_hz`` the held note."""
        self._held_hz = f0_hz if self._target_hz is None else self._target_hz
        self._state, self._jump, self._mode = "steady", None, 1
        self._pending_hz, self._pending_run = None, 0
        self._clear_note()

    def update(self, f0_hz: float | None, evidence_db: Sequence[Sequence[float]], level_dbfs: float) -> RegisterReading:
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

        Returns
        -------
        RegisterReading
        """
        if f0_hz is None:
            self._intact = False
            self._unvoiced_run += 1
            if self._state == "jumped":
                # a jump lasts while the tone does: after a dropout it must be found anew
                self._state, self._jump, self._mode = "steady", None, 1
            self._push(level_dbfs, math.nan, math.nan)
            if self._unvoiced_run >= self._silence_frames and self._held_hz is not None:
                self._held_hz = self._target_hz
                self._state, self._jump, self._mode = "steady", None, 1
                self._clear_note()
            held = self._held_hz if self._target_hz is None else self._target_hz
            return RegisterReading(None, None, held, 0)
        after_silence = self._unvoiced_run >= self._silence_frames
        self._unvoiced_run = 0
        ref = self._target_hz if self._target_hz is not None else self._held_hz
        if ref is None or (after_silence and self._target_hz is None):
            self._start_note(f0_hz)
            ref = self._held_hz
        elif after_silence:
            self._state, self._jump, self._mode = "steady", None, 1
            self._clear_note()
        assert ref is not None
        ratio = f0_hz / ref
        m = int(round(ratio))
        related = 1 <= m <= EVIDENCE_MODES and abs(1200.0 * math.log2(ratio / m)) <= 50.0
        odd_db, even_db, off3_db, mult3_db = evidence_db[m - 1] if related else evidence_db[0]
        r2 = odd_db - even_db
        r3 = off3_db - mult3_db
        # the held note's odd harmonics intact (no weakening yet): its level is the blowing
        # level a later jump is compared with
        self._intact = m == 1 and self._state == "steady" and r2 >= self._base_r2 - 2.0

        if not related:
            self._push(level_dbfs, even_db, mult3_db)
            if self._target_hz is not None:
                # playing another note than the target: no register judgement to make
                return RegisterReading("steady", None, self._target_hz, 1)
            if self._pending_hz is not None and abs(1200.0 * math.log2(f0_hz / self._pending_hz)) <= 50.0:
                self._pending_run += 1
            else:
                self._pending_hz, self._pending_run = f0_hz, 1
            if self._pending_run >= self._confirm_frames:
                self._start_note(f0_hz)
                return self._steady_update(f0_hz, r2, r3, level_dbfs, even_db, mult3_db)
            # a pitch that is no register of the held note: whatever the held note did is
            # over (a jump included); the new note is confirmed on the next frames
            if self._state == "jumped":
                self._state, self._jump, self._mode = "steady", None, 1
            return RegisterReading("steady", None, self._held_hz, 1)
        self._pending_hz, self._pending_run = None, 0

        if self._state == "jumped":
            self._push(level_dbfs, even_db, mult3_db)
            base = self._base_r2 if self._mode == 2 else self._base_r3
            ratio = r2 if self._mode == 2 else r3
            back = m == 1 and ratio > max(base - self.weaken_db, self.collapsed_ratio_db)
            self._back_run = self._back_run + 1 if back else 0
            if self._back_run >= self._weak_frames:  # the held note's own harmonics are back
                self._state, self._jump, self._mode = "steady", None, 1
                self._back_run = 0
                return self._steady_update(f0_hz, r2, r3, level_dbfs, even_db, mult3_db, pushed=True)
            if self._target_hz is None:
                self._held_hz = f0_hz / m
            return RegisterReading("jumped", self._jump, self._held_or_target(), self._mode)

        locked_fresh = self._target_hz is not None and m > 1 and not math.isfinite(self._base_r2)
        if self._frames_in_note >= self._warmup_frames or locked_fresh:
            if (
                self.collapse_db > self._base_r2 - r2
                and self.collapse_db > self._base_r3 - r3
                and (self._target_hz is None or math.isfinite(self._base_r2))
            ):
                jump_mode = 0  # no collapse to judge: what _jump_mode finds, without the calls
            else:
                jump_mode = self._jump_mode(m, r2, r3, even_db, mult3_db)
            if jump_mode:
                # against the level the note was blown at while steady (~70 ms and more
                # back, before any weakening): a weakening phase loses the held note's
                # strong odd harmonics and with them some level, which is no blowing change
                ref_level = self._steady_level
                if not math.isfinite(ref_level):
                    ref_level = self._reference(self._hist_level)
                # no reference at all (a locked note that started in the upper register):
                # blowing too hard is the usual cause (common practice)
                rise = level_dbfs - ref_level if math.isfinite(ref_level) else math.inf
                self._state = "jumped"
                self._mode = jump_mode
                self._jump = "overblown" if rise >= self.rise_db else "vented"
                self._push(level_dbfs, even_db, mult3_db)
                if self._target_hz is None:
                    self._held_hz = f0_hz / m
                return RegisterReading("jumped", self._jump, self._held_or_target(), self._mode)
            if m > 1:
                # the octave (or twelfth) sounds with no collapse of the held note: a new note
                self._push(level_dbfs, even_db, mult3_db)
                if self._target_hz is not None:
                    return RegisterReading("steady", None, self._target_hz, 1)
                self._pending_hz = f0_hz if self._pending_hz is None else self._pending_hz
                self._pending_run += 1
                if self._pending_run >= 2 * self._confirm_frames:
                    self._start_note(f0_hz)
                    return self._steady_update(f0_hz, r2, r3, level_dbfs, even_db, mult3_db)
                return RegisterReading(self._state, None, self._held_or_target(), 1)
        return self._steady_update(f0_hz, r2, r3, level_dbfs, even_db, mult3_db, m_related=m)

    def _held_or_target(self) -> float | None:
        """Held note to report."""
        return self._target_hz if self._target_hz is not None else self._held_hz

    def _jump_mode(self, m: int, r2: float, r3: float, even_db: float, mult3_db: float) -> int:
        """Mode the pipe jumped to (2 or 3) on this frame's evidence, else 0."""
        if self._target_hz is not None and m in (2, 3) and not math.isfinite(self._base_r2):
            # locked, and the note never sounded in the first register: judge the target's
            # own harmonics directly, with no baseline
            ratio = r2 if m == 2 else r3
            return m if ratio <= self.collapsed_ratio_db - self.collapse_db else 0
        if m in (1, 2) and self._collapsed(self._base_r2 - r2, r2, even_db, self._hist_even):
            return 2
        if m in (1, 3) and self._collapsed(self._base_r3 - r3, r3, mult3_db, self._hist_mult3):
            return 3
        return 0

    def _collapsed(self, drop: float, ratio: float, kept_db: float, ring: list[float]) -> bool:
        """Collapse of the held note's vanishing harmonics (odd ones, or those off the 3s).

        Either they fell ``collapse_db`` under their baseline, sit ``_DOMINATED_DB`` or more
        under the kept ones (the new mode's) and those rose ``even_rise_db`` -- what a jump
        does in a reverberant room, where the vanishing ones only decay -- or they fell
        ``deep_collapse_db`` and sit ``collapsed_ratio_db`` under the kept ones.
        """
        if drop < self.collapse_db:
            return False
        if drop >= self.deep_collapse_db and ratio <= self.collapsed_ratio_db:
            return True
        if ratio > _DOMINATED_DB:
            return False
        return kept_db - self._reference(ring) >= self.even_rise_db

    def _steady_update(
        self,
        f0_hz: float,
        r2: float,
        r3: float,
        level_dbfs: float,
        even_db: float,
        mult3_db: float,
        *,
        pushed: bool = False,
        m_related: int = 1,
    ) -> RegisterReading:
        """Steady or weakening frame of the held note: learn baselines."""
        if not pushed:
            self._push(level_dbfs, even_db, mult3_db)
        self._frames_in_note += 1
        self._mode = 1
        self._jump = None
        if m_related > 1:
            # a foreign register during warm-up: no baseline to learn from it
            self._state = "steady"
            return RegisterReading("steady", None, self._held_or_target(), 1)
        if self._target_hz is None:
            self._held_hz = f0_hz
        weak = r2 <= self._base_r2 - self.weaken_db and self._frames_in_note > self._warmup_frames
        self._weak_run = self._weak_run + 1 if weak else 0
        if self._weak_run >= self._weak_frames:
            self._state = "weakening"
        else:
            self._state = "steady"
            if not math.isfinite(self._base_r2) or self._frames_in_note <= self._warmup_frames:
                # the attack is no reference (a real flute's upper harmonics grow for tens
                # of ms): follow it directly until the note has settled
                self._base_r2, self._base_r3 = r2, r3
            else:
                # a slow average, not a peak hold: in a reverberant room the harmonics of a
                # note with vibrato beat by several dB, and a peak hold would read that as
                # a fall of the odd harmonics
                a = self._baseline_alpha
                self._base_r2 += a * (r2 - self._base_r2)
                self._base_r3 += a * (r3 - self._base_r3)
        return RegisterReading(self._state, None, self._held_or_target(), 1)
