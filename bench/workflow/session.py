"""Open a session for charting or comparing: a frame log, its captures file, or a captures
file on its own."""

from __future__ import annotations

import csv
from dataclasses import dataclass
from pathlib import Path

from bench.errors import LogError
from bench.framelog import FRAME_LOG_COLUMNS, iter_readings
from bench.reading import Reading
from bench.workflow.captures import (
    CAPTURE_COLUMNS,
    Capture,
    captures_from_readings,
    captures_path_for,
    read_captures,
)
from bench.workflow.profiles import InstrumentProfile, get_profile, guess_profile

__all__ = ["Session", "load_session"]


@dataclass(frozen=True, slots=True)
class Session:
    """What was found for one session.

    Attributes
    ----------
    path : Path
        File given.
    captures : list of Capture
    captures_from : str
        Where the captures came from: the captures file's path, or "computed from the frame log".
    readings : list of Reading or None
        The frame log's readings (None when only a captures file was given).
    profile : InstrumentProfile
        The profile asked for, or the family member that best fits the notes played.
    """

    path: Path
    captures: list[Capture]
    captures_from: str
    readings: list[Reading] | None
    profile: InstrumentProfile


def _header(path: Path) -> list[str]:
    try:
        with open(path, encoding="utf-8", newline="") as f:
            first = f.readline(1 << 16)  # a header is a few hundred characters: never read more
        return next(csv.reader([first]), [])
    except FileNotFoundError:
        raise LogError(f"no such session file: {path}; give a frame log or a .captures.csv") from None
    except UnicodeDecodeError:
        raise LogError(f"{path} is not a UTF-8 CSV; give a frame log or a .captures.csv") from None
    except OSError as exc:
        raise LogError(f"cannot read {path}: {exc.strerror or exc}") from None


def load_session(path: str | Path, profile: str | Path | InstrumentProfile | None = None) -> Session:
    """Load a session for the chart or the comparison.

    ``path`` is a frame log (its ``<stem>.captures.csv`` is used when it exists, else captures
    are computed from the log) or a captures file.

    Raises
    ------
    LogError
        Missing file, or a CSV that is neither a frame log nor a captures file.
    SettingsError
        Unknown profile.
    """
    path = Path(path)
    if path.is_dir():
        raise LogError(f"{path} is a folder; give a session's frame log (.csv)")
    from bench.safeio import FileRefused, check_regular_file
    from bench.textsafe import clip

    try:  # a named pipe would block, /dev/zero never ends a line: regular files only
        check_regular_file(path)
    except FileRefused as exc:
        if not exc.missing:
            raise LogError(f"{clip(str(path))} cannot be read: {exc.reason}; give a session's frame log (.csv)") from None
    prof = get_profile(profile) if isinstance(profile, (str, Path)) else profile
    header = _header(path)
    rows: list[Reading] | None = None
    if tuple(header) == CAPTURE_COLUMNS:
        caps = read_captures(path)
        source = str(path)
    elif tuple(header[: len(FRAME_LOG_COLUMNS)]) == FRAME_LOG_COLUMNS:
        rows = list(iter_readings(path))
        side = captures_path_for(path)
        if side.exists():
            caps = read_captures(side)
            source = str(side)
        else:
            caps = []
            source = "computed from the frame log"
    else:
        raise LogError(f"{path} is neither a frame log nor a captures file; give a CSV written by bench")
    if prof is None:
        prof = guess_profile([c.midi for c in caps if c.mode in (None, 1)])
    if rows is not None and not caps:
        caps = captures_from_readings(rows, profile=prof)
        if prof is not None and profile is None:  # refine the guess on what was found
            prof = guess_profile([c.midi for c in caps if c.mode in (None, 1)])
            caps = captures_from_readings(rows, profile=prof)
    return Session(path, caps, source, rows, prof)
