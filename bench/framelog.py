"""The frame log: the project's CSV format for analysed frames, shared by
``bench analyze`` and the live session log.

UTF-8, RFC 4180 (``csv`` module, ``\\r\\n`` line ends), a header row, the columns of
:data:`FRAME_LOG_COLUMNS` first and in that order. Unvoiced frames leave the pitch
columns empty. Every row carries the settings in force when it was measured.
"""

from __future__ import annotations

import csv
import io
import math
import os
import time
from collections.abc import Iterator
from datetime import datetime
from pathlib import Path

from bench.errors import LogError
from bench.tuning import NoteMapping, TuningSettings
from dsp.frame import Frame

FRAME_LOG_COLUMNS: tuple[str, ...] = (
    "time_s", "ready_s", "f0_hz", "clarity", "level_dbfs", "note", "target_hz",
    "cents_raw", "cents", "register", "jump", "odd_even_db",
    "h1_db", "h2_db", "h3_db", "h4_db", "h5_db", "h6_db", "h7_db", "h8_db",
    "temperament", "tonic", "a4_hz", "temp_c", "ref_temp_c",
)  # fmt: skip
"""Columns every frame log starts with, in this order."""

EXTRA_COLUMNS: tuple[str, ...] = ("clipped", "held_f0_hz", "locked_note", "rh_percent", "clock_ppm")
"""Columns that follow, in this order (more may be added at the end)."""

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
    return f"{value:.{digits}f}"


def frame_row(
    frame: Frame,
    mapping: NoteMapping | None,
    settings: TuningSettings,
    locked_note: str | None = None,
    clock_ppm: float | None = None,
) -> list[str]:
    """One CSV row (all cells as text) for a frame, its mapping and the settings in force.

    ``clock_ppm``: the input clock's error the frequencies were corrected by (empty: none).
    """
    voiced = frame.f0_hz is not None and mapping is not None
    harm = frame.harmonics_db if voiced and frame.harmonics_db is not None else (None,) * 8
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
        (frame.register or "") if voiced else "",
        (frame.jump or "") if voiced and frame.register == "jumped" else "",
        number_cell(frame.odd_even_db, 2) if voiced else "",
        *(number_cell(h, 2) if h is not None else "" for h in harm),
        safe_cell(str(settings.temperament)),
        safe_cell(str(settings.tonic)),
        number_cell(settings.a4_hz, 2),
        number_cell(settings.temp_c, 2),
        number_cell(settings.ref_temp_c, 2),
        "1" if frame.clipped else "0",
        number_cell(frame.held_f0_hz, 4) if voiced else "",
        safe_cell(locked_note or ""),
        number_cell(settings.rh_percent, 1) if settings.rh_percent is not None else "",
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
        clock=time.monotonic,
        clock_ppm: float | None = None,
    ) -> None:
        self.path = Path(path)
        self.clock_ppm = clock_ppm
        self.flush_interval_s = float(flush_interval_s)
        self._fsync = fsync
        self._clock = clock
        self.rows_written = 0
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            self._file: io.TextIOWrapper | None = open(  # noqa: SIM115 - closed in close()
                self.path, "w" if overwrite else "x", encoding="utf-8", newline=""
            )
        except FileExistsError:
            raise LogError(f"log file {self.path} exists already; choose another name") from None
        except OSError as exc:
            raise LogError(
                f"cannot write the log {self.path}: {exc.strerror or exc}; choose a writable folder"
            ) from None
        self._writer = csv.writer(self._file)
        self._writer.writerow((*FRAME_LOG_COLUMNS, *EXTRA_COLUMNS))
        self._last_flush = self._clock()
        self.flush()

    @property
    def closed(self) -> bool:
        return self._file is None

    def write(
        self,
        frame: Frame,
        mapping: NoteMapping | None,
        settings: TuningSettings,
        locked_note: str | None = None,
    ) -> None:
        """Append one row; flushes when the interval has passed. Raises LogError on failure."""
        self.write_row(frame_row(frame, mapping, settings, locked_note, self.clock_ppm))

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
        try:
            f.flush()
            if self._fsync:
                os.fsync(f.fileno())
        finally:
            f.close()

    def __enter__(self) -> CsvFrameLog:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()


def _complete_end(raw) -> int:  # type: ignore[no-untyped-def]
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


def _complete_lines(raw, end: int) -> Iterator[str]:  # type: ignore[no-untyped-def]
    """Decoded lines of ``raw`` up to byte ``end``, line ends kept (so quoted CRs stay CRs)."""
    raw.seek(0)
    done = 0
    for line in raw:
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
