"""The frame log: the project's CSV format for analysed frames, shared by
``bench analyze`` and the live session log.

UTF-8, RFC 4180 (``csv`` module, ``\\r\\n`` line ends), a header row, the columns of
:data:`FRAME_LOG_COLUMNS` first and in that order. Unvoiced frames leave the pitch
columns empty. Every row carries the settings in force when it was measured.
"""

from __future__ import annotations

import csv
import functools
import math
import os
import time
from collections.abc import Callable, Iterable, Iterator, Mapping
from datetime import datetime
from pathlib import Path
from typing import IO, BinaryIO, Self

from bench.errors import LogError, SettingsError
from bench.reading import Reading, SettingsKey, map_or_none
from bench.tuning import NoteMapping, Temperament, TuningSettings
from bench.tuning.notes import parse_note
from dsp.frame import Frame, JumpKind, RegisterState

FRAME_LOG_COLUMNS: tuple[str, ...] = (
    "time_s", "ready_s", "f0_hz", "clarity", "level_dbfs", "note", "target_hz",
    "cents_raw", "cents", "register", "jump", "odd_even_db",
    "h1_db", "h2_db", "h3_db", "h4_db", "h5_db", "h6_db", "h7_db", "h8_db",
    "temperament", "tonic", "a4_hz", "temp_c", "ref_temp_c",
)  # fmt: skip
"""Columns every frame log starts with, in this order."""

EXTRA_COLUMNS: tuple[str, ...] = ("clipped", "held_f0_hz", "locked_note", "rh_percent", "held_note", "clock_ppm")
"""Columns that follow, in this order (more may be added at the end)."""

MAX_LINE_BYTES = 1 << 20
"""Longest line a frame-log reader takes, bytes (a row holds a few hundred)."""

_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def safe_cell(text: str) -> str:
    """Neutralise a text cell a spreadsheet would run as a formula.

    A leading ``'`` makes spreadsheets show the text as typed (OWASP, "CSV Injection").

    >>> safe_cell("=SUM(A1)")
    "'=SUM(A1)"
    >>> safe_cell("after undercutting hole 3")
    'after undercutting hole 3'
    """
    if text and text.startswith(_FORMULA_START):
        return "'" + text
    return text


def number_cell(value: float | None, digits: int) -> str:
    """A number as a CSV cell: fixed ``digits`` decimals, empty for None or NaN, ``inf``/``-inf``
    for infinities (the level of digital silence).

    >>> number_cell(-3.0103, 2), number_cell(None, 2), number_cell(float("-inf"), 2)
    ('-3.01', '', '-inf')
    """
    if value is None or not math.isfinite(value):
        return "" if value is None or math.isnan(value) else ("-inf" if value < 0 else "inf")
    return _FIXED[digits](value) if digits in _FIXED else f"{value:.{digits}f}"


_FIXED = {d: f"{{:.{d}f}}".format for d in range(7)}  # a bound format per precision: no spec parsing per cell


@functools.lru_cache(maxsize=16)
def _settings_cells(key: SettingsKey) -> tuple[str, ...]:
    """Temperament, tonic, A4, air and reference temperature cells, formatted once per settings
    key (they change a few times a session, the rows come a hundred a second)."""
    return (
        safe_cell(str(key.temperament)),
        safe_cell(str(key.tonic)),
        number_cell(key.a4_hz, 2),
        number_cell(key.temp_c, 2),
        number_cell(key.ref_temp_c, 2),
    )


def frame_row(reading: Reading, clock_ppm: float | None = None) -> list[str]:
    """One CSV row (all cells as text) for a reading: its frame, note and settings.

    ``clock_ppm``: the input clock's error the frequencies were corrected by (empty: none).
    """
    frame, mapping, settings = reading.frame, reading.mapping, reading.settings
    voiced = reading.voiced
    harm = reading.harmonics_db
    row = [
        number_cell(frame.time_s, 6),
        number_cell(frame.ready_s, 6),
        number_cell(frame.f0_hz, 4) if voiced else "",
        number_cell(frame.clarity, 3),
        number_cell(frame.level_dbfs, 2),
        safe_cell(mapping.note) if voiced and mapping else "",
        number_cell(mapping.target_hz, 4) if voiced and mapping else "",
        number_cell(mapping.cents_raw, 3) if voiced and mapping else "",
        number_cell(mapping.cents, 3) if voiced and mapping else "",
        reading.register_state,
        reading.jump,
        number_cell(frame.odd_even_db, 2) if voiced else "",
        *(number_cell(h, 2) if h is not None else "" for h in harm),
        *_settings_cells(reading.key),
        "1" if frame.clipped else "0",
        number_cell(frame.held_f0_hz, 4) if voiced else "",
        safe_cell(reading.locked_note or "") if reading.locked_midi is not None else "",
        number_cell(settings.rh_percent, 1) if settings.rh_percent is not None else "",
        safe_cell(reading.held_note) if voiced else "",
        number_cell(clock_ppm, 3),
    ]
    return row


