"""Blowing curve: how a note's pitch follows the level it is blown at, and where it breaks.

Blowing harder sharpens a duct flute; a crescendo (or the same note played at several
dynamics) shows by how much, in cents per dB, and at which level the note leaves its
register. Makers read the slope as the note's "pressure sensitivity" and the break level as
the top of its usable dynamic range.

Method
------
* The readings of one *held note* (cut by :class:`bench.segment.NoteSegmenter`, the rule every
  note-by-note consumer follows) form a run.
* The first :data:`bench.segment.ATTACK_S` of the run are left out, and so are the last :data:`GUARD_S` (60 ms)
  before the first frame whose register state is "jumped" (the change itself) or before the
  note ends (the release), and everything after the jump.
* Ordinary least squares of corrected cents against level (dBFS) over the frames that remain:
  ``slope = Sxy / Sxx``, standard error ``sqrt(sum(r**2) / (n - 2) / Sxx)`` -- the same as
  ``scipy.stats.linregress``. The standard error treats frames as independent; analysis
  frames overlap, so it is optimistic by roughly the square root of the overlap factor.
* Frames the register monitor marks "weakening" (the harmonics the next mode lacks fading
  before a break, which lowers the level) are left out of the fit.
* Break level: the median level of the held note's frames from 100 ms to 40 ms before the
  first "jumped" frame, or before the start of the weakening that led to it (a weakening
  drops the level several dB, and reading the level there put the break below the level the
  note was played at) -- the blowing level that broke the note, clear of the change itself
  (which takes some 30 ms and is smeared by the analysis window; an overblown break often steps
  the level up several dB). When no frame lies in that span, the last frame before the jump.
  In a crescendo of R dB/s this reads about 0.07 R dB low. ``jumped_level_dbfs`` is the level of
  the first jumped frame.
"""

from __future__ import annotations

import copy
import math
import statistics
from collections import deque
from collections.abc import Iterable
from dataclasses import dataclass

from bench.reading import Reading, SettingsKey
from bench.segment import ATTACK_S, NoteSegmenter
from bench.tuning.notes import note_name

__all__ = [
    "BlowingCurve",
    "BlowingCurveTracker",
    "blowing_curve",
    "find_blowing_curves",
    "fit_line",
]

GUARD_S = 0.06
"""Frames this close before a jump or the end of the note are left out of the fit, seconds."""

BREAK_LOOKBACK_S = (0.10, 0.04)
"""Span before the first jumped frame whose median level is the break level, seconds."""

MAX_KEPT_POINTS = 4000
"""Most (level, cents) points a curve keeps for plotting (the fit uses all)."""


@dataclass(frozen=True, slots=True)
class LineFit:
    """Least-squares line ``y = intercept + slope * x``."""

    slope: float
    intercept: float
    slope_se: float
    n: int


class LevelHistory:
    """Levels of the last few tenths of a second, to read the level just before a break.

    A break is often announced by a *weakening* (the harmonics the next mode lacks fade,
    which lowers the level by several dB before the jump): the break level is then read
    before the weakening began, where the player was still blowing the note.
    """

    def __init__(self, keep_s: float = 0.25) -> None:
        self.keep_s = keep_s
        self._items: deque[tuple[float, float]] = deque()
        self._weak_since: float | None = None

    def clear(self) -> None:
        self._items.clear()
        self._weak_since = None

    def add(self, time_s: float, level_dbfs: float, weakening: bool = False) -> None:
        """One frame's level; ``weakening``: the register monitor warns of a break."""
        if weakening:
            if self._weak_since is None:
                self._weak_since = time_s
            return  # the fading level is not the blowing level
        self._weak_since = None
        if not math.isfinite(level_dbfs):
            return
        self._items.append((time_s, level_dbfs))
        while self._items and self._items[0][0] < time_s - max(self.keep_s, 2.0):
            self._items.popleft()

    def break_level(self, jump_time_s: float) -> float | None:
        """Median level from 100 ms to 40 ms before ``jump_time_s`` -- or before the start of
        the weakening that led to it --; else the last level."""
        ref = self._weak_since if self._weak_since is not None else jump_time_s
        lo, hi = ref - BREAK_LOOKBACK_S[0], ref - BREAK_LOOKBACK_S[1]
        span = [lv for t, lv in self._items if lo - 1e-9 <= t <= hi + 1e-9]
        if span:
            return statistics.median(span)
        return self._items[-1][1] if self._items else None


def fit_line(xs: Iterable[float], ys: Iterable[float]) -> LineFit | None:
    """Ordinary least squares with the slope's standard error.

    Returns None for fewer than three points or no spread in ``xs``.

    >>> f = fit_line([0.0, 1.0, 2.0, 3.0], [1.0, 3.0, 5.0, 7.5])
    >>> round(f.slope, 3), round(f.intercept, 3), round(f.slope_se, 3)
    (2.15, 0.9, 0.087)
    """
    acc = _Sums()
    for x, y in zip(xs, ys, strict=True):
        acc.add(x, y)
    return acc.fit()


