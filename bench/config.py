"""Settings remembered between runs, and the folders bench keeps its files in.

The tuning settings the user chose are saved as TOML (``settings.toml``) in the platform's
configuration folder (``platformdirs.user_config_dir("bench")``); the environment variable
``BENCH_CONFIG_DIR`` points elsewhere (tests, portable installs). A corrupt or outdated
file costs one warning line on stderr and the defaults, never a crash.
"""

from __future__ import annotations

import dataclasses
import math
import os
import sys
import tomllib
from pathlib import Path
from typing import Any

from bench.tuning import TuningSettings

CONFIG_DIR_ENV = "BENCH_CONFIG_DIR"
LOG_DIR_ENV = "BENCH_LOG_DIR"
SETTINGS_FILE = "settings.toml"


def config_dir() -> Path:
    """Folder for bench's configuration (``$BENCH_CONFIG_DIR`` or the platform's)."""
    override = os.environ.get(CONFIG_DIR_ENV)
    if override:
        return Path(override)
    from platformdirs import user_config_dir

    return Path(user_config_dir("bench"))


def default_log_dir() -> Path:
    """Folder for session logs (``$BENCH_LOG_DIR`` or ``logs`` in the platform's data folder)."""
    override = os.environ.get(LOG_DIR_ENV)
    if override:
        return Path(override)
    from platformdirs import user_data_dir

    return Path(user_data_dir("bench")) / "logs"


def settings_path() -> Path:
    """The remembered-settings file."""
    return config_dir() / SETTINGS_FILE


def _warn(message: str) -> None:
    print(f"warning: {message}", file=sys.stderr)


def load_saved_settings(path: Path | None = None) -> TuningSettings | None:
    """The settings saved by the last run, or None when there are none.

    Keys the current version does not know are ignored; a value of the wrong type, or a
    file that is not TOML, gives one warning line and None (the caller uses defaults).
    """
    path = Path(path) if path is not None else settings_path()
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        return None
    except (OSError, UnicodeDecodeError) as exc:
        _warn(f"cannot read saved settings {path} ({exc}); using defaults")
        return None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        _warn(f"saved settings {path} are not valid TOML ({exc}); using defaults")
        return None
    table = data.get("tuning", {})
    if not isinstance(table, dict):
        _warn(f"saved settings {path} have no [tuning] table; using defaults")
        return None
    defaults = TuningSettings()
    changes: dict[str, Any] = {}
    for f in dataclasses.fields(TuningSettings):
        if f.name == "custom_temperament" or f.name not in table:
            continue
        value = table[f.name]
        default = getattr(defaults, f.name)
        if isinstance(default, bool):
            ok = isinstance(value, bool)
        elif isinstance(default, float) or (default is None and f.name.endswith(("_percent", "_c", "_hz"))):
            ok = isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)
            value = float(value) if ok else value
        elif isinstance(default, int):
            ok = isinstance(value, int) and not isinstance(value, bool)
        elif isinstance(default, str):
            ok = isinstance(value, str)
        else:
            ok = True
        if not ok:
            _warn(f"saved setting {f.name} = {value!r} in {path} is not valid; using defaults")
            return None
        changes[f.name] = value
    temperament_file = table.get("temperament_file")
    if isinstance(temperament_file, str) and temperament_file:
        from bench.tuning import load_temperament

        try:
            custom = load_temperament(temperament_file)
        except Exception as exc:  # noqa: BLE001 - any failure: warn and fall back
            _warn(f"saved temperament file {temperament_file} cannot be read ({exc}); using equal")
            changes.pop("temperament", None)
        else:
            changes["temperament"] = custom.id
            changes["custom_temperament"] = custom
    try:
        return dataclasses.replace(defaults, **changes)
    except (TypeError, ValueError) as exc:
        _warn(f"saved settings in {path} are not valid ({exc}); using defaults")
        return None


def save_settings(settings: TuningSettings, path: Path | None = None) -> Path:
    """Remember ``settings`` for the next run; returns the file written.

    Written to a temporary file and renamed, so a crash never leaves half a file.
    Fields that are None (no humidity given) are left out; a custom temperament is
    remembered by the file it was read from.

    Raises
    ------
    OSError
        The folder cannot be written.
    """
    import tomli_w

    path = Path(path) if path is not None else settings_path()
    table: dict[str, bool | int | float | str] = {}
    for f in dataclasses.fields(settings):
        value = getattr(settings, f.name)
        if isinstance(value, bool | int | float | str):
            table[f.name] = value
    custom = getattr(settings, "custom_temperament", None)
    if custom is not None:
        source = getattr(custom, "source", None)
        if source:  # remembered by its file; a temperament with no file is not remembered
            table["temperament_file"] = str(Path(source).resolve())
        else:
            table.pop("temperament", None)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text("# bench: settings remembered between runs\n" + tomli_w.dumps({"tuning": table}), encoding="utf-8")
    os.replace(tmp, path)
    return path
