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
import re
import sys
import tomllib
from pathlib import Path
from typing import Any

from bench.errors import SettingsError
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
    from bench.textsafe import one_line

    try:
        print(f"warning: {one_line(message)}", file=sys.stderr, flush=True)
    except BrokenPipeError:
        from bench.pipes import silence

        silence(sys.stderr)


SETTINGS_LIMIT_BYTES = 100_000
"""Largest settings file read, bytes (bench writes a few hundred)."""
BACKUP_SUFFIX = ".bak"
"""The copy of the previous settings file kept beside it on every save."""


@dataclasses.dataclass(frozen=True, slots=True)
class SavedSettings:
    """The saved settings, and which of them the file set.

    Attributes
    ----------
    settings : TuningSettings
        Defaults, with every valid value of the file in place.
    from_file : frozenset of str
        Names of the fields whose value came from the file.
    path : Path
        The settings file.
    problems : tuple of str
        One line per value the file holds that was not used (also printed as warnings).
    """

    settings: TuningSettings
    from_file: frozenset[str]
    path: Path
    problems: tuple[str, ...] = ()


def _read_table(path: Path, problems: list[str]) -> dict[str, Any] | None:
    """The [tuning] table of the file, or None (missing file, or a problem noted)."""
    from bench.safeio import FileRefused, read_text_file

    try:
        text = read_text_file(path, limit_bytes=SETTINGS_LIMIT_BYTES)
    except FileRefused as exc:
        if not exc.missing:
            problems.append(f"cannot read saved settings {path} ({exc.reason}); using defaults")
        return None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        problems.append(f"saved settings {path} are not valid TOML ({exc}); using defaults")
        return None
    except RecursionError:
        problems.append(f"saved settings {path} nest tables or arrays too deep to read; using defaults")
        return None
    except ValueError:  # an integer past Python's digit limit
        problems.append(f"saved settings {path} hold a number of thousands of digits; using defaults")
        return None
    table = data.get("tuning", {})
    if not isinstance(table, dict):
        problems.append(f"saved settings {path} have no [tuning] table; using defaults")
        return None
    return table


def _checked_value(name: str, value: Any, default: Any) -> tuple[bool, Any]:
    """Whether a saved value has the field's type, and the value to use."""
    if isinstance(default, bool):
        return isinstance(value, bool), value
    if isinstance(default, float) or (default is None and name.endswith(("_percent", "_c", "_hz"))):
        ok = isinstance(value, int | float) and not isinstance(value, bool) and math.isfinite(value)
        return ok, float(value) if ok else value
    if isinstance(default, int):
        return isinstance(value, int) and not isinstance(value, bool), value
    if isinstance(default, str):
        return isinstance(value, str), value
    return True, value


