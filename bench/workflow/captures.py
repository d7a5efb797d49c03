"""Captures: what each held note did, kept once it is over.

A *capture* sums up the steady state of one held note: its median corrected cents, how much
its frames spread, its level and harmonic balance, the settings it was measured under, and how
much louder it could be blown before it broke into the next register (when that was seen).

One capture per held note and pass (defaults of :class:`CaptureThresholds`):

* a *held note* is cut by the one rule of :mod:`bench.segment` (:class:`~bench.segment.NoteSegmenter`,
  keyed on the fingered note and the settings); it is judged when it ends;
* a capture describes the *fingered* note. When the held note broke into another register
  (the register monitor's "jumped" state: overblown or vented while the fingering was held),
  the capture stays under the fingered note, marked with the jump kind and the mode it
  sounded in, its cents from the steady part before the break (the frames from
  :data:`~bench.segment.GAP_S` before the break and the "weakening" that announced it are left
  out); without a steady part before the break its cents are empty. Frames of another
  sounding note or mode inside the held note (an octave slip) are left out;
* the steady part runs from the end of the attack to the release, judged by what the signal
  does, not by fixed times (:func:`find_steady_part`): the release is trimmed where the level
  falls fast, the attack where the level still rises fast and where the pitch has not yet
  settled on the note's later median (a decaying overshoot, the upper harmonics speaking
  first, the chiff), judged on a running median of five frames so that the few cents of
  frame-to-frame noise of a room or a breath do not cut the note;
* its cents are the median of the steady part, its spread the scaled median absolute
  deviation ``1.4826 * median(|c - median(c)|)`` (a robust standard deviation, equal to σ for
  normal data; scipy.stats.median_abs_deviation with ``scale="normal"``): a slow breath
  wander and a light vibrato widen the spread without moving the median far;
* a steady part whose level climbs faster than ``max_level_drift_db_per_s`` (a crescendo)
  keeps only its start, at the level the note was played at;
* no capture, with the reason kept (:attr:`CaptureDetector.last_skip`,
  :attr:`CaptureDetector.skips`): too short (a steady part under ``settle_s``), unsteady (the
  pitch never settled, or spread over ``max_spread_cents``), or locked to another note (a
  locked capture further than ``max_offset_cents`` from the locked note: no fingering of it
  sounds there). Held notes shorter than :data:`~bench.segment.MIN_NOTE_S` are blips, not
  notes.

Register: the register the instrument profile gives the fingered note (without a profile, 1).

Register margin: when the held note broke by overblowing (the first "jumped" frame, e.g. at
the top of a crescendo), the margin of every capture of that note under the same settings --
before or after, and the broken capture itself -- is the newest break level minus the
capture's level, dB. The break level is read as in :mod:`bench.workflow.blowing` (median level
from 100 ms to 40 ms before the first jumped frame, or before the weakening that led to it).
A vented jump is a leak, not the top of the note's dynamic range: it gives no margin.

File format (``<log stem>.captures.csv`` beside the frame log), UTF-8 CSV with ``\\r\\n`` line
ends and a header row, columns :data:`CAPTURE_COLUMNS`; a row with an ``index`` seen before
replaces the earlier row (a margin learnt later). Every text cell is written through
:func:`bench.framelog.safe_cell`.
"""

from __future__ import annotations

import csv
import io
import math
import statistics
from collections import deque
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Literal, Self

import numpy as np
from numpy.typing import NDArray

from bench.errors import LogError
from bench.framelog import number_cell, safe_cell
from bench.reading import Reading, SettingsKey
from bench.segment import GAP_S, MIN_NOTE_S, NoteSegmenter
from bench.workflow.blowing import LevelHistory, fit_line
from bench.workflow.profiles import InstrumentProfile

__all__ = [
    "CAPTURE_COLUMNS",
    "Capture",
    "CaptureDetector",
    "CaptureFile",
    "CaptureThresholds",
    "Skip",
    "SteadyPart",
    "capture_from_points",
    "capture_row",
    "captures_from_readings",
    "captures_path_for",
    "find_steady_part",
    "read_captures",
    "scaled_mad",
    "skipped_notes",
    "write_captures",
]

CaptureSource = Literal["auto", "manual"]

MAX_NOTE_FRAMES = 40_000
"""Most readings of one held note kept for its capture (over three minutes at a 5 ms hop);
a longer note is judged on its newest readings."""