class _Sums:
    """Running sums for a least-squares line, shifted by the first point for accuracy."""

    def __init__(self) -> None:
        self.n = 0
        self.x0 = self.y0 = 0.0
        self.sx = self.sy = self.sxx = self.sxy = self.syy = 0.0

    def add(self, x: float, y: float) -> None:
        if self.n == 0:
            self.x0, self.y0 = x, y
        dx, dy = x - self.x0, y - self.y0
        self.n += 1
        self.sx += dx
        self.sy += dy
        self.sxx += dx * dx
        self.sxy += dx * dy
        self.syy += dy * dy

    def fit(self) -> LineFit | None:
        n = self.n
        if n < 3:
            return None
        sxx = self.sxx - self.sx * self.sx / n
        if sxx <= 1e-12:
            return None
        sxy = self.sxy - self.sx * self.sy / n
        syy = self.syy - self.sy * self.sy / n
        slope = sxy / sxx
        rss = max(syy - slope * sxy, 0.0)
        se = math.sqrt(rss / (n - 2) / sxx)
        mean_x = self.x0 + self.sx / n
        mean_y = self.y0 + self.sy / n
        return LineFit(slope, mean_y - slope * mean_x, se, n)


@dataclass(frozen=True, slots=True)
class BlowingCurve:
    """Pitch against level for one held note.

    Attributes
    ----------
    note : str
        Held (fingered) note.
    midi : int
    start_s, end_s : float, seconds
        First and last frame of the run.
    levels_dbfs : tuple of float, dBFS
        Levels of the fitted frames (at most :data:`MAX_KEPT_POINTS`, evenly thinned).
    cents : tuple of float, cents
        Corrected cents of the same frames.
    n : int
        Frames fitted.
    slope_cents_per_db : float or None, cents/dB
        Least-squares slope; None with fewer than 3 frames or no level change.
    slope_se_cents_per_db : float or None, cents/dB
        Its standard error (frames taken as independent; see module docstring).
    intercept_cents : float or None, cents
        Fitted cents at 0 dBFS.
    level_min_dbfs, level_max_dbfs : float, dBFS
        Level range of the fitted frames.
    break_level_dbfs : float or None, dBFS
        Level at which the note broke into the next register; None if it did not.
    break_time_s : float or None, seconds
        Time of the first "jumped" frame.
    jumped_level_dbfs : float or None, dBFS
        Level of that frame.
    jump_kind : str
        "overblown" | "vented" | "" (no break).
    settings : SettingsKey
    """

    note: str
    midi: int
    start_s: float
    end_s: float
    levels_dbfs: tuple[float, ...]
    cents: tuple[float, ...]
    n: int
    slope_cents_per_db: float | None
    slope_se_cents_per_db: float | None
    intercept_cents: float | None
    level_min_dbfs: float
    level_max_dbfs: float
    break_level_dbfs: float | None
    break_time_s: float | None
    jumped_level_dbfs: float | None
    jump_kind: str
    settings: SettingsKey

    @property
    def level_range_db(self) -> float:
        """Level span of the fitted frames, dB."""
        return self.level_max_dbfs - self.level_min_dbfs if self.n else 0.0

    def cents_at(self, level_dbfs: float) -> float | None:
        """Fitted cents at a level (None without a fit)."""
        if self.slope_cents_per_db is None or self.intercept_cents is None:
            return None
        return self.intercept_cents + self.slope_cents_per_db * level_dbfs

    def describe(self) -> str:
        """One line for the terminal."""
        if self.slope_cents_per_db is None:
            slope = "no slope (level did not change)"
        else:
            slope = (
                f"{self.slope_cents_per_db:+.3f} ± {self.slope_se_cents_per_db or 0.0:.3f} c/dB "
                f"over {self.level_min_dbfs:.1f}..{self.level_max_dbfs:.1f} dBFS"
            )
        brk = (
            f"broke ({self.jump_kind or 'jump'}) at {self.break_level_dbfs:.1f} dBFS, t={self.break_time_s:.2f} s"
            if self.break_level_dbfs is not None and self.break_time_s is not None
            else "no break"
        )
        return f"blowing curve {self.note}: {slope}; {brk}"


MIN_SLOPE_SPAN_DB = 3.0
"""Smallest level span (dB) over which a slope in cents per dB is fitted: over less, the
fit divides the pitch scatter by almost nothing (common practice of the bench: a crescendo
for voicing spans well over 6 dB)."""


