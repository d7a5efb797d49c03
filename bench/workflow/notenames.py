"""Note names for the workflow modules: the tuning model's spelling, with a small fallback.

``bench.tuning.notes`` is the project's authority for note names; until it is importable the
fallback below spells and parses the same plain forms (``C4``, ``F#5``, ``Bb3``; C4 = MIDI 60).
"""

from __future__ import annotations

import math
import re

from bench.errors import SettingsError

from collections.abc import Callable

_tuning_note_name: Callable[..., str] | None
_tuning_parse_note: Callable[[str], int] | None
try:  # the tuning model's parser and speller
    from bench.tuning.notes import note_name as _tuning_note_name
    from bench.tuning.notes import parse_note as _tuning_parse_note
except ImportError:  # pragma: no cover - only before the tuning model lands
    _tuning_note_name = None
    _tuning_parse_note = None

_SHARP = ("C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B")
_FLAT = ("C", "Db", "D", "Eb", "E", "F", "Gb", "G", "Ab", "A", "Bb", "B")
_LETTER = {"C": 0, "D": 2, "E": 4, "F": 5, "G": 7, "A": 9, "B": 11}
_NOTE_RE = re.compile(r"^([A-Ga-g])(#|b)?(-?\d+)$")


def parse_note(text: str) -> int:
    """MIDI number of a note name in scientific pitch notation.

    Raises
    ------
    SettingsError
        ``text`` is not a note name.

    Examples
    --------
    >>> parse_note("F4"), parse_note("Bb3"), parse_note("C#5")
    (65, 58, 73)
    """
    if _tuning_parse_note is not None:
        return int(_tuning_parse_note(text))
    m = _NOTE_RE.match(text.strip())
    if m is None:
        raise SettingsError(f"note {text!r} is not a note name; use e.g. C4, F#5, Bb3")
    acc = {"#": 1, "b": -1}.get(m.group(2) or "", 0)
    midi = 12 * (int(m.group(3)) + 1) + _LETTER[m.group(1).upper()] + acc
    if not 0 <= midi <= 127:
        raise SettingsError(f"note {text!r} is outside MIDI 0..127; use C-1 to G9")
    return midi


def note_name(midi: int, flats: bool = False) -> str:
    """Note name of a MIDI number (sharps unless ``flats``).

    Examples
    --------
    >>> note_name(65), note_name(70), note_name(70, flats=True)
    ('F4', 'A#4', 'Bb4')
    """
    if _tuning_note_name is not None:
        return str(_tuning_note_name(int(midi), flats=flats))
    names = _FLAT if flats else _SHARP
    return f"{names[midi % 12]}{midi // 12 - 1}"


def midi_of_freq(freq_hz: float, a4_hz: float = 440.0) -> int:
    """Nearest equal-tempered MIDI number of a frequency.

    Examples
    --------
    >>> midi_of_freq(349.23), midi_of_freq(415.0, a4_hz=415.0)
    (65, 69)
    """
    return int(round(69 + 12 * math.log2(freq_hz / a4_hz)))


def freq_of_midi(midi: int, a4_hz: float = 440.0) -> float:
    """Equal-tempered frequency of a MIDI number, Hz.

    >>> round(freq_of_midi(65), 3)
    349.228
    """
    return float(a4_hz * 2.0 ** ((midi - 69) / 12))