CAPTURE_COLUMNS: tuple[str, ...] = (
    "index", "label", "source", "note", "midi", "register", "mode", "jump",
    "start_s", "end_s", "frames",
    "cents", "cents_spread", "cents_raw", "f0_hz", "target_hz",
    "level_dbfs", "level_min_dbfs", "level_max_dbfs",
    "odd_even_db", "h1_db", "h2_db", "h3_db", "h4_db", "h5_db", "h6_db", "h7_db", "h8_db",
    "register_margin_db", "break_level_dbfs",
    "temperament", "tonic", "a4_hz", "temp_c", "ref_temp_c", "rh_percent", "clock_ppm",
)  # fmt: skip
"""Columns of a captures file, in this order.

index (1, 2 ...), label (session label in force), source (auto | manual), note (the fingered
note, as the log spelled it; the locked note when one was locked), midi, register (1, 2, 3 ...:
the profile's register of the note), mode (sounding mode: the one it broke into when it broke;
blank if unknown), jump (overblown | vented when the held note broke into another register,
else blank; cents are then those of the steady part before the break, blank when there was
none), start_s / end_s (seconds, frame-log time of the first and last frame used),
frames (count), cents (median, corrected to the reference temperature), cents_spread (scaled
MAD, cents), cents_raw (median, uncorrected), f0_hz / target_hz (median, Hz), level_dbfs
(median), level_min_dbfs / level_max_dbfs, odd_even_db and h1_db..h8_db (medians, dB re the
strongest harmonic), register_margin_db (dB the level could rise before the note broke; blank
if no break was seen), break_level_dbfs (level at the break), then the settings: temperament,
tonic, a4_hz (Hz), temp_c and ref_temp_c (degC), rh_percent (blank: dry air), and clock_ppm (the
input clock's error taken out of the readings when the capture was taken, ppm; blank: none).

A file written before clock_ppm was added (the same columns without it) still reads, its
captures with ``clock_ppm`` None, and a resumed session appends rows in its layout."""

CAPTURE_COLUMNS_BEFORE_CLOCK: tuple[str, ...] = CAPTURE_COLUMNS[:-1]
"""Columns of a captures file written before ``clock_ppm`` was added."""


CAPTURES_LIMIT_BYTES = 64 << 20
"""Largest captures file read, bytes (a capture is a row of about 300 bytes)."""


@dataclass(frozen=True, slots=True)
class CaptureThresholds:
    """How a held note's steady part is found (see the module docstring).

    Attributes
    ----------
    settle_s : float > 0, seconds
        Shortest steady part that makes a capture (300 ms).
    tolerance_cents : float > 0, cents
        Least half-width of the band the pitch must settle in at the end of the attack (3 c;
        wider for a note whose frames spread more: 2.5 x their scaled MAD).
    manual_s : float > 0, seconds
        Default span of :meth:`CaptureDetector.capture_now` (the last 0.5 s).
    max_level_drift_db_per_s : float > 0, dB/s
        A steady part whose level climbs faster is a crescendo: only its start, at the
        level the note was played at, is used.
    level_lag_s : float > 0, seconds
        Span over which a rise (attack) or fall (release) of level is judged (50 ms).
    release_drop_db : float > 0, dB
        Level change over ``level_lag_s`` that marks the attack or the release (3 dB: a
        crescendo of 60 dB/s would be needed to reach it while playing).
    hold_s : float > 0, seconds
        How long the pitch must stay in the band for the attack to be over (60 ms).
    max_spread_cents : float > 0, cents
        A steady part spreading more (scaled MAD) is unsteady (25 c: wider than a light
        vibrato of ±15 c, whose scaled MAD is about 16 c).
    max_offset_cents : float > 0, cents
        A locked capture further than this from the locked note is refused: no fingering
        of the locked note sounds there (100 c, one semitone).
    """

    settle_s: float = 0.30
    tolerance_cents: float = 3.0
    manual_s: float = 0.5
    max_level_drift_db_per_s: float = 2.0
    level_lag_s: float = 0.05
    release_drop_db: float = 3.0
    hold_s: float = 0.06
    max_spread_cents: float = 25.0
    max_offset_cents: float = 100.0

    def __post_init__(self) -> None:
        for name in ("settle_s", "tolerance_cents", "manual_s", "max_level_drift_db_per_s", "level_lag_s",
                     "release_drop_db", "hold_s", "max_spread_cents", "max_offset_cents"):
            if not getattr(self, name) > 0:
                raise ValueError(f"{name} {getattr(self, name)!r} must be > 0")


@dataclass(frozen=True, slots=True)
class Capture:
    """One captured note; fields as in :data:`CAPTURE_COLUMNS` (units in the names)."""

    index: int
    label: str
    source: CaptureSource
    note: str
    midi: int
    register: int
    mode: int | None
    jump: str
    start_s: float
    end_s: float
    frames: int
    cents: float
    cents_spread: float
    cents_raw: float
    f0_hz: float
    target_hz: float
    level_dbfs: float
    level_min_dbfs: float
    level_max_dbfs: float
    odd_even_db: float | None
    harmonics_db: tuple[float | None, ...]
    register_margin_db: float | None
    break_level_dbfs: float | None
    temperament: str
    tonic: str
    a4_hz: float
    temp_c: float
    ref_temp_c: float
    rh_percent: float | None
    clock_ppm: float | None = None

    @property
    def settings(self) -> SettingsKey:
        """The settings the capture was taken under."""
        return SettingsKey(
            self.temperament, self.tonic, self.a4_hz, self.temp_c, self.ref_temp_c, self.rh_percent
        )

    @property
    def duration_s(self) -> float:
        """Length of the stretch used, seconds."""
        return self.end_s - self.start_s


def scaled_mad(values: Sequence[float]) -> float:
    """Scaled median absolute deviation, ``1.4826 * median(|x - median(x)|)``.

    A robust standard deviation (equals σ for normal data); 0 for fewer than two values.

    >>> scaled_mad([0.0, 1.0, 2.0, 3.0, 100.0])
    1.4826
    """
    if len(values) < 2:
        return 0.0
    med = statistics.median(values)
    return 1.4826 * statistics.median(abs(v - med) for v in values)