class _Run:
    """Frames of one held note being collected."""

    def __init__(self, key: tuple[int, SettingsKey], note: str, start_s: float) -> None:
        self.key = key
        self.note = note
        self.start_s = start_s
        self.end_s = start_s
        self.sums = _Sums()
        self.levels: list[float] = []
        self.cents: list[float] = []
        self.lo = math.inf
        self.hi = -math.inf
        self.history = LevelHistory()
        self.pending: deque[tuple[float, float, float]] = deque()
        self.broken = False
        self.break_level: float | None = None
        self.break_time: float | None = None
        self.jumped_level: float | None = None
        self.jump_kind = ""

    def offer(self, time_s: float, level: float, cents: float) -> None:
        """Queue a frame; frames older than the guard before a possible jump are fitted."""
        self.pending.append((time_s, level, cents))
        while self.pending and self.pending[0][0] < time_s - GUARD_S:
            _, lv, c = self.pending.popleft()
            self.add(lv, c)

    def add(self, level: float, cents: float) -> None:
        self.sums.add(level, cents)
        self.lo, self.hi = min(self.lo, level), max(self.hi, level)
        self.levels.append(level)
        self.cents.append(cents)
        if len(self.levels) > 2 * MAX_KEPT_POINTS:  # thin evenly, keep memory bounded
            self.levels = self.levels[::2]
            self.cents = self.cents[::2]

    def curve(self) -> BlowingCurve:
        sums, levels, cents = self.sums, self.levels, self.cents
        lo, hi = self.lo, self.hi
        if not self.broken and self.pending:  # queued frames count until a jump comes
            sums = copy.copy(self.sums)
            levels, cents = list(levels), list(cents)
            for _, lv, c in self.pending:
                sums.add(lv, c)
                levels.append(lv)
                cents.append(c)
                lo, hi = min(lo, lv), max(hi, lv)
        fit = sums.fit() if sums.n and hi - lo >= MIN_SLOPE_SPAN_DB else None
        step = max(1, math.ceil(len(levels) / MAX_KEPT_POINTS))
        midi, settings = self.key
        return BlowingCurve(
            note=self.note or note_name(midi),
            midi=midi,
            start_s=self.start_s,
            end_s=self.end_s,
            levels_dbfs=tuple(levels[::step]),
            cents=tuple(cents[::step]),
            n=sums.n,
            slope_cents_per_db=fit.slope if fit else None,
            slope_se_cents_per_db=fit.slope_se if fit else None,
            intercept_cents=fit.intercept if fit else None,
            level_min_dbfs=lo if sums.n else -math.inf,
            level_max_dbfs=hi if sums.n else -math.inf,
            break_level_dbfs=self.break_level,
            break_time_s=self.break_time,
            jumped_level_dbfs=self.jumped_level,
            jump_kind=self.jump_kind,
            settings=settings,
        )


class BlowingCurveTracker:
    """Build blowing curves from readings fed one at a time (live or from a log).

    Examples
    --------
    >>> from bench.reading import make_reading
    >>> from bench.tuning import TuningSettings
    >>> from dsp.frame import Frame
    >>> def pt(t, level, cents, reg="steady"):
    ...     f0 = 440.0 * 2 ** (cents / 1200)
    ...     jump = "overblown" if reg == "jumped" else None
    ...     frame = Frame(t, t, f0, 0.99, level, False, None, None, reg, jump, 440.0)
    ...     return make_reading(frame, TuningSettings())
    >>> tr = BlowingCurveTracker()
    >>> for i in range(300):
    ...     lvl = -30.0 + 0.05 * i
    ...     _ = tr.push(pt(i * 0.01, lvl, 0.6 * (lvl + 30.0)))
    >>> brk = tr.push(pt(3.0, -12.0, 1200.0, "jumped"))
    >>> round(brk.slope_cents_per_db, 3), round(brk.break_level_dbfs, 2)
    (0.6, -15.35)
    """

    def __init__(self) -> None:
        self.reset()

    def reset(self) -> None:
        """Back to the state after construction."""
        self._segmenter = NoteSegmenter()
        self._run: _Run | None = None
        self.finished: list[BlowingCurve] = []

    def current(self) -> BlowingCurve | None:
        """The curve of the held note now sounding (or the last one), None before any note."""
        if self._run is not None:
            return self._run.curve()
        return self.finished[-1] if self.finished else None

    def push(self, p: Reading) -> BlowingCurve | None:
        """Feed one reading.

        Returns
        -------
        BlowingCurve or None
            The curve up to the break when this reading is the first "jumped" one of the
            held note; None otherwise.
        """
        step = self._segmenter.push(p)
        if step.ended:
            self._close()
        if step.note_id is None:
            return None
        run = self._run
        if step.started or run is None:
            held = p.held_midi
            assert held is not None
            run = self._run = _Run((held, p.key), p.held_note, step.start_s)
        run.end_s = p.time_s
        if p.register_state == "jumped":
            if run.broken:
                return None
            run.broken = True
            run.pending.clear()  # the change itself is not part of the curve
            brk = run.history.break_level(p.time_s)
            run.break_level = brk if brk is not None else p.level_dbfs
            run.break_time = p.time_s
            run.jumped_level = p.level_dbfs
            run.jump_kind = p.jump
            return run.curve()
        if run.broken or p.cents is None or not math.isfinite(p.level_dbfs):
            return None
        run.history.add(p.time_s, p.level_dbfs, weakening=p.register_state == "weakening")
        if p.register_state == "weakening":
            return None  # harmonics fading before a break: not the note as blown
        if p.time_s - run.start_s < ATTACK_S - 1e-9:
            return None
        run.offer(p.time_s, p.level_dbfs, p.cents)
        return None

    def finish(self) -> BlowingCurve | None:
        """End of the stream; returns the last held note's curve."""
        run = self._run
        self._close()
        return run.curve() if run is not None else None

    def _close(self) -> None:
        if self._run is not None:
            self._run.pending.clear()  # the release is not part of the curve
            self.finished.append(self._run.curve())
            self._run = None