def new_log_path(folder: Path | str, prefix: str = "session", now: datetime | None = None) -> Path:
    """A fresh timestamped path ``folder/session-YYYYmmdd-HHMMSS.csv`` that does not exist yet."""
    folder = Path(folder)
    stamp = (now or datetime.now()).strftime("%Y%m%d-%H%M%S")
    path = folder / f"{prefix}-{stamp}.csv"
    n = 2
    while path.exists():
        path = folder / f"{prefix}-{stamp}-{n}.csv"
        n += 1
    return path


class CsvFrameLog:
    """Append frames to a frame-log CSV, flushed to the OS at least every ``flush_interval_s``.

    Parameters
    ----------
    path : Path
        File to create (its folder is created too). An existing file is not overwritten
        (:class:`LogError` is raised) unless ``overwrite`` is true.
    flush_interval_s : float >= 0, seconds
        Longest time a written row waits in Python's buffer; 0 flushes every row.
    overwrite : bool
        Replace an existing file (``bench analyze`` re-running on the same input).
    fsync : bool
        Also ask the OS to put flushed rows on disk (survives power loss, costs time).
    clock : callable returning seconds
        Monotonic clock used for the flush interval (injected in tests).
    clock_ppm : float or None, ppm
        The input clock's error the frequencies were corrected by, written in every row.

    Raises
    ------
    LogError
        The folder or file cannot be created or written; the message says which and why.
    """

    def __init__(
        self,
        path: Path | str,
        *,
        flush_interval_s: float = 0.5,
        fsync: bool = False,
        overwrite: bool = False,
        clock: Callable[[], float] = time.monotonic,
        clock_ppm: float | None = None,
    ) -> None:
        self.path = Path(path)
        self.clock_ppm = clock_ppm
        self.flush_interval_s = float(flush_interval_s)
        self._fsync = fsync
        self._clock = clock
        self.rows_written = 0
        self._replacing = None
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            if overwrite:  # written beside it and renamed over it on close: never through a link
                from bench.safeio import ReplacingFile

                self._replacing = ReplacingFile(self.path, newline="")
                file: IO[str] = self._replacing.file
            else:  # "x": O_CREAT | O_EXCL, refuses an existing file and any link
                file = open(  # noqa: SIM115 - closed in close()
                    self.path, "x", encoding="utf-8", newline=""
                )
            self._file: IO[str] | None = file
        except FileExistsError:
            raise LogError(f"log file {self.path} exists already; choose another name") from None
        except OSError as exc:
            raise LogError(
                f"cannot write the log {self.path}: {exc.strerror or exc}; choose a writable folder"
            ) from None
        self._writer = csv.writer(file)
        self._writer.writerow((*FRAME_LOG_COLUMNS, *EXTRA_COLUMNS))
        self._last_flush = self._clock()
        self.flush()

    @property
    def closed(self) -> bool:
        return self._file is None

    def write(self, reading: Reading) -> None:
        """Append one reading's row; flushes when the interval has passed. Raises LogError on failure."""
        self.write_row(frame_row(reading, self.clock_ppm))

    def write_row(self, row: list[str]) -> None:
        """Append one prepared row (see :func:`frame_row`)."""
        if self._file is None:
            raise LogError(f"log {self.path} is closed")
        try:
            self._writer.writerow(row)
            self.rows_written += 1
            if self._clock() - self._last_flush >= self.flush_interval_s:
                self.flush()
        except OSError as exc:
            raise LogError(f"writing the log {self.path} failed: {exc.strerror or exc}") from None

    def flush(self) -> None:
        """Hand buffered rows to the OS (and to disk with ``fsync=True``)."""
        if self._file is None:
            return
        try:
            self._file.flush()
            if self._fsync:
                os.fsync(self._file.fileno())
        except OSError as exc:
            raise LogError(f"writing the log {self.path} failed: {exc.strerror or exc}") from None
        self._last_flush = self._clock()

    def close(self) -> None:
        """Flush and close; safe to call twice."""
        if self._file is None:
            return
        f, self._file = self._file, None
        if self._replacing is not None:
            self._replacing.commit()
            return
        try:
            f.flush()
            if self._fsync:
                os.fsync(f.fileno())
        finally:
            f.close()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _complete_end(raw: BinaryIO) -> int:
    """Byte offset just past the last line end of a binary file (drops a torn last line)."""
    raw.seek(0, os.SEEK_END)
    pos = raw.tell()
    while pos > 0:
        step = min(65536, pos)
        raw.seek(pos - step)
        i = raw.read(step).rfind(b"\n")
        if i >= 0:
            return pos - step + i + 1
        pos -= step
    return 0