def _median_or_none(values: Iterable[float | None]) -> float | None:
    got = [v for v in values if v is not None and math.isfinite(v)]
    return statistics.median(got) if got else None


def _register_for(midi: int, profile: InstrumentProfile | None) -> int:
    """Register of the fingered note: the profile's, else 1."""
    if profile is not None:
        return profile.register_of(midi)
    return 1


def capture_from_points(
    points: Sequence[Reading],
    *,
    index: int,
    label: str = "",
    source: CaptureSource = "auto",
    profile: InstrumentProfile | None = None,
    break_level_dbfs: float | None = None,
    jumped: Reading | None = None,
    jump_mode: int | None = None,
    no_steady: bool = False,
    clock_ppm: float | None = None,
) -> Capture:
    """Sum up voiced points of one fingered note as a :class:`Capture`.

    Parameters
    ----------
    points : sequence of Reading
        Steady voiced frames of one fingered note (the first one gives note, settings and
        the mode it sounded in).
    index : int
        Capture number within the session.
    label : str
        Session label in force.
    source : "auto" | "manual"
    profile : InstrumentProfile or None
        Gives the register of the fingered note.
    break_level_dbfs : float or None, dBFS
        Level at which this note broke into the next register (overblown), if known.
    jumped : Reading or None
        First frame of the note in another register when it broke: the capture is marked
        with its jump kind and the mode it sounded in.
    jump_mode : int or None
        That mode when known from more frames than the first (which may still read the old
        one); else ``jumped.mode``.
    no_steady : bool
        The note broke before it was ever steady: ``points`` only name the note; cents,
        spread, f0 and level are left empty (NaN).
    clock_ppm : float or None, ppm
        The input clock's error taken out of the readings (None: no correction).

    Raises
    ------
    ValueError
        No voiced point given.
    """
    voiced = [p for p in points if p.voiced and p.cents is not None]
    if not voiced:
        raise ValueError("no voiced frames to capture; play a note first")
    first = voiced[0]
    nan = math.nan
    cents = [p.cents for p in voiced if p.cents is not None]
    levels = [p.level_dbfs for p in voiced if math.isfinite(p.level_dbfs)]
    level = statistics.median(levels) if levels and not no_steady else -math.inf
    harmonics = tuple(_median_or_none(p.harmonics_db[k] for p in voiced) for k in range(8))
    if no_steady:
        harmonics = (None,) * 8
    margin = None
    if break_level_dbfs is not None and math.isfinite(level):
        margin = break_level_dbfs - level
    # the fingered note: the one the register monitor held when the note broke; else the
    # note sounding (a note fingered in the second register from the start is that note)
    named = first.held if jumped is not None and first.held is not None else first.mapping
    assert named is not None  # voiced
    mode = first.mode
    if jumped is not None:
        mode = jump_mode if jump_mode is not None else jumped.mode
    s = first.key
    return Capture(
        index=index,
        label=label,
        source=source,
        note=named.note,
        midi=named.midi,
        register=_register_for(named.midi, profile),
        mode=mode,
        jump=((jumped.jump or "jumped") if jumped is not None else ""),
        start_s=voiced[0].time_s,
        end_s=voiced[-1].time_s if not no_steady else voiced[0].time_s,
        frames=0 if no_steady else len(voiced),
        cents=nan if no_steady else statistics.median(cents),
        cents_spread=nan if no_steady else scaled_mad(cents),
        cents_raw=nan if no_steady else (_median_or_none(p.cents_raw for p in voiced) or 0.0),
        f0_hz=nan if no_steady else (_median_or_none(p.f0_hz for p in voiced) or 0.0),
        target_hz=named.target_hz,
        level_dbfs=level,
        level_min_dbfs=min(levels) if levels and not no_steady else -math.inf,
        level_max_dbfs=max(levels) if levels and not no_steady else -math.inf,
        odd_even_db=None if no_steady else _median_or_none(p.odd_even_db for p in voiced),
        harmonics_db=harmonics,
        register_margin_db=margin,
        break_level_dbfs=break_level_dbfs if margin is not None else None,
        temperament=s.temperament,
        tonic=s.tonic,
        a4_hz=s.a4_hz,
        temp_c=s.temp_c,
        ref_temp_c=s.ref_temp_c,
        rh_percent=s.rh_percent,
        clock_ppm=clock_ppm,
    )


def _run_key_of(p: Reading) -> tuple[int, SettingsKey] | None:
    """Readings of one manual capture share the fingered note and settings (None: unvoiced)."""
    if not p.voiced or p.held_midi is None:
        return None
    return (p.held_midi, p.key)


def _running_median(values: NDArray[np.float64], half: int) -> NDArray[np.float64]:
    """Median of each value with ``half`` neighbours either side (fewer at the ends)."""
    n = values.size
    out = np.empty(n)
    width = 2 * half + 1
    if n >= width:  # the full windows at once; only the shortened ends one by one
        out[half : n - half] = np.median(np.lib.stride_tricks.sliding_window_view(values, width), axis=1)
        ends = [*range(half), *range(n - half, n)]
    else:
        ends = list(range(n))
    for i in ends:
        out[i] = float(np.median(values[max(0, i - half) : i + half + 1]))
    return out


@dataclass(frozen=True, slots=True)
class SteadyPart:
    """Where a held note was steady: indices into its pre-break frames, or why it was not."""

    first: int
    last: int
    reason: str | None


