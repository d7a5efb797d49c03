"""One analysed frame in the form the workflow modules work on, from a frame-log row or a
live frame.

Both sources give the same :class:`FramePoint`, so captures, charts and blowing curves are
computed the same way from a session log and from the running engine.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass
from typing import Any

from bench.workflow.notenames import midi_of_freq, parse_note


@dataclass(frozen=True, slots=True)
class SettingsKey:
    """The tuning settings a frame was mapped under (as written in the frame log)."""

    temperament: str = "equal"
    tonic: str = "C"
    a4_hz: float = 440.0
    temp_c: float = 20.0
    ref_temp_c: float = 20.0
    rh_percent: float | None = None


@dataclass(frozen=True, slots=True)
class FramePoint:
    """What the workflow needs of one frame.

    Attributes
    ----------
    time_s : float, seconds
        Input time of the frame.
    voiced : bool
        A pitch and a note were found.
    f0_hz : float or None, Hz
        Sounding fundamental.
    midi : int or None
        Note the sounding pitch was mapped to.
    note : str
        Its name as the log spelled it ("" when unvoiced).
    target_hz : float or None, Hz
    cents_raw, cents : float or None, cents
        Deviation from the target, uncorrected and corrected to the reference temperature.
    level_dbfs : float, dBFS
    register_state : str
        "steady" | "weakening" | "jumped" | "" (analyser's register monitor).
    jump : str
        "overblown" | "vented" | "".
    odd_even_db : float or None, dB
    harmonics_db : tuple of 8 (float or None), dB re the strongest
    held_f0_hz : float or None, Hz
        Fundamental of the held (fingered) note.
    settings : SettingsKey
    """

    time_s: float
    voiced: bool
    f0_hz: float | None
    midi: int | None
    note: str
    target_hz: float | None
    cents_raw: float | None
    cents: float | None
    level_dbfs: float
    register_state: str
    jump: str
    odd_even_db: float | None
    harmonics_db: tuple[float | None, ...]
    held_f0_hz: float | None
    settings: SettingsKey

    @property
    def mode(self) -> int | None:
        """Sounding mode of the held note's tube (1 fundamental, 2 octave, 3 twelfth ...).

        From the ratio of the sounding to the held fundamental when both are known and the
        ratio lies within 50 cents of a whole number; None otherwise.
        """
        if not self.voiced or self.f0_hz is None or not self.held_f0_hz:
            return None
        ratio = self.f0_hz / self.held_f0_hz
        n = round(ratio)
        if n < 1 or abs(1200.0 * math.log2(ratio / n)) > 50.0:
            return None
        return int(n)

    @property
    def held_midi(self) -> int | None:
        """Note of the held (fingered) fundamental; the sounding note when it is unknown."""
        if self.held_f0_hz:
            return midi_of_freq(self.held_f0_hz, self.settings.a4_hz)
        return self.midi


_NO_HARMONICS: tuple[float | None, ...] = (None,) * 8


def _num(text: str | None) -> float | None:
    if text is None:
        return None
    text = text.strip()
    if not text:
        return None
    try:
        value = float(text)
    except ValueError:
        return None
    return None if math.isnan(value) else value


def _num_or(text: str | None, default: float) -> float:
    value = _num(text)
    return default if value is None else value


def _unquote(text: str) -> str:
    """Undo :func:`bench.framelog.safe_cell` on a read cell."""
    if len(text) > 1 and text[0] == "'" and text[1] in "=+-@\t\r":
        return text[1:]
    return text


def point_from_log_row(row: Mapping[str, str]) -> FramePoint:
    """A :class:`FramePoint` from one frame-log row (a dict as ``read_frame_log`` gives)."""
    note = (row.get("note") or "").strip()
    cents = _num(row.get("cents"))
    f0 = _num(row.get("f0_hz"))
    midi: int | None = None
    if note:
        try:
            midi = parse_note(note)
        except ValueError:
            midi = None
    voiced = f0 is not None and cents is not None and midi is not None
    level = _num(row.get("level_dbfs"))
    rh = _num(row.get("rh_percent"))
    settings = SettingsKey(
        temperament=_unquote(row.get("temperament") or "equal"),
        tonic=row.get("tonic") or "C",
        a4_hz=_num(row.get("a4_hz")) or 440.0,
        temp_c=_num_or(row.get("temp_c"), 20.0),
        ref_temp_c=_num_or(row.get("ref_temp_c"), 20.0),
        rh_percent=rh,
    )
    return FramePoint(
        time_s=_num(row.get("time_s")) or 0.0,
        voiced=voiced,
        f0_hz=f0 if voiced else None,
        midi=midi if voiced else None,
        note=note if voiced else "",
        target_hz=_num(row.get("target_hz")) if voiced else None,
        cents_raw=_num(row.get("cents_raw")) if voiced else None,
        cents=cents if voiced else None,
        level_dbfs=level if level is not None else -math.inf,
        register_state=(row.get("register") or "") if voiced else "",
        jump=(row.get("jump") or "") if voiced else "",
        odd_even_db=_num(row.get("odd_even_db")) if voiced else None,
        harmonics_db=(
            tuple(_num(row.get(f"h{k}_db")) for k in range(1, 9)) if voiced else _NO_HARMONICS
        ),
        held_f0_hz=_num(row.get("held_f0_hz")) if voiced else None,
        settings=settings,
    )


def point_from_frame(frame: Any, mapping: Any | None, settings: Any) -> FramePoint:
    """A :class:`FramePoint` from a live :class:`dsp.frame.Frame`, its ``NoteMapping`` (None
    when unvoiced) and the ``TuningSettings`` in force."""
    key = SettingsKey(
        temperament=str(getattr(settings, "temperament", "equal")),
        tonic=str(getattr(settings, "tonic", "C")),
        a4_hz=float(getattr(settings, "a4_hz", 440.0)),
        temp_c=float(getattr(settings, "temp_c", 20.0)),
        ref_temp_c=float(getattr(settings, "ref_temp_c", 20.0)),
        rh_percent=getattr(settings, "rh_percent", None),
    )
    voiced = frame.f0_hz is not None and mapping is not None
    harm = frame.harmonics_db if voiced and frame.harmonics_db is not None else _NO_HARMONICS
    m = mapping
    return FramePoint(
        time_s=float(frame.time_s),
        voiced=voiced,
        f0_hz=float(frame.f0_hz) if voiced else None,
        midi=int(m.midi) if m is not None and voiced else None,
        note=str(m.note) if m is not None and voiced else "",
        target_hz=float(m.target_hz) if m is not None and voiced else None,
        cents_raw=float(m.cents_raw) if m is not None and voiced else None,
        cents=float(m.cents) if m is not None and voiced else None,
        level_dbfs=float(frame.level_dbfs),
        register_state=(frame.register or "") if voiced else "",
        jump=(frame.jump or "") if voiced else "",
        odd_even_db=frame.odd_even_db if voiced else None,
        harmonics_db=tuple(harm) + _NO_HARMONICS[len(harm):],
        held_f0_hz=getattr(frame, "held_f0_hz", None) if voiced else None,
        settings=key,
    )


def as_point(item: Any, mapping: Any | None = None, settings: Any | None = None) -> FramePoint:
    """Turn what a caller has into a :class:`FramePoint`.

    Accepts a :class:`FramePoint`, a frame-log row (mapping of column to text), a
    ``bench.reading.Reading`` (``.frame``, ``.mapping``, ``.settings``), or a ``Frame`` with
    its ``mapping`` and ``settings``.
    """
    if isinstance(item, FramePoint):
        return item
    if isinstance(item, Mapping):
        return point_from_log_row(item)
    if hasattr(item, "frame") and hasattr(item, "settings"):
        return point_from_frame(item.frame, item.mapping, item.settings)
    if hasattr(item, "f0_hz") and hasattr(item, "time_s"):
        if settings is None:
            from bench.tuning import TuningSettings

            settings = TuningSettings()
        return point_from_frame(item, mapping, settings)
    raise TypeError(f"cannot read a frame from {type(item).__name__}; give a log row, Reading or Frame")


def iter_points(rows: Iterable[Any]) -> Iterator[FramePoint]:
    """:func:`as_point` over an iterable of rows, readings or points."""
    for row in rows:
        yield as_point(row)