def _complete_lines(raw: BinaryIO, end: int) -> Iterator[str]:
    """Decoded lines of ``raw`` up to byte ``end``, line ends kept (so quoted CRs stay CRs)."""
    raw.seek(0)
    done = 0
    while line := raw.readline(MAX_LINE_BYTES + 1):
        if len(line) > MAX_LINE_BYTES:  # no row of a frame log is near this: not a frame log
            raise csv.Error(f"a line longer than {MAX_LINE_BYTES} bytes")
        done += len(line)
        if done > end:
            return
        yield line.decode("utf-8")


def iter_frame_log(path: Path | str) -> Iterator[dict[str, str]]:
    """Rows of a frame log as dicts, tolerating a torn last line (a killed writer).

    A last line without its line end (even one cut inside a UTF-8 character), or with fewer
    cells than the header, is dropped. The file is read line by line, so memory does not grow
    with the log's length.

    Raises
    ------
    LogError
        The file is missing, not UTF-8, or does not start with the frame-log header.
    """
    path = Path(path)
    from bench.safeio import FileRefused, check_regular_file

    try:  # a named pipe would block the open, a device never ends
        check_regular_file(path)
    except FileRefused as exc:
        if not exc.missing:
            raise LogError(f"cannot read {path}: {exc.reason}") from None
    try:
        raw = path.open("rb")
    except FileNotFoundError:
        raise LogError(f"no such log file: {path}") from None
    except OSError as exc:
        raise LogError(f"cannot read {path}: {exc.strerror or exc}") from None
    with raw:
        try:
            reader = csv.reader(_complete_lines(raw, _complete_end(raw)))
            header = next(reader, None)
            if header is None or tuple(header[: len(FRAME_LOG_COLUMNS)]) != FRAME_LOG_COLUMNS:
                raise LogError(f"{path} is not a frame log (its header differs); give a CSV written by bench")
            for cells in reader:
                if len(cells) < len(FRAME_LOG_COLUMNS):
                    continue
                yield dict(zip(header, cells, strict=False))
        except UnicodeDecodeError:
            raise LogError(f"{path} is not a UTF-8 frame log; give a CSV written by bench") from None
        except csv.Error as exc:
            raise LogError(f"{path} is not a valid CSV ({exc}); give a CSV written by bench") from None
        except OSError as exc:
            raise LogError(f"cannot read {path}: {exc.strerror or exc}") from None


def read_frame_log(path: Path | str) -> list[dict[str, str]]:
    """All rows of a frame log; see :func:`iter_frame_log`."""
    return list(iter_frame_log(path))


# --- reading a log back as readings -----------------------------------------------------------

_REGISTER_STATES: dict[str, RegisterState] = {"steady": "steady", "weakening": "weakening", "jumped": "jumped"}
_JUMP_KINDS: dict[str, JumpKind] = {"overblown": "overblown", "vented": "vented", "cracked": "cracked"}


def _num(text: str | None) -> float | None:
    text = (text or "").strip()
    if not text:
        return None
    try:
        value = float(text)
    except ValueError:
        return None
    return None if math.isnan(value) else value


def _unquote(text: str | None) -> str:
    """Undo :func:`safe_cell` on a read cell."""
    text = text or ""
    if len(text) > 1 and text[0] == "'" and text[1] in "=+-@\t\r":
        return text[1:]
    return text


def _midi_or_none(name: str) -> int | None:
    if not name:
        return None
    try:
        return parse_note(name)
    except (SettingsError, ValueError):
        return None


