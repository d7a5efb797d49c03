"""Text from files and users shown as text: control characters escaped, long values cut.

A terminal runs the escape sequences (ECMA-48 control functions) it is sent; a name or title
read from a file must therefore never reach it raw. Every character of Unicode general
category Cc (C0, DEL, C1) or of the bidirectional formatting controls (Unicode UAX #9: U+202A
to U+202E, U+2066 to U+2069, which reorder what is shown) is written as a ``\\xNN`` or
``\\uNNNN`` escape.
"""

from __future__ import annotations

import unicodedata

__all__ = ["MAX_SHOWN_CHARS", "clip", "one_line", "printable"]

MAX_SHOWN_CHARS = 80
"""Longest value echoed in an error line, characters."""

_BIDI = frozenset(range(0x202A, 0x202F)) | frozenset(range(0x2066, 0x206A))


def _escape(ch: str) -> str:
    code = ord(ch)
    return f"\\x{code:02x}" if code < 0x100 else f"\\u{code:04x}"


def printable(text: str) -> str:
    """``text`` with every control character escaped (newlines and tabs included).

    >>> printable("Wren\\x1b[2J alto")
    'Wren\\\\x1b[2J alto'
    """
    return "".join(
        _escape(ch) if (unicodedata.category(ch) == "Cc" or ord(ch) in _BIDI) else ch for ch in text
    )


def clip(text: str, limit: int = MAX_SHOWN_CHARS) -> str:
    """``text`` escaped and cut to about ``limit`` characters, saying how long it was.

    >>> clip("x" * 1000, 20)
    'xxxxxxxxxxxxxxxxxxxx... (1000 characters)'
    """
    shown = printable(text)
    if len(shown) <= limit:
        return shown
    return f"{shown[:limit]}... ({len(text)} characters)"


def one_line(message: str, limit: int = 400) -> str:
    """A message made safe for one terminal line: escaped, and cut when longer than ``limit``."""
    shown = printable(message)
    if len(shown) <= limit:
        return shown
    return f"{shown[: limit - 40]}... ({len(message)} characters in all)"