def find_steady_part(
    times_s: Sequence[float],
    cents: Sequence[float],
    levels_dbfs: Sequence[float],
    thresholds: CaptureThresholds,
) -> SteadyPart:
    """The steady part of one held note's voiced frames (before any break).

    Judged from the signal, not by fixed times (see the module docstring):

    1. the *release* is trimmed from the end while the level lies more than
       ``release_drop_db`` under its level ``level_lag_s`` earlier (a note's level falls
       fast when the breath stops; a room's decay is still a fall);
    2. the *attack* is trimmed from the start while the level still rises by more than
       ``release_drop_db`` over the next ``level_lag_s``;
    3. the *reference* is the median of the second half of what is left; the attack ends at
       the first frame from which the deviation from that reference, running median over
       five frames (frame-to-frame noise), stays within ``max(tolerance_cents,
       2.5 x scaled MAD of the second half)`` for ``hold_s`` (a decaying overshoot, the
       upper harmonics speaking first, the chiff: all pull the pitch off at the start).

    Parameters
    ----------
    times_s, cents, levels_dbfs : sequences of float (seconds, cents, dBFS), equal lengths
    thresholds : CaptureThresholds

    Returns
    -------
    SteadyPart
        ``reason`` None when the part spans at least ``settle_s``; else "too short" or
        "unsteady" with the figures.
    """
    th = thresholds
    t = np.asarray(times_s, dtype=np.float64)
    # decisions on values rounded coarser than the frame log keeps them (cents 3 decimals,
    # level 2), so a session live and read back from its log is cut at the same frames
    c = np.asarray(np.round(np.asarray(cents, dtype=np.float64), 2), dtype=np.float64)
    raw_lv = np.asarray(levels_dbfs, dtype=np.float64)
    lv = np.asarray(np.round(np.where(np.isfinite(raw_lv), raw_lv, -200.0), 1), dtype=np.float64)
    n = t.size
    if n == 0:
        return SteadyPart(0, -1, "too short (no voiced frames)")
    length_s = float(t[-1] - t[0])
    if length_s < th.settle_s:
        return SteadyPart(0, n - 1, f"too short ({length_s:.2f} s; hold it at least {th.settle_s + 0.2:.1f} s)")
    lag = th.level_lag_s
    # release: the level falls
    last = n - 1
    while last > 0:
        j = int(np.searchsorted(t, t[last] - lag))
        if lv[last] >= lv[min(j, last)] - th.release_drop_db:
            break
        last -= 1
    # attack: the level still rises
    first = 0
    while first < last:
        j = int(np.searchsorted(t, t[first] + lag, side="right")) - 1
        if lv[max(j, first)] <= lv[first] + th.release_drop_db:
            break
        first += 1
    if t[last] - t[first] < th.settle_s:
        return SteadyPart(first, last, f"too short ({t[last] - t[first]:.2f} s at a steady level)")
    # attack: the pitch settles on the note's later median
    mid = int(np.searchsorted(t, 0.5 * (t[first] + t[last])))
    later = c[mid : last + 1]
    ref = float(np.median(later))
    spread = scaled_mad(list(later))
    limit = max(th.tolerance_cents, 2.5 * spread)
    dev = np.abs(_running_median(np.asarray(c[first : last + 1] - ref, dtype=np.float64), 2))
    inside = dev <= limit
    start = None
    k = 0
    while k < inside.size:
        if inside[k]:
            end_k = k
            while end_k + 1 < inside.size and inside[end_k + 1]:
                end_k += 1
            if t[first + end_k] - t[first + k] >= th.hold_s or end_k == inside.size - 1:
                start = first + k
                break
            k = end_k + 1
        else:
            k += 1
    if start is None or t[last] - t[start] < th.settle_s:
        return SteadyPart(first, last, "unsteady (the pitch never settled)")
    steady = list(c[start : last + 1])
    if scaled_mad(steady) > th.max_spread_cents:
        return SteadyPart(start, last, f"unsteady (spread {scaled_mad(steady):.1f} c)")
    return SteadyPart(start, last, None)


def _jump_mode(frames: Sequence[Reading]) -> int | None:
    """The mode most jumped frames sounded in (None: no jumped frame with a known mode)."""
    modes = [q.mode for q in frames if q.register_state == "jumped" and q.mode is not None]
    return statistics.mode(modes) if modes else None


@dataclass(frozen=True, slots=True)
class Skip:
    """A held note that gave no capture, and why."""

    time_s: float
    note: str
    reason: str

    def __str__(self) -> str:
        return f"{self.note} at {self.time_s:.2f} s not captured: {self.reason}"