def read_saved_settings(path: Path | None = None) -> SavedSettings:
    """The settings saved by the last run, value by value.

    Keys the current version does not know are ignored. A value of the wrong type or out of
    range costs one warning line naming it, and only that setting keeps its default; an
    unreadable file (not a regular file, too large, not UTF-8, not TOML, nested too deep)
    costs one warning line and every default. Never raises.
    """
    from bench.textsafe import clip

    path = Path(path) if path is not None else settings_path()
    problems: list[str] = []
    defaults = TuningSettings()
    table = _read_table(path, problems)
    accepted: dict[str, Any] = {}
    if table is not None:
        for f in dataclasses.fields(TuningSettings):
            if f.name == "custom_temperament" or f.name not in table:
                continue
            ok, value = _checked_value(f.name, table[f.name], getattr(defaults, f.name))
            why = ""
            if ok and f.name == "temperament" and not table.get("temperament_file"):
                from bench.tuning.temperaments import canonical_temperament_id

                try:
                    value = canonical_temperament_id(value)
                except SettingsError as exc:
                    ok, why = False, str(exc)
            if ok:
                try:
                    dataclasses.replace(defaults, **{f.name: value})
                except (TypeError, ValueError) as exc:
                    ok = False
                    why = str(exc)
                else:
                    accepted[f.name] = value
            elif not why:
                why = f"a {type(table[f.name]).__name__} where a {type(getattr(defaults, f.name)).__name__} belongs"
            if not ok:
                problems.append(
                    f"saved setting {f.name} = {clip(repr(table[f.name]))} in {path} is not valid "
                    f"({clip(why, 160)}); using the default {getattr(defaults, f.name)!r} for it"
                )
        temperament_file = table.get("temperament_file")
        if isinstance(temperament_file, str) and temperament_file:
            from bench.tuning import load_temperament

            try:
                custom = load_temperament(temperament_file)
            except Exception as exc:  # noqa: BLE001 - any failure: warn and fall back
                problems.append(
                    f"saved temperament file {clip(temperament_file)} cannot be read ({clip(str(exc), 160)}); using equal"
                )
                accepted.pop("temperament", None)
            else:
                accepted["temperament"] = custom.id
                accepted["custom_temperament"] = custom
    settings = defaults
    for name, value in accepted.items():  # one by one, so a clash drops one value, not all
        try:
            settings = dataclasses.replace(settings, **{name: value})
        except (TypeError, ValueError) as exc:
            problems.append(f"saved setting {name} in {path} is not valid with the others ({exc}); using the default")
    from_file = frozenset(
        n for n in accepted if n != "custom_temperament" and getattr(settings, n) == accepted[n]
    )
    for line in problems:
        _warn(line)
    return SavedSettings(settings, from_file, path, tuple(problems))


def load_saved_settings(path: Path | None = None) -> TuningSettings | None:
    """The settings saved by the last run, or None when the file sets none.

    See :func:`read_saved_settings`: a bad value costs a warning and only that value.
    """
    saved = read_saved_settings(path)
    return saved.settings if saved.from_file or saved.settings.custom_temperament else None


def _settings_table(settings: TuningSettings) -> dict[str, bool | int | float | str]:
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
    return table


_HEADER_RE = re.compile(r"^\s*\[\s*([^\]]*?)\s*\]\s*(?:#.*)?$")
_KEY_LINE_RE = re.compile(r"^(\s*)([A-Za-z0-9_\-]+)(\s*=\s*)(.*)$")


def _value_and_comment(rest: str) -> tuple[str, str]:
    """Split the text after ``key =`` into the value and a trailing comment (with its spaces)."""
    for i, ch in enumerate(rest):
        if ch != "#":
            continue
        try:
            tomllib.loads("v = " + rest[:i])
        except tomllib.TOMLDecodeError:
            continue
        j = i
        while j > 0 and rest[j - 1] in " \t":
            j -= 1
        return rest[:j], rest[j:]
    return rest.rstrip(), ""


