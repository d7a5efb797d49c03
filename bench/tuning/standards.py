"""Pitch standards: the frequency of A4, given as a number or as a named preset."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from bench.errors import SettingsError

__all__ = [
    "A4_MAX_HZ",
    "A4_MIN_HZ",
    "DEFAULT_A4_HZ",
    "PITCH_STANDARDS",
    "PitchStandard",
    "check_a4",
    "parse_a4",
    "standard_name",
]

A4_MIN_HZ = 300.0
A4_MAX_HZ = 500.0
DEFAULT_A4_HZ = 440.0  # ISO 16:1975


@dataclass(frozen=True, slots=True)
class PitchStandard:
    """A named pitch standard.

    Attributes
    ----------
    name : str
        Preset name as typed on the command line (words and the frequency).
    a4_hz : float, Hz
        Frequency of A4.
    """

    name: str
    a4_hz: float


# Nominal values as used in practice (415, not 440 * 2**(-1/12) = 415.3047 Hz).
PITCH_STANDARDS: tuple[PitchStandard, ...] = (
    PitchStandard("low baroque 392", 392.0),
    PitchStandard("baroque 415", 415.0),
    PitchStandard("classical 430", 430.0),
    PitchStandard("modern 440", 440.0),
    PitchStandard("orchestra 442", 442.0),
    PitchStandard("orchestra 443", 443.0),
    PitchStandard("high baroque 466", 466.0),
)


def _key(text: str) -> str:
    """Comparison key of a preset name: lower case, no spaces, hyphens or underscores."""
    return re.sub(r"[\s_\-]+", "", text.strip().lower())


def _lookup() -> dict[str, float]:
    table: dict[str, float] = {}
    words: dict[str, list[float]] = {}
    for std in PITCH_STANDARDS:
        table[_key(std.name)] = std.a4_hz
        word = _key(std.name.rsplit(" ", 1)[0])
        words.setdefault(word, []).append(std.a4_hz)
    for word, values in words.items():
        if len(values) == 1:  # "baroque" alone means 415; "orchestra" alone is ambiguous
            table.setdefault(word, values[0])
    return table


_PRESETS = _lookup()
_PRESET_LIST = ", ".join(f"'{s.name}'" for s in PITCH_STANDARDS)


def check_a4(a4_hz: float) -> float:
    """Return ``a4_hz`` as a float if it is a usable pitch standard, else raise SettingsError."""
    value = float(a4_hz)
    if not (math.isfinite(value) and A4_MIN_HZ <= value <= A4_MAX_HZ):
        raise SettingsError(
            f"A4 = {a4_hz!r} Hz is outside {A4_MIN_HZ:g}-{A4_MAX_HZ:g} Hz; "
            f"give a frequency in that range or a preset: {_PRESET_LIST}"
        )
    return value


def parse_a4(text: str | float) -> float:
    """Read a pitch standard: A4 in Hz, or the name of a preset.

    Parameters
    ----------
    text : str or float
        A number of hertz in 300-500 (any precision; the display shows 0.01 Hz), or a preset
        name from :data:`PITCH_STANDARDS`. Names ignore case, and spaces, hyphens and
        underscores are interchangeable (``baroque-415``); the words alone work where they
        name one preset (``baroque``, ``modern``).

    Returns
    -------
    float, Hz
        Frequency of A4.

    Raises
    ------
    SettingsError
        If ``text`` is neither a frequency in range nor a preset name.

    Examples
    --------
    >>> parse_a4("442"), parse_a4("baroque 415"), parse_a4("Modern"), parse_a4("415.3")
    (442.0, 415.0, 440.0, 415.3)
    """
    if isinstance(text, (int, float)):
        return check_a4(text)
    from bench.numbers import strict_float  # the one number syntax of bench (no '4_40')
    from bench.textsafe import clip

    body = text.strip().lower().removesuffix("hz")
    value = strict_float(body)
    if value is None and body.strip().lstrip("+-") in ("nan", "inf", "infinity"):
        return check_a4(float(body))  # not finite: outside the range
    if value is None:
        preset = _PRESETS.get(_key(text))
        if preset is None:
            raise SettingsError(
                f"pitch standard {clip(repr(text))} is neither a frequency nor a preset; give A4 in "
                f"{A4_MIN_HZ:g}-{A4_MAX_HZ:g} Hz or one of {_PRESET_LIST}"
            )
        return preset
    return check_a4(value)


def standard_name(a4_hz: float) -> str | None:
    """Name of the preset whose A4 is ``a4_hz`` (within 0.005 Hz), or None.

    Examples
    --------
    >>> standard_name(415.0), standard_name(415.3)
    ('baroque 415', None)
    """
    for std in PITCH_STANDARDS:
        if abs(std.a4_hz - a4_hz) < 0.005:
            return std.name
    return None