class CaptureDetector:
    """One capture per held note: its steady state, filed under the fingered note.

    Parameters
    ----------
    profile : InstrumentProfile or None
        Gives the register of each captured note (see module docstring).
    label : str
        Session label put on each capture; change it with :attr:`label` between passes
        ("after undercutting hole 3").
    auto : bool
        Capture held notes automatically. When False, :meth:`push` only tracks the
        stream, and captures come from :meth:`capture_now`.
    thresholds : CaptureThresholds
    first_index : int
        Number of the first capture (continue a session: ``len(old) + 1``).
    clock_ppm : float or None, ppm
        The input clock's error the readings were corrected for, put on each capture.

    Notes
    -----
    Block-by-block equals one-shot: feeding the same frames through :meth:`push` (and then
    :meth:`finish`) gives the same captures however the caller splits them, and
    :meth:`reset` followed by the same frames gives the same captures again.

    Examples
    --------
    >>> from bench.reading import make_reading
    >>> from bench.tuning import TuningSettings
    >>> from dsp.frame import Frame
    >>> def pt(t, c):
    ...     f0 = 440.0 * 2 ** (c / 1200)
    ...     frame = Frame(t, t, f0, 0.99, -20.0, False, (0.0,) * 8, 3.0, "steady", None, f0)
    ...     return make_reading(frame, TuningSettings())
    >>> det = CaptureDetector()
    >>> got = [det.push(pt(i * 0.01, 2.0 + 0.1 * (i % 3))) for i in range(100)]
    >>> cap = det.finish()
    >>> cap.note, round(cap.cents, 1), cap.frames, cap.start_s
    ('A4', 2.1, 100, 0.0)
    """

    def __init__(
        self,
        *,
        profile: InstrumentProfile | None = None,
        label: str = "",
        auto: bool = True,
        thresholds: CaptureThresholds | None = None,
        first_index: int = 1,
        clock_ppm: float | None = None,
    ) -> None:
        self.profile = profile
        self.label = label
        self.auto = auto
        self.clock_ppm = clock_ppm
        self.thresholds = thresholds or CaptureThresholds()
        self._first_index = int(first_index)
        self.reset()

    # -- state -------------------------------------------------------------------------------

    def reset(self) -> None:
        """Forget everything: back to the state after construction (label and auto kept)."""
        self.captures: list[Capture] = []
        self.skips: list[Skip] = []
        """Held notes that gave no capture, with the reason, oldest first."""
        self.last_skip: str | None = None
        """One line: why the newest held note (or capture request) gave no capture; None
        once a capture is taken."""
        self._next_index = self._first_index
        self._updates: list[Capture] = []
        self._breaks: dict[tuple[int, SettingsKey], float] = {}
        self._recent: deque[Reading] = deque()
        self._held_levels = LevelHistory()
        self._held = NoteSegmenter()
        self._held_key: tuple[int, SettingsKey] | None = None
        self._held_broken = False
        # the held note's readings, bounded (a drone of hours keeps its newest minutes)
        self._note: deque[Reading] = deque(maxlen=MAX_NOTE_FRAMES)
        self._capture_held: dict[int, tuple[int, SettingsKey]] = {}

    def take_updates(self) -> list[Capture]:
        """Captures whose register margin was learnt after they were returned.

        Each replaces the capture with the same :attr:`Capture.index`; the list is emptied.
        """
        out, self._updates = self._updates, []
        return out

    @property
    def settled(self) -> bool:
        """True while the current held note has sounded steadily for ``settle_s``."""
        if not self._note:
            return False
        pre = [p for p in self._note if p.register_state != "jumped" and p.cents is not None]
        if not pre:
            return False
        part = find_steady_part(
            [p.time_s for p in pre], [float(p.cents or 0.0) for p in pre],
            [p.level_dbfs for p in pre], self.thresholds,
        )  # fmt: skip
        return part.reason is None

    # -- feeding -----------------------------------------------------------------------------

    def push(self, p: Reading) -> Capture | None:
        """Feed one reading; return a capture when a held note has just ended.

        Parameters
        ----------
        p : Reading
            The next reading (live, or read back from a frame log).

        Returns
        -------
        Capture or None
            The new automatic capture (only when :attr:`auto` is on).
        """
        th = self.thresholds
        if p.voiced:
            self._recent.append(p)
            while self._recent and self._recent[0].time_s < p.time_s - max(th.manual_s, 5.0):
                self._recent.popleft()
        step = self._held.push(p)
        result = None
        if step.ended or step.started:
            result = self._close_note()
        if step.ended:
            self._held_key = None
        if step.note_id is None:
            return result
        if step.started or self._held_key is None:
            held = p.held_midi
            assert held is not None
            self._held_key = (held, p.key)
            self._held_broken = False
            self._held_levels.clear()
        self._note.append(p)
        self._track_break(p)
        return result

    def forget_note_so_far(self) -> None:
        """Leave the readings of the held note so far out of its automatic capture (they
        were taken with the reference tone sounding); the rest of the note still counts."""
        self._note.clear()

    def finish(self) -> Capture | None:
        """End of the stream: close the current held note; return its capture if any."""
        self._held.finish()
        cap = self._close_note()
        self._held_key = None
        return cap

    def capture_now(self, last_s: float | None = None, *, last_frames: int | None = None) -> Capture | None:
        """Capture the current note from the last ``last_s`` seconds, settled or not.

        Uses the voiced frames of the newest fingered note (same note and settings) within
        ``last_s`` (default ``thresholds.manual_s``) of the newest frame, or its last
        ``last_frames`` frames when that is given. Works with :attr:`auto` on or off. A note
        that broke is filed under the fingered note, marked with its jump. Returns None
        when no voiced frame is at hand or the capture is refused (:attr:`last_skip` says
        why).
        """
        span = self.thresholds.manual_s if last_s is None else float(last_s)
        if last_frames is not None:
            if last_frames < 1:
                raise ValueError(f"last_frames {last_frames} must be >= 1")
            span = max(self.thresholds.manual_s, 5.0)
        if not self._recent:
            self.last_skip = "nothing is sounding to capture"
            return None
        newest = self._recent[-1]
        key = _run_key_of(newest)
        picked: list[Reading] = []
        for q in reversed(self._recent):
            if q.time_s < newest.time_s - span or _run_key_of(q) != key:
                break
            picked.append(q)
            if last_frames is not None and len(picked) >= last_frames:
                break
        picked.reverse()
        jumped = [q for q in picked if q.register_state == "jumped"]
        pre = [q for q in picked if q.register_state != "jumped"]
        if jumped:
            first_jump = jumped[0].time_s
            pre = [q for q in pre if q.time_s < first_jump]
        return self._make(pre, "manual", jumped[0] if jumped else None, newest, _jump_mode(picked))

    # -- internals ---------------------------------------------------------------------------

    def _close_note(self) -> Capture | None:
        """The held note is over: its capture (when auto), or the reason there is none."""
        frames = list(self._note)
        self._note.clear()
        if not frames or not self.auto:
            return None
        if frames[-1].time_s - frames[0].time_s < MIN_NOTE_S:
            return None  # a blip, not a note (bench.segment)
        first_jump = next((q for q in frames if q.register_state == "jumped"), None)
        pre = frames
        if first_jump is not None:
            # the steady part ends before the change of register (and its weakening)
            cut = first_jump.time_s - GAP_S
            pre = [q for q in frames if q.time_s < cut and q.register_state == "steady"]
        # the sounding note and mode most of the note's frames read (stray octave slips out)
        common = statistics.mode([(q.midi, q.mode) for q in pre]) if pre else None
        pre = [q for q in pre if q.cents is not None and (q.midi, q.mode) == common]
        part = find_steady_part(
            [q.time_s for q in pre], [float(q.cents or 0.0) for q in pre],
            [q.level_dbfs for q in pre], self.thresholds,
        )  # fmt: skip
        if part.reason is not None and first_jump is None:
            self._skip(frames, part.reason)
            return None
        steady = pre[part.first : part.last + 1] if part.reason is None else []
        steady = self._below_crescendo(steady)
        return self._make(steady, "auto", first_jump, frames[0], _jump_mode(frames))

    def _below_crescendo(self, steady: list[Reading]) -> list[Reading]:
        """A steady part whose level climbs (a crescendo): keep the level it was played at
        (frames within 1.5 dB of the level of its first ``settle_s``, up to the first one
        blown harder); when that leaves less than ``settle_s``, the whole part."""
        if len(steady) < 3:
            return steady
        drift = fit_line([q.time_s for q in steady], [q.level_dbfs for q in steady])
        if drift is None or abs(drift.slope) <= self.thresholds.max_level_drift_db_per_s:
            return steady
        t0 = steady[0].time_s
        head = [q.level_dbfs for q in steady if q.time_s <= t0 + self.thresholds.settle_s]
        ref = statistics.median(head)
        kept: list[Reading] = []
        for q in steady:
            if abs(q.level_dbfs - ref) > 1.5:
                if q.level_dbfs > ref:
                    break  # blown harder than the note was played at
                continue
            kept.append(q)
        if not kept or kept[-1].time_s - kept[0].time_s < self.thresholds.settle_s:
            return steady  # no steady level to keep: the whole steady part, as played
        return kept

    def _skip(self, frames: Sequence[Reading], reason: str) -> None:
        first = frames[0]
        skip = Skip(first.time_s, first.held_note, reason)
        self.skips.append(skip)
        self.last_skip = str(skip)

    def _make(
        self,
        points: Sequence[Reading],
        source: CaptureSource,
        jumped: Reading | None,
        first: Reading,
        jump_mode: int | None = None,
    ) -> Capture | None:
        """A capture of the fingered note of ``first`` from ``points`` (its steady frames);
        ``jumped`` is its first frame in another register when it broke."""
        th = self.thresholds
        if not points and jumped is None:
            self.last_skip = "nothing is sounding to capture"
            return None
        held = first.held_midi
        if points:
            med = statistics.median(float(q.cents or 0.0) for q in points)
            if first.locked_midi is not None and abs(med) > th.max_offset_cents:
                self._skip(
                    points,
                    f"locked to {first.locked_note or first.held_note} but the note sounded "
                    f"{med:+.0f} c from it (beyond ±{th.max_offset_cents:g} c); lock the note you finger or unlock",
                )
                return None
        brk = None
        if held is not None:
            brk = self._breaks.get((held, first.key))
        cap = capture_from_points(
            points or [first],
            index=self._next_index,
            label=self.label,
            source=source,
            profile=self.profile,
            break_level_dbfs=brk,
            jumped=jumped,
            jump_mode=jump_mode,
            no_steady=not points,
            clock_ppm=self.clock_ppm,
        )
        self._next_index += 1
        self.captures.append(cap)
        self.last_skip = None
        if held is not None:
            self._capture_held[cap.index] = (held, first.key)
        return cap

    def _track_break(self, p: Reading) -> None:
        """Follow the held note's level; at its first overblown frame record the break and
        give every capture of the note its margin.

        A vented jump is a leak, not a limit of the breath: it gives no margin."""
        assert self._held_key is not None
        if p.register_state == "jumped":
            if not self._held_broken:
                self._held_broken = True
                if p.jump != "overblown":
                    return
                brk = self._held_levels.break_level(p.time_s)
                level = brk if brk is not None else p.level_dbfs
                self._breaks[self._held_key] = level
                self._fill_margins(self._held_key, level)
            return
        self._held_levels.add(p.time_s, p.level_dbfs, weakening=p.register_state == "weakening")

    def _fill_margins(self, key: tuple[int, SettingsKey], break_level_dbfs: float) -> None:
        """Give every capture of the held note ``key`` its margin to the newest break."""
        for i, cap in enumerate(self.captures):
            if self._capture_held.get(cap.index) == key and math.isfinite(cap.level_dbfs):
                new = replace(
                    cap,
                    register_margin_db=break_level_dbfs - cap.level_dbfs,
                    break_level_dbfs=break_level_dbfs,
                )
                self.captures[i] = new
                self._updates.append(new)