def update_settings_text(text: str, table: dict[str, bool | int | float | str], known: set[str]) -> str:
    """``text`` with the [tuning] table's values set to ``table``: every line that needs no
    change is kept as it was (comments, unknown keys, other tables), a changed value is written
    in place keeping its comment, a known key absent from ``table`` is removed, a new one is
    added at the end of the table.

    Raises
    ------
    ValueError
        ``text`` is not TOML this can update line by line (the caller writes a fresh file).
    """
    import tomli_w

    tomllib.loads(text)  # refuse what is not TOML before touching it
    lines = text.splitlines(keepends=True)
    section: str | None = None
    seen: set[str] = set()
    end_of_tuning: int | None = None
    out: list[str] = []
    for line in lines:
        head = _HEADER_RE.match(line)
        if head:
            if section == "tuning":
                end_of_tuning = len(out)
            section = head.group(1).strip().strip("\"'")
            out.append(line)
            continue
        m = _KEY_LINE_RE.match(line.rstrip("\r\n"))
        if section == "tuning" and m and m.group(2) in known:
            key = m.group(2)
            if key in seen:
                raise ValueError(f"{key} twice")
            seen.add(key)
            if key not in table:
                continue
            value_text, comment = _value_and_comment(m.group(4))
            old = tomllib.loads("v = " + value_text)["v"]
            if old == table[key] and type(old) is type(table[key]):
                out.append(line)
                continue
            ending = line[len(line.rstrip("\r\n")):] or "\n"
            new_value = tomli_w.dumps({"v": table[key]}).split("=", 1)[1].strip()
            out.append(f"{m.group(1)}{key}{m.group(3)}{new_value}{comment}{ending}")
            continue
        out.append(line)
    if section == "tuning":
        end_of_tuning = len(out)
    missing = {k: v for k, v in table.items() if k not in seen}
    if end_of_tuning is None:
        if out and not out[-1].endswith("\n"):
            out[-1] += "\n"
        out.append("\n[tuning]\n")
        end_of_tuning = len(out)
    if missing:
        while end_of_tuning > 0 and out[end_of_tuning - 1].strip() == "" and end_of_tuning < len(out):
            end_of_tuning -= 1  # before the blank lines that end the table
        if end_of_tuning > 0 and not out[end_of_tuning - 1].endswith("\n"):
            out[end_of_tuning - 1] += "\n"
        out[end_of_tuning:end_of_tuning] = [tomli_w.dumps(missing)]
    result = "".join(out)
    check = tomllib.loads(result).get("tuning", {})
    if any(check.get(k) != v for k, v in table.items()):
        raise ValueError("the updated text does not read back")
    return result


def _copy_to_backup(path: Path) -> None:
    """Copy ``path`` (a regular file) to its .bak through a temporary file and a rename."""
    import shutil

    from bench.safeio import ReplacingFile

    out = ReplacingFile(path.with_name(path.name + BACKUP_SUFFIX))
    try:
        with open(path, "rb") as src:
            shutil.copyfileobj(src, out.file.buffer)  # type: ignore[attr-defined]
    except BaseException:
        out.discard()
        raise
    out.commit()


def save_settings(settings: TuningSettings, path: Path | None = None) -> Path:
    """Remember ``settings`` for the next run; returns the file written.

    The file is updated in place of its target (a symbolic link stays a link and the file it
    points to is replaced): comments, unknown keys and other tables are kept, only the values
    that changed are rewritten. The previous content is kept as ``settings.toml.bak`` beside
    the settings path. Written to a temporary file and renamed, so a crash never leaves half a
    file. Fields that are None (no humidity given) are left out; a custom temperament is
    remembered by the file it was read from.

    Raises
    ------
    OSError
        The folder cannot be written.
    """
    import tomli_w

    from bench.safeio import FileRefused, read_text_file, replace_file

    path = Path(path) if path is not None else settings_path()
    table = _settings_table(settings)
    known = {f.name for f in dataclasses.fields(settings)} | {"temperament_file"}
    fresh = "# bench: settings remembered between runs\n" + tomli_w.dumps({"tuning": table})
    try:
        old: str | None = read_text_file(path, limit_bytes=SETTINGS_LIMIT_BYTES)
    except FileRefused as exc:
        old = None
        if not exc.missing:  # unreadable as settings: kept whole as the .bak, or not touched
            if not os.path.isfile(path):
                raise OSError(f"{path} is not a regular file ({exc.reason}); settings not saved") from None
            _copy_to_backup(path)
    text = fresh
    if old is not None:
        try:
            text = update_settings_text(old, table, known)
        except (ValueError, RecursionError):  # not TOML, or not line by line: the .bak keeps it
            text = fresh
        if text == old:
            return path
        replace_file(path.with_name(path.name + BACKUP_SUFFIX), old)
    path.parent.mkdir(parents=True, exist_ok=True)
    replace_file(path, text, follow_link=True)
    return path
