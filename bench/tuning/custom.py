"""Custom temperaments read from a TOML file.

Format (all names lower case; see README-tuning for the full description)::

    id = "hollin-lane"                  # required; letters, digits, '.', '_', '-'
    name = "Hollin Lane workshop"       # optional, defaults to the id
    description = "Our voicing temperament for the Wren alto."   # optional

    [pitches]            # each of the 12 pitch classes once, on the tonic C:
    C = 0                #   a number: cents above C (0 <= x < 1200), or
    "C#" = "256/243"     #   a ratio in quotes: "p/q", 1 <= p/q < 2
    D = 196.09
    ...

Instead of ``[pitches]`` a file may give ``[deviations]``: cents from equal temperament per
pitch class, C = 0. Every note must lie within 50 cents of equal temperament, so that notes can
be named. Keys with ``#`` must be quoted (``"F#" = ...``); flat names (``Bb``) need no quotes.
"""

from __future__ import annotations

import math
import re
import tomllib
from fractions import Fraction
from pathlib import Path
from typing import Any

from bench.errors import SettingsError
from bench.textsafe import clip, printable
from bench.tuning.notes import parse_pitch_class, pitch_class_name
from bench.tuning.temperaments import (
    TEMPERAMENT_ALIASES,
    TEMPERAMENT_IDS,
    Temperament,
)

__all__ = ["MAX_DEVIATION_CENTS", "load_temperament", "parse_temperament"]

MAX_DEVIATION_CENTS = 50.0
TEMPERAMENT_LIMIT_BYTES = 100_000
"""Largest temperament file read, bytes (twelve notes take a few hundred)."""
_ID_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._\-]{0,39}$")
_TOP_KEYS = ("id", "name", "description", "pitches", "deviations")
_SECTION_RE = re.compile(r"^\s*\[\s*([^\]]+?)\s*\]")
_KEY_RE = re.compile(r"""^\s*(?:"([^"]*)"|'([^']*)'|([A-Za-z0-9_\-]+))\s*=""")
_DECODE_AT_RE = re.compile(r"\s*\(at line (\d+), column (\d+)\)\s*$")


def _line_of(text: str, section: str | None, key: str | None) -> int | None:
    """1-based line of ``key`` in ``[section]`` (or of the section header), None if not found."""
    current: str | None = None
    header_line: int | None = None
    for number, line in enumerate(text.splitlines(), start=1):
        head = _SECTION_RE.match(line)
        if head:
            current = head.group(1).strip().strip("\"'")
            if section is not None and current == section and header_line is None:
                header_line = number
            continue
        if current != section or key is None:
            continue
        m = _KEY_RE.match(line)
        if m and next(g for g in m.groups() if g is not None) == key:
            return number
    if section is None and key is not None:  # dotted or inline forms: find the table key
        return None
    return header_line


class _Reporter:
    """Builds one-line errors that name the file and the line."""

    def __init__(self, text: str, source: str) -> None:
        self.text = text
        self.source = source

    def error(
        self, problem: str, fix: str, section: str | None = None, key: str | None = None
    ) -> SettingsError:
        line = _line_of(self.text, section, key)
        if line is None and section is not None:
            line = _line_of(self.text, None, section)
        where = f"{self.source}, line {line}" if line else self.source
        return SettingsError(f"{where}: {problem}; {fix}")


def _decode(text: str, source: str) -> dict[str, Any]:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = str(exc)
        at = _DECODE_AT_RE.search(message)
        reason = _DECODE_AT_RE.sub("", message)
        if at is None:
            raise SettingsError(
                f"{source}: not valid TOML ({reason}); check the file's syntax"
            ) from None
        number = int(at.group(1))
        lines = text.splitlines()
        bad = lines[number - 1] if 0 < number <= len(lines) else ""
        if "#" in bad.split("=", 1)[0] and not bad.lstrip().startswith(("#", '"', "'")):
            fix = 'put a key with # in quotes, e.g. "F#" = 590.2'
        else:
            fix = "check the '=', the quotes and the brackets on that line"
        raise SettingsError(
            f"{source}, line {number}, column {at.group(2)}: not valid TOML ({reason}); {fix}"
        ) from None
    except ValueError:  # an integer past Python's digit limit
        raise SettingsError(
            f"{source}: not valid TOML (a number of thousands of digits); give cents such as 90.2"
        ) from None
    except RecursionError:
        raise SettingsError(
            f"{source}: not valid TOML (brackets nested thousands deep); check the brackets"
        ) from None


