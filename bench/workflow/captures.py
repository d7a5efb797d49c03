"""Captures: what each note did, kept once it has settled.

A *capture* sums up one steady stretch of one note: its median corrected cents, how much the
frames spread, its level and harmonic balance, the settings it was measured under, and how
much louder it could be blown before it broke into the next register (when that was seen).

When is a note settled?  (defaults of :class:`CaptureThresholds`)

* a *run* is a sequence of voiced readings mapped to the same note, in the same sounding mode
  and under the same settings, cut by the held-note rule of :mod:`bench.segment` (a gap over
  :data:`~bench.segment.GAP_S`, 60 ms, beyond the spacing of the readings, or another note
  lasting :data:`~bench.segment.STRAY_S`; shorter strays are skipped);
* the first :data:`~bench.segment.ATTACK_S` (150 ms) of a run are the attack and are never used;
* the run is *settled* once every frame of the last ``settle_s`` (300 ms) lies within
  ``tolerance_cents`` (±3 c) of those frames' median; that median is the stretch's reference;
* the steady stretch goes on while frames stay within ±3 c of the reference (stray frames,
  off in pitch, are skipped for up to :data:`~bench.segment.GAP_S`); it ends when frames stay
  outside for that long, when the run ends, or when the sound stops. Its frames make one
  capture.

Spread is the scaled median absolute deviation of the stretch's corrected cents,
``1.4826 * median(|c - median(c)|)``: a robust estimate of the frame-to-frame standard
deviation (equals σ for normally distributed frames; scipy.stats.median_abs_deviation with
``scale="normal"``).

A crescendo or diminuendo is a blowing curve, not a capture: a stretch whose level changes
faster than ``max_level_drift_db_per_s`` (2 dB/s, least-squares slope of level against time)
is not captured automatically.

Register: when the frames are in a "jumped" state (the held note broke into another mode
while the same fingering was held), the sounding mode from the ratio of the sounding to the
held fundamental (2 octave, 3 twelfth ...); otherwise the register the instrument profile puts
the sounding note in (the player chose the fingering); without a profile, the mode if known,
else 1.

Register margin: when the held note broke into the next register (the first frame of a held
note whose register state is "jumped", e.g. at the top of a crescendo), the margin of every
capture of that note under the same settings -- before or after -- is the newest such break
level minus the capture's level, dB. The break level is read as in :mod:`bench.workflow.blowing` (median
level from 100 ms to 40 ms before the first jumped frame: the blowing level that broke the
note, clear of the change itself).

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

from bench.errors import LogError
from bench.framelog import number_cell, safe_cell
from bench.reading import Reading, SettingsKey
from bench.segment import ATTACK_S, GAP_S, NoteSegmenter
from bench.workflow.blowing import LevelHistory, fit_line
from bench.workflow.profiles import InstrumentProfile

__all__ = [
    "CAPTURE_COLUMNS",
    "Capture",
    "CaptureDetector",
    "CaptureFile",
    "CaptureThresholds",
    "capture_from_points",
    "capture_row",
    "captures_from_readings",
    "captures_path_for",
    "read_captures",
    "scaled_mad",
    "write_captures",
]

CaptureSource = Literal["auto", "manual"]

CAPTURE_COLUMNS: tuple[str, ...] = (
    "index", "label", "source", "note", "midi", "register", "mode", "jump",
    "start_s", "end_s", "frames",
    "cents", "cents_spread", "cents_raw", "f0_hz", "target_hz",
    "level_dbfs", "level_min_dbfs", "level_max_dbfs",
    "odd_even_db", "h1_db", "h2_db", "h3_db", "h4_db", "h5_db", "h6_db", "h7_db", "h8_db",
    "register_margin_db", "break_level_dbfs",
    "temperament", "tonic", "a4_hz", "temp_c", "ref_temp_c", "rh_percent",
)  # fmt: skip
"""Columns of a captures file, in this order.

