"""The input clocks' measured errors, kept per device in ``clock.toml`` in the config folder.

One ``[[input]]`` table per device, keyed by its name and host API (the same card may show
under several host APIs; each is measured on its own)::

    [[input]]
    device = "USB Audio"
    host_api = "ALSA"
    clock_ppm = 23.41          # (true sample rate / nominal - 1) * 1e6
    clock_ppm_se = 0.82        # standard error, ppm
    method = "system clock"    # or "reference tone"
    detail = "5.0 min against the system's monotonic clock"
    sample_rate = 48000
    measured = "2026-12-04T18:02:11"

Saving replaces only the entry of the same device: other entries, and keys this version does
not know, are written back as they were; the file is written to a temporary name and renamed.
A file that is not valid TOML is never overwritten (saving refuses in one line); reading it
costs one warning line and no correction.
"""

from __future__ import annotations

import math
import os
import sys
import tomllib
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import Any

from bench.config import config_dir
from bench.errors import SettingsError

CLOCK_FILE = "clock.toml"
MAX_CLOCK_PPM = 10000.0
"""Largest clock error taken (1 %): a real crystal is off by tens of ppm (common practice)."""


@dataclass(frozen=True, slots=True)
class ClockCalibration:
    """One input's measured clock error.

    Attributes
    ----------
    device : str
        The device's name as PortAudio lists it.
    host_api : str
        ALSA, JACK Audio Connection Kit, WASAPI, Core Audio, ...
    clock_ppm : float, ppm
        ``(true sample rate / nominal sample rate - 1) * 1e6``.
    clock_ppm_se : float >= 0, ppm
        Its standard error.
    method : str
        ``"reference tone"`` or ``"system clock"``.
    detail : str
        How it was measured, one line.
    sample_rate : int, Hz
        The nominal rate it was measured at.
    measured : str
        Local date and time, ISO 8601.
    """

    device: str
    host_api: str
    clock_ppm: float
    clock_ppm_se: float
    method: str
    detail: str
    sample_rate: int
    measured: str

    def label(self) -> str:
        """``'USB Audio' (ALSA)``."""
        return f"'{self.device}' ({self.host_api})"


def clock_file_path() -> Path:
    """The clock file in bench's config folder (``$BENCH_CONFIG_DIR`` or the platform's)."""
    return config_dir() / CLOCK_FILE


def check_clock_ppm(value: float, option: str = "--clock-ppm") -> float:
    """``value`` as a clock error in ppm; one-line SettingsError when it is not a usable one."""
    if not (math.isfinite(value) and abs(value) <= MAX_CLOCK_PPM):
        raise SettingsError(
            f"{option} {value!r} is not a clock error bench takes; give ppm between "
            f"-{MAX_CLOCK_PPM:g} and {MAX_CLOCK_PPM:g} (a sound card is off by tens)"
        )
    return float(value)


def parse_clock_ppm(text: str | None) -> float | None:
    """A ``--clock-ppm`` value: None when not given; a one-line SettingsError when unusable."""
    if text is None:
        return None
    from bench.numbers import parse_number

    return check_clock_ppm(parse_number(text, "--clock-ppm", "the clock error in ppm, e.g. 23.5"))


def _read_tables(path: Path) -> dict[str, Any]:
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return {}
    except (OSError, UnicodeDecodeError) as exc:
        raise SettingsError(f"cannot read the clock file {path} ({exc}); move it aside") from None
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SettingsError(f"the clock file {path} is not valid TOML ({exc}); fix it or move it aside") from None


def _entry(table: Any) -> ClockCalibration | None:
    if not isinstance(table, dict):
        return None
    try:
        ppm = float(table["clock_ppm"])
        cal = ClockCalibration(
            device=str(table["device"]),
            host_api=str(table["host_api"]),
            clock_ppm=check_clock_ppm(ppm, "clock_ppm"),
            clock_ppm_se=float(table.get("clock_ppm_se", math.nan)),
            method=str(table.get("method", "")),
            detail=str(table.get("detail", "")),
            sample_rate=int(table.get("sample_rate", 0)),
            measured=str(table.get("measured", "")),
        )
    except (KeyError, TypeError, ValueError):
        return None
    return cal


def load_calibrations(path: Path | None = None) -> list[ClockCalibration]:
    """Every usable entry of the clock file (none when there is no file).

    Raises
    ------
    SettingsError
        The file cannot be read or is not TOML.
    """
    data = _read_tables(Path(path) if path is not None else clock_file_path())
    tables = data.get("input", [])
    if not isinstance(tables, list):
        return []
    return [c for c in (_entry(t) for t in tables) if c is not None]


def find_calibration(device: str, host_api: str, path: Path | None = None) -> ClockCalibration | None:
    """The stored calibration of the device ``device`` under ``host_api``, or None.

    A clock file that cannot be read gives one warning line on stderr and None.
    """
    try:
        entries = load_calibrations(path)
    except SettingsError as exc:
        print(f"warning: {exc}; readings are not clock-corrected", file=sys.stderr)
        return None
    for cal in entries:
        if cal.device == device and cal.host_api == host_api:
            return cal
    return None


def save_calibration(cal: ClockCalibration, path: Path | None = None) -> Path:
    """Store ``cal``, replacing the entry of the same device and host API; returns the file.

    Raises
    ------
    SettingsError
        The existing file is not TOML (it is left as it is), or the folder cannot be written.
    """
    import tomli_w

    path = Path(path) if path is not None else clock_file_path()
    data = _read_tables(path)
    tables = data.get("input", [])
    if not isinstance(tables, list):
        raise SettingsError(f"the clock file {path} has an 'input' key that is not a list of tables; move it aside")
    kept = [
        t for t in tables
        if not (isinstance(t, dict) and t.get("device") == cal.device and t.get("host_api") == cal.host_api)
    ]  # fmt: skip
    new = {
        "device": cal.device,
        "host_api": cal.host_api,
        "clock_ppm": round(cal.clock_ppm, 4),
        "clock_ppm_se": round(cal.clock_ppm_se, 4) if math.isfinite(cal.clock_ppm_se) else -1.0,
        "method": cal.method,
        "detail": cal.detail,
        "sample_rate": cal.sample_rate,
        "measured": cal.measured,
    }
    data["input"] = [*kept, new]
    text = "# bench: the input clocks' errors, measured by 'bench calibrate'\n" + tomli_w.dumps(data)
    tmp = path.with_name(path.name + ".tmp")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp.write_text(text, encoding="utf-8")
        os.replace(tmp, path)
    except OSError as exc:
        raise SettingsError(f"cannot write the clock file {path}: {exc.strerror or exc}") from None
    return path


def now_iso() -> str:
    """Local date and time to the second, ISO 8601."""
    return datetime.now().isoformat(timespec="seconds")