_EXPONENT_RE = re.compile(r"[eE]\s*([+-]?\d+)")


def _ratio(value: str) -> Fraction | None:
    exponent = _EXPONENT_RE.search(value)
    if len(value) > 64 or (exponent and abs(int(exponent.group(1))) > 30):
        return None  # Fraction would build a huge integer: no sensible ratio looks like this
    try:
        return Fraction(value.strip())
    except (ValueError, ZeroDivisionError):
        return None


_VALUE_HELP = {
    "pitches": 'cents above C (e.g. 90.2) or a ratio in quotes (e.g. "16/15")',
    "deviations": "cents from equal temperament (e.g. -3.9)",
}


def _value_cents(rep: _Reporter, section: str, key: str, pc: int, value: object) -> float:
    """Cents above C of one table entry, or a one-line error naming its line."""
    cents: float | None = None
    if isinstance(value, str) and section == "pitches":
        ratio = _ratio(value)
        if ratio is not None and not 1 <= ratio < 2:
            raise rep.error(
                f"ratio {value!r} for {key} is outside the octave",
                'give a ratio from 1 (inclusive) to 2 (exclusive), e.g. "9/8"',
                section=section,
                key=key,
            )
        if ratio is not None:
            cents = 1200.0 * math.log2(ratio)
    elif isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value):
        cents = float(value) + (100.0 * pc if section == "deviations" else 0.0)
    if cents is None:
        what = "a number of cents or a ratio" if section == "pitches" else "a number of cents"
        raise rep.error(
            f"{key} = {value!r} is not {what}",
            f"give {_VALUE_HELP[section]}",
            section=section,
            key=key,
        )
    if section == "pitches" and not 0.0 <= cents < 1200.0:
        raise rep.error(
            f"{key} = {value!r} cents is outside the octave",
            "give cents above C from 0 to below 1200",
            section=section,
            key=key,
        )
    return cents