def captures_from_readings(
    readings: Iterable[Reading],
    *,
    profile: InstrumentProfile | None = None,
    label: str = "",
    thresholds: CaptureThresholds | None = None,
) -> list[Capture]:
    """Automatic captures of a whole recording's readings (live, or
    :func:`bench.framelog.iter_readings` of a frame log).

    Register margins learnt from a later break are filled in. See :class:`CaptureDetector`.
    """
    det = CaptureDetector(profile=profile, label=label, thresholds=thresholds)
    for reading in readings:
        det.push(reading)
    det.finish()
    return list(det.captures)


def skipped_notes(
    readings: Iterable[Reading],
    *,
    profile: InstrumentProfile | None = None,
    thresholds: CaptureThresholds | None = None,
) -> list[Skip]:
    """Held notes of a recording's readings that gave no automatic capture, with the reason
    (too short, unsteady, locked to another note)."""
    det = CaptureDetector(profile=profile, thresholds=thresholds)
    for reading in readings:
        det.push(reading)
    det.finish()
    return list(det.skips)


# --- files --------------------------------------------------------------------------------


def captures_path_for(log_path: str | Path) -> Path:
    """``<log stem>.captures.csv`` beside a session's frame log.

    >>> captures_path_for("logs/session-20260101-101500.csv").as_posix()
    'logs/session-20260101-101500.captures.csv'
    """
    p = Path(log_path)
    return p.with_name(f"{p.stem}.captures.csv")




