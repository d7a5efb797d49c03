"""The one strict number parser of bench: options, typed values, files and sensors.

Accepted: an optional sign, decimal digits with an optional decimal point, and an optional
exponent (``18.5``, ``-3``, ``.5``, ``2.35e1``). The Unicode minus sign U+2212 (the sign
typography uses, ISO 80000-1 / Unicode "MINUS SIGN") counts as ``-``. Refused: underscores
(Python's ``float`` takes ``4_40``), ``inf`` and ``nan`` in any spelling, hexadecimal, and any
value whose magnitude overflows a double (``1e999``).
"""

from __future__ import annotations

import math
import re

from bench.errors import SettingsError
from bench.textsafe import clip

__all__ = ["NUMBER_RE", "UNICODE_MINUS", "find_number", "parse_number", "strict_float"]

UNICODE_MINUS = "\u2212"
"""MINUS SIGN (U+2212), read as the ASCII hyphen-minus."""

_BODY = r"(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+\-\u2212]?[0-9]{1,6})?"
NUMBER_RE = re.compile(rf"^[+\-\u2212]?{_BODY}$")
"""The whole text of a number."""
_SEARCH_RE = re.compile(rf"(?<![\w.])[+\-\u2212]?{_BODY}(?![0-9._])")
MAX_NUMBER_CHARS = 64
"""Longest text taken as a number (no sensible value needs more)."""


def strict_float(text: str) -> float | None:
    """The value of ``text`` as a finite float, or None when it is not a strict number.

    >>> strict_float("2.35e1"), strict_float("\u22125.0"), strict_float("4_40"), strict_float("1e999")
    (23.5, -5.0, None, None)
    """
    body = text.strip()
    if len(body) > MAX_NUMBER_CHARS or NUMBER_RE.match(body) is None:
        return None
    value = float(body.replace(UNICODE_MINUS, "-"))
    return value if math.isfinite(value) else None


def parse_number(text: object, option: str, what: str) -> float:
    """Read a number the user gave, or raise one line naming it.

    Parameters
    ----------
    text : object
        The value as given (a str; anything else is refused unless it is a finite int or
        float, as a TOML file may hold).
    option : str
        How the value is named in the message (``--temp``, ``a4_hz in settings.toml``).
    what : str
        What to give instead, e.g. ``"the air temperature in degC, e.g. 18.5"``.

    Returns
    -------
    float

    Raises
    ------
    SettingsError
        Not a strict finite number.
    """
    if isinstance(text, bool):
        value: float | None = None
    elif isinstance(text, int | float):
        value = float(text) if math.isfinite(text) else None
    elif isinstance(text, str):
        value = strict_float(text)
    else:
        value = None
    if value is None:
        shown = f"'{clip(text)}'" if isinstance(text, str) else clip(repr(text))
        raise SettingsError(
            f"{option} {shown} is not a number (decimal, e.g. 18.5 or 2.35e1, no '_'); give {what}"
        )
    return value


def find_number(text: str) -> tuple[float, str] | None:
    """The first strict number standing alone in ``text`` (sensor output), and its text.

    A number glued to letters (``t2``) is not taken; a decimal comma (``23,4``) is read as a
    point when no point is present. Returns None when there is none, and raises when the
    first number is not finite.

    >>> find_number("temp=2.35e1 C")
    (23.5, '2.35e1')
    >>> find_number("\u22125.0 degC")
    (-5.0, '\u22125.0')

    Raises
    ------
    SettingsError
        The first number overflows a double (``1e999``).
    """
    candidate = re.sub(r"(?<=\d),(?=\d)", ".", text) if "." not in text else text
    m = _SEARCH_RE.search(candidate)
    if m is None:
        return None
    value = float(m.group().replace(UNICODE_MINUS, "-"))
    if not math.isfinite(value):
        raise SettingsError(f"{clip(repr(m.group()))} is not a finite number")
    return value, m.group()


def number_arg(text: str) -> float:
    """argparse ``type=``: the one number syntax of bench for an option's value.

    Raises
    ------
    argparse.ArgumentTypeError
        Not a strict finite number (argparse turns it into one line naming the option).
    """
    import argparse

    value = strict_float(text)
    if value is None:
        raise argparse.ArgumentTypeError(f"{clip(text)!r} is not a number (decimal, e.g. 2 or 1.5, no '_')")
    return value


def parse_bounded(option: str, text: str | None, what: str, lo: float, hi: float) -> float | None:
    """An option's number within ``lo``..``hi``; None when it was not given.

    Raises
    ------
    SettingsError
        Not a strict number, or out of the range (one line naming the option).
    """
    if text is None:
        return None
    value = parse_number(text, option, what)
    if not lo <= value <= hi:
        raise SettingsError(f"{option} {clip(text)!r} is out of range; give {what} ({lo:g}-{hi:g})")
    return value
