"""What an unattended run (``bench run --no-ui``) tells a script: the settings in force and
where each came from, a record of them beside the log, and exit statuses that tell a real
session from a failed one.

Exit statuses of ``bench run --no-ui`` (see README-reliability-draft.md):

* 0: the input asked for was measured and the log, if any, holds every row;
* 2: a value or file was refused before anything started (one ``error:`` line);
* 3 (:data:`EXIT_INPUT`): the input asked for could not be used (no microphone -- the demo is
  never put in its place unattended -- or the input failed during the run);
* 4 (:data:`EXIT_LOG`): the log could not be written (folder not writable, disk full);
* 129, 130, 143: SIGHUP, Ctrl-C, SIGTERM ended the run (128 + the signal's number, the shell's
  convention); the log is complete up to that moment.
"""

from __future__ import annotations

import argparse
import os
from pathlib import Path

from bench.textsafe import clip, printable
from bench.tuning import TuningSettings

__all__ = [
    "EXIT_INPUT",
    "EXIT_LOG",
    "describe_origins",
    "log_folder_problem",
    "rows_on_disk",
    "run_record_path",
    "setting_origins",
    "without_fallback",
    "write_run_record",
]

EXIT_INPUT = 3
"""Exit status: the input asked for could not be used."""
EXIT_LOG = 4
"""Exit status: the log asked for could not be written."""

_OPTION_OF = {
    "a4_hz": "a4",
    "temperament": "temperament",
    "tonic": "tonic",
    "temp_c": "temp",
    "ref_temp_c": "ref_temp",
    "rh_percent": "rh",
    "flats": "flats",
}
"""Setting -> the attribute of the parsed options that sets it."""

DEFAULT = "default"
COMMAND_LINE = "command line"
_FALLBACK_WORDS = "; playing the demo instrument instead"


def without_fallback(notice: str) -> str:
    """The reason of a demo fall-back notice, told as the error it is unattended."""
    reason = notice.removesuffix(_FALLBACK_WORDS)
    return f"{reason}; the input asked for cannot be used (give --device, or --input demo or a FILE)"


def setting_origins(args: argparse.Namespace, from_file: frozenset[str], settings_file: Path) -> dict[str, str]:
    """Where each tuning setting in force came from: the command line, the settings file, or
    the default (a temperature sensor counts as the command line that named it)."""
    origins: dict[str, str] = {}
    for name, option in _OPTION_OF.items():
        if getattr(args, option, None) is not None:
            origins[name] = COMMAND_LINE
        elif name in from_file:
            origins[name] = f"settings file {settings_file}"
        else:
            origins[name] = DEFAULT
    if getattr(args, "temp_source", None) is not None:
        origins["temp_c"] = f"--temp-source {args.temp_source}"
    return origins


def _values(settings: TuningSettings) -> dict[str, str]:
    return {
        "a4_hz": f"A4 = {settings.a4_hz:.2f} Hz",
        "temperament": f"temperament {settings.temperament}",
        "tonic": f"tonic {settings.tonic}",
        "temp_c": f"air {settings.temp_c:g} °C",
        "ref_temp_c": f"in tune at {settings.ref_temp_c:g} °C",
        "rh_percent": "dry air" if settings.rh_percent is None else f"{settings.rh_percent:g} % humidity",
        "flats": "flats" if settings.flats else "sharps",
    }


def describe_origins(settings: TuningSettings, origins: dict[str, str], label: str = "") -> str:
    """One line: every tuning setting in force and, in brackets, where it came from.

    >>> describe_origins(TuningSettings(), {"a4_hz": "command line"}).split("; ")[0]
    'settings: A4 = 440.00 Hz [command line]'
    """
    parts = [f"{text} [{printable(origins.get(name, DEFAULT))}]" for name, text in _values(settings).items()]
    line = "settings: " + "; ".join(parts)
    if label:
        line += f"; label {clip(repr(label))}"
    return line


def run_record_path(log_path: Path) -> Path:
    """The record written beside a log: ``<stem>.run.toml``."""
    return log_path.with_name(log_path.stem + ".run.toml")


def write_run_record(
    log_path: Path, settings: TuningSettings, origins: dict[str, str], label: str, source: str
) -> Path | None:
    """Write ``<stem>.run.toml`` beside the log: the label, the input, every setting at the
    start and where it came from. Never replaces a file; returns None when it cannot be written
    (the run goes on; the log's rows carry the settings too)."""
    import tomli_w

    from bench.safeio import FileRefused, ReplacingFile, check_output

    path = run_record_path(log_path)
    values: dict[str, bool | float | str] = {
        name: getattr(settings, name) for name in _OPTION_OF if getattr(settings, name) is not None
    }
    record = {
        "run": {"log": str(log_path), "label": label, "input": source},
        "settings": values,
        "settings_from": {name: origins.get(name, DEFAULT) for name in _OPTION_OF},
    }
    text = "# bench run --no-ui: what the run was told at its start\n" + tomli_w.dumps(record)
    try:
        check_output(path)
        out = ReplacingFile(path)
    except (FileRefused, OSError):
        return None
    try:
        out.file.write(text)
        out.commit()
    except OSError:
        out.discard()
        return None
    return path


def log_folder_problem(log_path: Path | None) -> str | None:
    """Why the log's folder cannot take the log (created when missing), or None when it can."""
    if log_path is None:
        return None
    folder = log_path.parent
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        return f"cannot create the log folder {clip(str(folder))}: {exc.strerror or exc}; choose a writable folder"
    if not os.access(folder, os.W_OK | os.X_OK):
        return f"the log folder {clip(str(folder))} is not writable; choose a writable folder"
    return None


def rows_on_disk(log_path: Path) -> int:
    """Complete data rows the log file holds (lines ended by a newline, less the header)."""
    count = 0
    try:
        with open(log_path, "rb") as f:
            while chunk := f.read(1 << 20):
                count += chunk.count(b"\n")
    except OSError:
        return 0
    return max(count - 1, 0)