def capture_row(cap: Capture) -> list[str]:
    """The CSV cells of one capture (every text cell spreadsheet-safe)."""
    return [
        str(cap.index),
        _quote(cap.label),
        cap.source,
        _quote(cap.note),
        str(cap.midi),
        str(cap.register),
        "" if cap.mode is None else str(cap.mode),
        cap.jump,
        number_cell(cap.start_s, 4),
        number_cell(cap.end_s, 4),
        str(cap.frames),
        number_cell(cap.cents, 3),
        number_cell(cap.cents_spread, 3),
        number_cell(cap.cents_raw, 3),
        number_cell(cap.f0_hz, 4),
        number_cell(cap.target_hz, 4),
        number_cell(cap.level_dbfs, 2),
        number_cell(cap.level_min_dbfs, 2),
        number_cell(cap.level_max_dbfs, 2),
        number_cell(cap.odd_even_db, 2),
        *(number_cell(h, 2) for h in cap.harmonics_db),
        number_cell(cap.register_margin_db, 2),
        number_cell(cap.break_level_dbfs, 2),
        _quote(cap.temperament),
        _quote(cap.tonic),
        number_cell(cap.a4_hz, 3),
        number_cell(cap.temp_c, 2),
        number_cell(cap.ref_temp_c, 2),
        number_cell(cap.rh_percent, 1),
        number_cell(cap.clock_ppm, 3),
    ]


class CaptureFile:
    """Append captures to a captures CSV, flushing every row.

    Parameters
    ----------
    path : Path
        File to write; created with its header, or appended to when it already is a
        captures file (a resumed session).

    Raises
    ------
    LogError
        The file cannot be written, or exists and is not a captures file.
    """

    def __init__(self, path: str | Path) -> None:
        self.path = Path(path)
        self._width = len(CAPTURE_COLUMNS)
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            fresh = not self.path.exists() or self.path.stat().st_size == 0
            if not fresh:
                with open(self.path, encoding="utf-8", newline="") as f:
                    header = next(csv.reader(f), [])
                if tuple(header) not in (CAPTURE_COLUMNS, CAPTURE_COLUMNS_BEFORE_CLOCK):
                    raise LogError(
                        f"{self.path} exists and is not a captures file; move it or choose another log name"
                    )
                self._width = len(header)  # a file from before clock_ppm goes on in its own layout
            self._file: io.TextIOWrapper | None = open(  # noqa: SIM115 - closed in close()
                self.path, "a", encoding="utf-8", newline=""
            )
        except UnicodeDecodeError:
            raise LogError(f"{self.path} exists and is not a captures file; move it") from None
        except OSError as exc:
            raise LogError(f"cannot write captures to {self.path}: {exc.strerror or exc}") from None
        self._writer = csv.writer(self._file)
        if fresh:
            self._writer.writerow(CAPTURE_COLUMNS)
            self._file.flush()

    def write(self, cap: Capture) -> None:
        """Append one capture (or a replacement with the same index) and flush."""
        if self._file is None:
            raise LogError(f"captures file {self.path} is closed")
        try:
            self._writer.writerow(capture_row(cap)[: self._width])
            self._file.flush()
        except OSError as exc:
            raise LogError(f"writing captures to {self.path} failed: {exc.strerror or exc}") from None

    def close(self) -> None:
        """Close; safe to call twice."""
        if self._file is not None:
            f, self._file = self._file, None
            f.close()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def write_captures(path: str | Path, captures: Iterable[Capture]) -> Path:
    """Write captures to a new captures file (replacing one that exists); return the path."""
    path = Path(path)
    if path.exists():
        try:
            path.unlink()
        except OSError as exc:
            raise LogError(f"cannot replace {path}: {exc.strerror or exc}") from None
    with CaptureFile(path) as f:
        for cap in captures:
            f.write(cap)
    return path