index (1, 2 ...), label (session label in force), source (auto | manual), note (sounding,
as the log spelled it), midi, register (1, 2, 3 ...), mode (sounding mode from the held note,
blank if unknown), jump (overblown | vented when the capture is of a held note that broke
into that mode, else blank), start_s / end_s (seconds, frame-log time of the first and last frame used),
frames (count), cents (median, corrected to the reference temperature), cents_spread (scaled
MAD, cents), cents_raw (median, uncorrected), f0_hz / target_hz (median, Hz), level_dbfs
(median), level_min_dbfs / level_max_dbfs, odd_even_db and h1_db..h8_db (medians, dB re the
strongest harmonic), register_margin_db (dB the level could rise before the note broke; blank
if no break was seen), break_level_dbfs (level at the break), then the settings: temperament,
tonic, a4_hz (Hz), temp_c and ref_temp_c (degC), rh_percent (blank: dry air)."""


CAPTURES_LIMIT_BYTES = 64 << 20
"""Largest captures file read, bytes (a capture is a row of about 300 bytes)."""


@dataclass(frozen=True, slots=True)
class CaptureThresholds:
    """When a note counts as settled (see the module docstring).

    Attributes
    ----------
    settle_s : float > 0, seconds
        How long the note must stay within ``tolerance_cents`` before it counts (300 ms).
    tolerance_cents : float > 0, cents
        Half-width of the steadiness band (3 c).
    manual_s : float > 0, seconds
        Default span of :meth:`CaptureDetector.capture_now` (the last 0.5 s).
    max_level_drift_db_per_s : float > 0, dB/s
        Automatic captures skip stretches whose level changes faster (a crescendo).
    """

    settle_s: float = 0.30
    tolerance_cents: float = 3.0
    manual_s: float = 0.5
    max_level_drift_db_per_s: float = 2.0

    def __post_init__(self) -> None:
        for name in ("settle_s", "tolerance_cents", "manual_s", "max_level_drift_db_per_s"):
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


def _register_for(point: Reading, profile: InstrumentProfile | None) -> int:
    mode = point.mode
    if point.register_state == "jumped" and mode is not None and mode > 1:
        return mode
    if profile is not None and point.midi is not None:
        return profile.register_of(point.midi)
    return mode or 1


def capture_from_points(
    points: Sequence[Reading],
    *,
    index: int,
    label: str = "",
    source: CaptureSource = "auto",
    profile: InstrumentProfile | None = None,
    break_level_dbfs: float | None = None,
) -> Capture:
    """Sum up voiced points of one note as a :class:`Capture`.

    Parameters
    ----------
    points : sequence of Reading
        Voiced frames of one note (the first one gives note, mode and settings).
    index : int
        Capture number within the session.
    label : str
        Session label in force.
    source : "auto" | "manual"
    profile : InstrumentProfile or None
        Gives the register of first-mode notes.
    break_level_dbfs : float or None, dBFS
        Level at which this note broke into the next register, if known.

    Raises
    ------
    ValueError
        No voiced point given.
    """
    voiced = [p for p in points if p.voiced and p.cents is not None]
    if not voiced:
        raise ValueError("no voiced frames to capture; play a note first")
    first = voiced[0]
    cents = [p.cents for p in voiced if p.cents is not None]
    levels = [p.level_dbfs for p in voiced if math.isfinite(p.level_dbfs)]
    level = statistics.median(levels) if levels else -math.inf
    harmonics = tuple(_median_or_none(p.harmonics_db[k] for p in voiced) for k in range(8))
    mode = first.mode
    jumped = first.register_state == "jumped"
    margin = None
    if break_level_dbfs is not None and not jumped and math.isfinite(level):
        margin = break_level_dbfs - level
    s = first.key
    return Capture(
        index=index,
        label=label,
        source=source,
        note=first.note,
        midi=int(first.midi) if first.midi is not None else 0,
        register=_register_for(first, profile),
        mode=mode,
        jump=(first.jump or "jumped") if jumped else "",
        start_s=voiced[0].time_s,
        end_s=voiced[-1].time_s,
        frames=len(voiced),
        cents=statistics.median(cents),
        cents_spread=scaled_mad(cents),
        cents_raw=_median_or_none(p.cents_raw for p in voiced) or 0.0,
        f0_hz=_median_or_none(p.f0_hz for p in voiced) or 0.0,
        target_hz=_median_or_none(p.target_hz for p in voiced) or 0.0,
        level_dbfs=level,
        level_min_dbfs=min(levels) if levels else -math.inf,
        level_max_dbfs=max(levels) if levels else -math.inf,
        odd_even_db=_median_or_none(p.odd_even_db for p in voiced),
        harmonics_db=harmonics,
        register_margin_db=margin,
        break_level_dbfs=break_level_dbfs if margin is not None else None,
        temperament=s.temperament,
        tonic=s.tonic,
        a4_hz=s.a4_hz,
        temp_c=s.temp_c,
        ref_temp_c=s.ref_temp_c,
        rh_percent=s.rh_percent,
    )


def _run_key_of(p: Reading) -> tuple[int, int | None, bool, SettingsKey] | None:
    """Readings of one run share note, mode, jumped state and settings (None: unvoiced)."""
    if not p.voiced or p.midi is None:
        return None
    return (p.midi, p.mode, p.register_state == "jumped", p.key)


class CaptureDetector:
    """Find settled notes in a stream of frames, one frame at a time.

    Parameters
    ----------
    profile : InstrumentProfile or None
        Gives the register of each captured note (see module docstring).
    label : str
        Session label put on each capture; change it with :attr:`label` between passes
        ("after undercutting hole 3").
    auto : bool
        Capture settled notes automatically. When False, :meth:`push` only tracks the
        stream, and captures come from :meth:`capture_now`.
    thresholds : CaptureThresholds
    first_index : int
        Number of the first capture (continue a session: ``len(old) + 1``).

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
    ('A4', 2.1, 85, 0.15)
    """

    def __init__(
        self,
        *,
        profile: InstrumentProfile | None = None,
        label: str = "",
        auto: bool = True,
        thresholds: CaptureThresholds | None = None,
        first_index: int = 1,
    ) -> None:
        self.profile = profile
        self.label = label
        self.auto = auto
        self.thresholds = thresholds or CaptureThresholds()
        self._first_index = int(first_index)
        self.reset()

    # -- state -------------------------------------------------------------------------------

    def reset(self) -> None:
        """Forget everything: back to the state after construction (label and auto kept)."""
        self.captures: list[Capture] = []
        self._next_index = self._first_index
        self._updates: list[Capture] = []
        self._breaks: dict[tuple[int, SettingsKey], float] = {}
        self._recent: deque[Reading] = deque()
        self._held_levels = LevelHistory()
        # settle run: the held note cut further by sounding note, mode and jumped state
        self._runs = NoteSegmenter(key=_run_key_of)
        self._run_start_s = 0.0
        self._window: list[Reading] = []
        self._post_attack_s: float | None = None
        self._steady: list[Reading] = []
        self._ref_cents: float | None = None
        self._outliers: list[Reading] = []
        # held note (for register margins)
        self._held = NoteSegmenter()
        self._held_key: tuple[int, SettingsKey] | None = None
        self._held_broken = False
        self._capture_held: dict[int, tuple[int, SettingsKey]] = {}

    def take_updates(self) -> list[Capture]:
        """Captures whose register margin was learnt after they were returned.

        Each replaces the capture with the same :attr:`Capture.index`; the list is emptied.
        """
        out, self._updates = self._updates, []
        return out

    @property
    def settled(self) -> bool:
        """True while the current note is in a steady stretch."""
        return self._ref_cents is not None

    # -- feeding -----------------------------------------------------------------------------

    def push(self, p: Reading) -> Capture | None:
        """Feed one reading; return a capture when a steady stretch has just ended.

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
        self._track_held(p)
        step = self._runs.push(p)
        result = self._end_run() if step.ended else None
        if step.note_id is None:
            return result
        if step.started:
            if not step.ended:
                result = self._end_run() or result
            self._run_start_s = step.start_s
        return self._feed(p) or result

    def _feed(self, p: Reading) -> Capture | None:
        """Advance the run with one of its voiced readings."""
        th = self.thresholds
        result: Capture | None = None
        if p.time_s - self._run_start_s < ATTACK_S - 1e-9:
            return result
        if self._post_attack_s is None:
            self._post_attack_s = p.time_s
        if self._ref_cents is None:
            self._settle(p)
            return result
        assert p.cents is not None
        if abs(p.cents - self._ref_cents) <= th.tolerance_cents:
            self._steady.append(p)
            self._outliers = []
            return result
        self._outliers.append(p)
        if p.time_s - self._outliers[0].time_s >= GAP_S:
            ended = self._emit_stretch()
            outliers = self._outliers
            self._outliers = []
            self._post_attack_s = outliers[0].time_s
            for q in outliers:
                self._settle(q)
            return ended or result
        return result

    def finish(self) -> Capture | None:
        """End of the stream: close the current stretch; return its capture if any."""
        self._runs.finish()
        self._held.finish()
        self._held_key = None
        return self._end_run()

    def capture_now(self, last_s: float | None = None, *, last_frames: int | None = None) -> Capture | None:
        """Capture the current note from the last ``last_s`` seconds, settled or not.

        Uses the voiced frames of the newest note (same note, mode and settings) within
        ``last_s`` (default ``thresholds.manual_s``) of the newest frame, or its last
        ``last_frames`` frames when that is given. Works with :attr:`auto` on or off.
        Returns None when no voiced frame is at hand.
        """
        span = self.thresholds.manual_s if last_s is None else float(last_s)
        if last_frames is not None:
            if last_frames < 1:
                raise ValueError(f"last_frames {last_frames} must be >= 1")
            span = max(self.thresholds.manual_s, 5.0)
        if not self._recent:
            return None
        newest = self._recent[-1]
        key_of = _run_key_of
        key = key_of(newest)
        picked: list[Reading] = []
        for q in reversed(self._recent):
            if q.time_s < newest.time_s - span or key_of(q) != key:
                break
            picked.append(q)
            if last_frames is not None and len(picked) >= last_frames:
                break
        picked.reverse()
        return self._make(picked, "manual")

    # -- internals ---------------------------------------------------------------------------

    def _settle(self, p: Reading) -> None:
        """Add a post-attack frame to the settling window; mark settled when steady."""
        th = self.thresholds
        self._window.append(p)
        cutoff = p.time_s - th.settle_s - 1e-9
        while self._window and self._window[0].time_s < cutoff:
            self._window.pop(0)
        assert self._post_attack_s is not None
        if p.time_s - self._post_attack_s < th.settle_s - 1e-9:
            return
        cents = [q.cents for q in self._window if q.cents is not None]
        med = statistics.median(cents)
        if all(abs(c - med) <= th.tolerance_cents for c in cents):
            self._ref_cents = med
            self._steady = list(self._window)
            self._window = []

    def _emit_stretch(self) -> Capture | None:
        steady = self._steady
        self._steady, self._ref_cents, self._window = [], None, []
        if not steady or not self.auto:
            return None
        drift = fit_line([q.time_s for q in steady], [q.level_dbfs for q in steady])
        if drift is not None and abs(drift.slope) > self.thresholds.max_level_drift_db_per_s:
            return None  # a crescendo: see the blowing curve
        return self._make(steady, "auto")

    def _end_run(self) -> Capture | None:
        cap = self._emit_stretch() if self._ref_cents is not None else None
        self._post_attack_s = None
        self._window, self._outliers = [], []
        return cap

    def _make(self, points: Sequence[Reading], source: CaptureSource) -> Capture | None:
        if not points:
            return None
        first = points[0]
        held = first.held_midi
        brk = None
        if held is not None and first.register_state != "jumped":
            brk = self._breaks.get((held, first.key))
        cap = capture_from_points(
            points,
            index=self._next_index,
            label=self.label,
            source=source,
            profile=self.profile,
            break_level_dbfs=brk,
        )
        self._next_index += 1
        self.captures.append(cap)
        if held is not None and not cap.jump:
            self._capture_held[cap.index] = (held, first.key)
        return cap

    def _track_held(self, p: Reading) -> None:
        """Follow the held note; on its first jump record the break and fill margins."""
        step = self._held.push(p)
        if step.ended:
            self._held_key = None
        if step.note_id is None:
            return
        if step.started or self._held_key is None:
            held = p.held_midi
            assert held is not None
            self._held_key = (held, p.key)
            self._held_broken = False
            self._held_levels.clear()
        if p.register_state == "jumped":
            if not self._held_broken:
                brk = self._held_levels.break_level(p.time_s)
                level = brk if brk is not None else p.level_dbfs
                self._held_broken = True
                self._breaks[self._held_key] = level
                self._fill_margins(self._held_key, level)
            return
        self._held_levels.add(p.time_s, p.level_dbfs)

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
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            fresh = not self.path.exists() or self.path.stat().st_size == 0
            if not fresh:
                with open(self.path, encoding="utf-8", newline="") as f:
                    header = next(csv.reader(f), [])
                if tuple(header) != CAPTURE_COLUMNS:
                    raise LogError(
                        f"{self.path} exists and is not a captures file; move it or choose another log name"
                    )
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
            self._writer.writerow(capture_row(cap))
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
    if header is None or tuple(header) != CAPTURE_COLUMNS:
        raise LogError(f"{path} is not a captures file (its header differs); give a file written by bench")
    by_index: dict[int, Capture] = {}
    for line_no, cells in enumerate(reader, start=2):
        if len(cells) < len(CAPTURE_COLUMNS):
            continue
        r = dict(zip(CAPTURE_COLUMNS, cells, strict=False))
        col = ""
        try:
            col = "index"
            index = int(r["index"])
            col = "source"
            source = r["source"]
            if source not in ("auto", "manual"):
                raise ValueError(source)
            values: dict[str, float | None] = {}
            for col in CAPTURE_COLUMNS:
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
            )
        except ValueError:
            raise LogError(
                f"{path}:{line_no}: column {col} holds {r.get(col, '')!r}, not a valid value; "
                "repair or delete that line"
            ) from None
        by_index[index] = cap
    return [by_index[i] for i in sorted(by_index)]