def _all_curves(readings: Iterable[Reading]) -> list[BlowingCurve]:
    tr = BlowingCurveTracker()
    for reading in readings:
        tr.push(reading)
    tr.finish()
    return tr.finished


def find_blowing_curves(
    readings: Iterable[Reading],
    *,
    min_range_db: float = 6.0,
    min_frames: int = 20,
) -> list[BlowingCurve]:
    """Blowing curves of every held note that changed level by ``min_range_db`` or more,
    or rose by ``MIN_SLOPE_SPAN_DB`` and broke into the next register (a crescendo), in
    playing order. A note that broke at a constant level shows no curve.

    Parameters
    ----------
    readings : iterable of Reading (live, or ``bench.framelog.iter_readings``)
    min_range_db : float, dB
        Smallest level span that counts as a crescendo.
    min_frames : int
        Fewest fitted frames.
    """
    return [
        c
        for c in _all_curves(readings)
        if c.n >= min_frames
        and (
            c.level_range_db >= min_range_db
            or (c.break_level_dbfs is not None and c.level_range_db >= MIN_SLOPE_SPAN_DB)
        )
    ]


def blowing_curve(
    readings: Iterable[Reading],
    note: str | int | None = None,
) -> BlowingCurve | None:
    """The blowing curve of one note.

    Parameters
    ----------
    readings : iterable of Reading (live, or ``bench.framelog.iter_readings``)
    note : str, int or None
        Held note (name or MIDI). All its runs under the first settings it was played with
        are pooled (a series of dynamics); the break is the first one seen. None: the held
        note with the widest level span.

    Returns
    -------
    BlowingCurve or None
        None when the note was not played.
    """
    curves = [c for c in _all_curves(readings) if c.n > 0 or c.break_level_dbfs is not None]
    if not curves:
        return None
    if note is None:
        return max(curves, key=lambda c: (c.level_range_db, c.n))
    if isinstance(note, str):
        from bench.tuning.notes import parse_note

        midi = parse_note(note)
    else:
        midi = int(note)
    mine = [c for c in curves if c.midi == midi]
    if not mine:
        return None
    mine = [c for c in mine if c.settings == mine[0].settings]
    if len(mine) == 1:
        return mine[0]
    acc = _Sums()
    levels: list[float] = []
    cents: list[float] = []
    for c in mine:
        levels.extend(c.levels_dbfs)
        cents.extend(c.cents)
    for x, y in zip(levels, cents, strict=True):
        acc.add(x, y)
    fit = acc.fit()
    broke = next((c for c in mine if c.break_level_dbfs is not None), None)
    first = mine[0]
    return BlowingCurve(
        note=first.note,
        midi=first.midi,
        start_s=first.start_s,
        end_s=mine[-1].end_s,
        levels_dbfs=tuple(levels),
        cents=tuple(cents),
        n=acc.n,
        slope_cents_per_db=fit.slope if fit else None,
        slope_se_cents_per_db=fit.slope_se if fit else None,
        intercept_cents=fit.intercept if fit else None,
        level_min_dbfs=min(levels) if levels else -math.inf,
        level_max_dbfs=max(levels) if levels else -math.inf,
        break_level_dbfs=broke.break_level_dbfs if broke else None,
        break_time_s=broke.break_time_s if broke else None,
        jumped_level_dbfs=broke.jumped_level_dbfs if broke else None,
        jump_kind=broke.jump_kind if broke else "",
        settings=first.settings,
    )