def parse_temperament(text: str, source: str = "<temperament>") -> Temperament:
    """Read a custom temperament from TOML text.

    Parameters
    ----------
    text : str
        TOML in the format of this module's docstring.
    source : str
        Name of the file (used in error messages and kept in ``Temperament.source``).

    Returns
    -------
    Temperament
        With ``offsets_cents`` on the tonic C, C = 0.

    Raises
    ------
    SettingsError
        One line naming the file, the line and what to change.

    Examples
    --------
    >>> t = parse_temperament('id = "x"\\n[deviations]\\nC = 0\\nD = -4\\nE = -8\\nF = 2\\n'
    ...     '"C#" = -10\\nEb = -6\\n"F#" = -10\\nG = -2\\nAb = -8\\nA = -6\\nBb = -4\\nB = -10\\n')
    >>> t.id, t.offsets_cents[:3]
    ('x', (0.0, -10.0, -4.0))
    """
    text = text.removeprefix("\ufeff")  # a byte order mark is no part of the TOML (RFC 3629, 6)
    rep = _Reporter(text, source)
    data = _decode(text, source)

    for key in data:
        if key not in _TOP_KEYS:
            raise rep.error(
                f"unknown key {key!r}",
                f"use only {', '.join(_TOP_KEYS)}",
                key=key,
            )

    tid = data.get("id")
    if tid is None:
        raise SettingsError(
            f'{source}: the id is missing; add a line such as id = "my-temperament"'
        )
    if not isinstance(tid, str) or not _ID_RE.match(tid):
        raise rep.error(
            f"id {tid!r} is not a plain identifier",
            "use up to 40 letters, digits, '.', '_' or '-', starting with a letter or digit",
            key="id",
        )
    if tid.lower() in TEMPERAMENT_IDS or tid.lower() in TEMPERAMENT_ALIASES:
        raise rep.error(
            f"id {tid!r} is the name of a built-in temperament",
            "choose another id so the log can tell them apart",
            key="id",
        )
    for key in ("name", "description"):
        if key in data and not isinstance(data[key], str):
            raise rep.error(
                f"{key} {data[key]!r} is not text", f'write {key} = "..." in quotes', key=key
            )
    # Text from a file is shown as text: control characters (terminal escape codes) escaped.
    name = printable(data.get("name", tid))
    description = printable(data.get("description", "Custom temperament."))

    present = [k for k in ("pitches", "deviations") if k in data]
    if len(present) != 1:
        problem = (
            "both [pitches] and [deviations] are given"
            if present
            else "no [pitches] or [deviations] table"
        )
        raise rep.error(
            problem,
            "give exactly one: [pitches] (cents above C, or ratios) or [deviations] "
            "(cents from equal)",
            section=present[-1] if present else None,
        )
    section = present[0]
    table = data[section]
    if not isinstance(table, dict):
        raise rep.error(
            f"{section} is not a table",
            f"write [{section}] on its own line, then one line per note",
            key=section,
        )

    cents_above_c: dict[int, float] = {}
    key_of: dict[int, str] = {}
    for key, value in table.items():
        try:
            pc = parse_pitch_class(key)
        except SettingsError:
            raise rep.error(
                f"{key!r} in [{section}] is not a pitch class",
                'use C, "C#" (quoted), Db, D ... B',
                section=section,
                key=key,
            ) from None
        if pc in key_of:
            raise rep.error(
                f"{key!r} in [{section}] is the same pitch class as {key_of[pc]!r}",
                "give each of the twelve pitch classes once",
                section=section,
                key=key,
            )
        key_of[pc] = key
        cents_above_c[pc] = _value_cents(rep, section, key, pc, value)

    missing = [pitch_class_name(p) for p in range(12) if p not in cents_above_c]
    if missing:
        raise rep.error(
            f"[{section}] lacks {', '.join(missing)}",
            "give all twelve pitch classes C to B",
            section=section,
        )
    if abs(cents_above_c[0]) > 1e-9:
        raise rep.error(
            f"C = {table[key_of[0]]!r}, but C is the tonic",
            "set C = 0 (subtract C's value from all twelve)",
            section=section,
            key=key_of[0],
        )
    offsets = tuple(cents_above_c[p] - 100.0 * p for p in range(12))
    for p, off in enumerate(offsets):
        if abs(off) > MAX_DEVIATION_CENTS:
            raise rep.error(
                f"{key_of[p]} lies {off:+.2f} cents from equal temperament",
                f"keep every note within {MAX_DEVIATION_CENTS:g} cents of equal temperament",
                section=section,
                key=key_of[p],
            )
    for p in range(1, 12):
        if cents_above_c[p] <= cents_above_c[p - 1]:
            raise rep.error(
                f"{key_of[p]} ({cents_above_c[p]:.2f} c) is not above {key_of[p - 1]} "
                f"({cents_above_c[p - 1]:.2f} c)",
                "give the notes in rising order of pitch",
                section=section,
                key=key_of[p],
            )
    return Temperament(tid, name, description, offsets, source=source)


def load_temperament(path: str | Path) -> Temperament:
    """Read a custom temperament from a TOML file (format: :func:`parse_temperament`).

    Parameters
    ----------
    path : str or Path
        The ``.toml`` file.

    Returns
    -------
    Temperament

    Raises
    ------
    SettingsError
        If the file cannot be read or is not a valid temperament; one line naming the file,
        the line and the fix.
    """
    from bench.safeio import FileRefused, read_text_file

    file = Path(path)
    try:
        text = read_text_file(file, limit_bytes=TEMPERAMENT_LIMIT_BYTES)
    except FileRefused as exc:
        reason = "No such file" if exc.missing else exc.reason
        raise SettingsError(
            f"temperament file {clip(repr(str(file)))} cannot be read ({reason}); give the path of a "
            "UTF-8 .toml file"
        ) from None
    return parse_temperament(text, source=str(file))