def _quote(text: str) -> str:
    """Spreadsheet-safe text cell that reads back exactly: a text that starts with ``'``
    gets one more, so :func:`_unquote` can always take the first one off."""
    return "'" + text if text.startswith("'") else safe_cell(text)


def _unquote(text: str) -> str:
    return text.removeprefix("'")


def _opt(text: str) -> float | None:
    text = text.strip()
    if not text:
        return None
    return float(text)


def read_captures(path: str | Path) -> list[Capture]:
    """Captures of a captures file, in index order; later rows replace earlier ones.

    A torn last line (a killed writer) is dropped. The ``'`` that made a text cell
    spreadsheet-safe is taken off again.

    Raises
    ------
    LogError
        Missing file, wrong header, or a cell that is not a number where one belongs
        (the message names file, line and column).
    """
    from bench.safeio import FileRefused, read_text_file

    path = Path(path)
    if not path.exists() and not path.is_symlink():
        raise LogError(f"no such captures file: {path}")
    try:  # bounded, and only a regular file: a pipe or /dev/zero is refused, never read forever
        text = read_text_file(path, limit_bytes=CAPTURES_LIMIT_BYTES)
    except FileRefused as exc:
        raise LogError(f"{path} cannot be read as a captures file ({exc}); give a .captures.csv written by bench") from None
    if text and not text.endswith("\n"):
        text = text[: text.rfind("\n") + 1]
    reader = csv.reader(io.StringIO(text, newline=""))
    header = next(reader, None)
    if header is None or tuple(header) not in (CAPTURE_COLUMNS, CAPTURE_COLUMNS_BEFORE_CLOCK):
        raise LogError(f"{path} is not a captures file (its header differs); give a file written by bench")
    columns = tuple(header)
    by_index: dict[int, Capture] = {}
    for line_no, cells in enumerate(reader, start=2):
        if len(cells) < len(columns):
            continue
        r = dict(zip(columns, cells, strict=False))
        col = ""
        try:
            col = "index"
            index = int(r["index"])
            col = "source"
            source = r["source"]
            if source not in ("auto", "manual"):
                raise ValueError(source)
            values: dict[str, float | None] = {}
            for col in columns:
                if col in ("index", "label", "source", "note", "jump", "temperament", "tonic"):
                    continue
                values[col] = _opt(r[col])
            col = "midi"
            cap = Capture(
                index=index,
                label=_unquote(r["label"]),
                source=source,  # type: ignore[arg-type]
                note=_unquote(r["note"]),
                midi=int(r["midi"]),
                register=int(r["register"]),
                mode=int(r["mode"]) if r["mode"].strip() else None,
                jump=r["jump"].strip(),
                start_s=values["start_s"] or 0.0,
                end_s=values["end_s"] or 0.0,
                frames=int(r["frames"]),
                cents=values["cents"] if values["cents"] is not None else math.nan,
                cents_spread=values["cents_spread"] or 0.0,
                cents_raw=values["cents_raw"] if values["cents_raw"] is not None else math.nan,
                f0_hz=values["f0_hz"] or 0.0,
                target_hz=values["target_hz"] or 0.0,
                level_dbfs=values["level_dbfs"] if values["level_dbfs"] is not None else -math.inf,
                level_min_dbfs=values["level_min_dbfs"] if values["level_min_dbfs"] is not None else -math.inf,
                level_max_dbfs=values["level_max_dbfs"] if values["level_max_dbfs"] is not None else -math.inf,
                odd_even_db=values["odd_even_db"],
                harmonics_db=tuple(values[f"h{k}_db"] for k in range(1, 9)),
                register_margin_db=values["register_margin_db"],
                break_level_dbfs=values["break_level_dbfs"],
                temperament=_unquote(r["temperament"]),
                tonic=_unquote(r["tonic"]),
                a4_hz=values["a4_hz"] or 440.0,
                temp_c=values["temp_c"] if values["temp_c"] is not None else 20.0,
                ref_temp_c=values["ref_temp_c"] if values["ref_temp_c"] is not None else 20.0,
                rh_percent=values["rh_percent"],
                clock_ppm=values.get("clock_ppm"),
            )
        except ValueError:
            raise LogError(
                f"{path}:{line_no}: column {col} holds {r.get(col, '')!r}, not a valid value; "
                "repair or delete that line"
            ) from None
        by_index[index] = cap
    return [by_index[i] for i in sorted(by_index)]