@functools.lru_cache(maxsize=64)
def _settings_of(temperament: str, tonic: str, a4_hz: float, temp_c: float, ref_temp_c: float,
                 rh_percent: float | None) -> TuningSettings:  # fmt: skip
    """The settings a row was written under. A temperament this installation does not know
    (one read from a file at the time) stands in with no offsets: the row's own note, target
    and cents are what was measured, and they are kept as written."""
    try:
        return TuningSettings(a4_hz, temperament, tonic, temp_c, ref_temp_c, rh_percent)
    except SettingsError:
        stand_in = Temperament(temperament, temperament, "recorded in a frame log; offsets not known here", (0.0,) * 12)
        return TuningSettings(a4_hz, temperament, tonic, temp_c, ref_temp_c, rh_percent,
                              custom_temperament=stand_in)  # fmt: skip


def reading_from_row(row: Mapping[str, str]) -> Reading:
    """The :class:`~bench.reading.Reading` a frame-log row was written from.

    The note, target and cents are taken as written (they are what was measured under the
    row's settings); the held note likewise when the log has the ``held_note`` column, else it
    is mapped from ``held_f0_hz`` under the row's settings.

    Raises
    ------
    LogError
        The row's settings are not valid (an edited log); the message names the value.
    """
    f0 = _num(row.get("f0_hz"))
    note = _unquote(row.get("note")).strip()
    midi = _midi_or_none(note)
    target, cents_raw, cents = _num(row.get("target_hz")), _num(row.get("cents_raw")), _num(row.get("cents"))
    voiced = f0 is not None and midi is not None and target is not None and cents is not None
    harm = tuple(_num(row.get(f"h{k}_db")) for k in range(1, 9))
    level = _num(row.get("level_dbfs"))
    frame = Frame(
        time_s=_num(row.get("time_s")) or 0.0,
        ready_s=_num(row.get("ready_s")) or 0.0,
        f0_hz=f0 if voiced else None,
        clarity=_num(row.get("clarity")) or 0.0,
        level_dbfs=level if level is not None else -math.inf,
        clipped=(row.get("clipped") or "0").strip() == "1",
        harmonics_db=tuple(h if h is not None else -math.inf for h in harm) if voiced and harm[0] is not None else None,
        odd_even_db=_num(row.get("odd_even_db")) if voiced else None,
        register=_REGISTER_STATES.get((row.get("register") or "").strip()) if voiced else None,
        jump=_JUMP_KINDS.get((row.get("jump") or "").strip()) if voiced else None,
        held_f0_hz=_num(row.get("held_f0_hz")) if voiced else None,
    )
    rh = _num(row.get("rh_percent"))
    try:
        settings = _settings_of(
            _unquote(row.get("temperament")) or "equal", _unquote(row.get("tonic")) or "C",
            _num(row.get("a4_hz")) or 440.0, _num(row.get("temp_c")) or 20.0,
            _num(row.get("ref_temp_c")) or 20.0, rh,
        )  # fmt: skip
    except SettingsError as exc:
        raise LogError(f"a frame-log row at {frame.time_s:.3f} s holds settings bench does not take: {exc}") from None
    locked_note = _unquote(row.get("locked_note")).strip() or None
    locked_midi = _midi_or_none(locked_note or "")
    mapping: NoteMapping | None = None
    held: NoteMapping | None = None
    if midi is not None and target is not None and cents is not None and f0 is not None:
        mapping = NoteMapping(midi, note, target, cents_raw if cents_raw is not None else cents, cents)
        held_hz = frame.held_f0_hz
        held = mapping if held_hz is None or held_hz == f0 else map_or_none(held_hz, settings, locked_midi)
        held_name = _unquote(row.get("held_note")).strip()
        held_midi = _midi_or_none(held_name)
        if held_midi is not None and (held is None or held.midi != held_midi):
            # the log names the fingered note as it was mapped then: keep that name
            base = held or mapping
            held = NoteMapping(held_midi, held_name, base.target_hz, base.cents_raw, base.cents)
    return Reading(
        frame=frame, mapping=mapping, held=held, settings=settings, key=SettingsKey.of(settings),
        locked_midi=locked_midi, locked_note=locked_note,
    )  # fmt: skip


def readings_from_rows(rows: Iterable[Mapping[str, str]]) -> Iterator[Reading]:
    """:func:`reading_from_row` over rows (as :func:`iter_frame_log` gives them)."""
    for row in rows:
        yield reading_from_row(row)


def iter_readings(path: Path | str) -> Iterator[Reading]:
    """The readings of a frame log, one at a time (see :func:`iter_frame_log`)."""
    return readings_from_rows(iter_frame_log(path))
