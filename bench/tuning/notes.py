"""Note names in scientific pitch notation and their MIDI numbers.

C4 is middle C, MIDI 60; A4 is MIDI 69. Octave numbers change between B and C, so the octave
belongs to the letter: ``Cb4`` is MIDI 59 (the B below middle C) and ``B#3`` is MIDI 60.
"""

from __future__ import annotations

import re

from bench.errors import SettingsError

__all__ = [
    "MIDI_MAX",
    "MIDI_MIN",
    "PITCH_CLASS_NAMES_FLAT",
    "PITCH_CLASS_NAMES_SHARP",
    "canonical_pitch_class",
    "note_name",
    "parse_note",
    "parse_pitch_class",
    "pitch_class_name",
]

MIDI_MIN = 0
MIDI_MAX = 127

PITCH_CLASS_NAMES_SHARP = ("C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B")
PITCH_CLASS_NAMES_FLAT = ("C", "Db", "D", "Eb", "E", "F", "Gb", "G", "Ab", "A", "Bb", "B")

_LETTER_PC = {"C": 0, "D": 2, "E": 4, "F": 5, "G": 7, "A": 9, "B": 11}

# Accidentals, longest first so that "##" wins over "#". Values in semitones.
_ACCIDENTALS = (
    ("##", 2),
    ("bb", -2),
    ("𝄪", 2),
    ("𝄫", -2),
    ("x", 2),
    ("#", 1),
    ("♯", 1),
    ("b", -1),
    ("♭", -1),
    ("♮", 0),
)
_ACC_PATTERN = "|".join(re.escape(a) for a, _ in _ACCIDENTALS)
_ACC_VALUE = {a: v for a, v in _ACCIDENTALS}

_PC_RE = re.compile(rf"^([A-Ga-g])({_ACC_PATTERN})?$")
_NOTE_RE = re.compile(rf"^([A-Ga-g])({_ACC_PATTERN})?(-?\d+)$")

_NOTE_HELP = "use a letter A-G, an optional #, b, ## or bb, and an octave, e.g. C4, F#5, Bb3"
_PC_HELP = "use a letter A-G with an optional #, b, ## or bb, e.g. C, F#, Bb"


def _split(text: str, pattern: re.Pattern[str]) -> re.Match[str] | None:
    return pattern.match(text.strip().replace("\N{MINUS SIGN}", "-"))


def _accidental(match: re.Match[str]) -> int:
    """Semitone shift of the accidental group (group 2) of a match."""
    acc = match.group(2)
    return _ACC_VALUE[acc] if acc else 0


def parse_pitch_class(text: str) -> int:
    """Parse a pitch-class name such as ``C``, ``F#``, ``Bb``, ``c♯`` or ``Ebb``.

    Parameters
    ----------
    text : str
        Letter A-G (any case), then an optional accidental: ``#``/``♯`` sharp, ``b``/``♭``
        flat, ``##``/``x``/``𝄪`` double sharp, ``bb``/``𝄫`` double flat.

    Returns
    -------
    int, 0..11
        Pitch class, C = 0.

    Raises
    ------
    SettingsError
        If ``text`` is not a pitch-class name.

    Examples
    --------
    >>> parse_pitch_class("Bb"), parse_pitch_class("f#"), parse_pitch_class("Cb")
    (10, 6, 11)
    """
    match = _split(text, _PC_RE)
    if match is None:
        raise SettingsError(f"pitch class {text!r} is not a note name; {_PC_HELP}")
    return (_LETTER_PC[match.group(1).upper()] + _accidental(match)) % 12


def pitch_class_name(pc: int, flats: bool = False) -> str:
    """Spell a pitch class with sharps (default) or flats.

    Parameters
    ----------
    pc : int
        Pitch class; taken modulo 12, C = 0.
    flats : bool
        Spell black keys with flats (``Bb``) instead of sharps (``A#``).

    Returns
    -------
    str

    Examples
    --------
    >>> pitch_class_name(10), pitch_class_name(10, flats=True)
    ('A#', 'Bb')
    """
    names = PITCH_CLASS_NAMES_FLAT if flats else PITCH_CLASS_NAMES_SHARP
    return names[pc % 12]


def canonical_pitch_class(text: str) -> str:
    """Respell a pitch-class name the plain way, keeping the writer's choice of sharp or flat.

    Examples
    --------
    >>> canonical_pitch_class("bb"), canonical_pitch_class("f♯"), canonical_pitch_class("Cx")
    ('Bb', 'F#', 'D')
    """
    pc = parse_pitch_class(text)
    match = _split(text, _PC_RE)
    flats = match is not None and _accidental(match) < 0
    return pitch_class_name(pc, flats=flats)


def parse_note(text: str) -> int:
    """Parse a note in scientific pitch notation into its MIDI number.

    Parameters
    ----------
    text : str
        Pitch-class name as for :func:`parse_pitch_class`, then the octave number
        (C4 = middle C). ``C-1`` is MIDI 0, ``G9`` MIDI 127.

    Returns
    -------
    int, 0..127
        MIDI note number.

    Raises
    ------
    SettingsError
        If ``text`` is not a note name or lies outside MIDI 0..127.

    See Also
    --------
    note_name : the inverse.

    Examples
    --------
    >>> parse_note("C4"), parse_note("a4"), parse_note("Db4"), parse_note("C♯4"), parse_note("B#3")
    (60, 69, 61, 61, 60)
    """
    match = _split(text, _NOTE_RE)
    if match is None:
        raise SettingsError(f"note {text!r} is not a note name; {_NOTE_HELP}")
    octave = int(match.group(3))
    midi = 12 * (octave + 1) + _LETTER_PC[match.group(1).upper()] + _accidental(match)
    if not MIDI_MIN <= midi <= MIDI_MAX:
        raise SettingsError(
            f"note {text!r} is outside the MIDI range; use a note from C-1 to G9"
        )
    return midi


def note_name(midi: int, flats: bool = False) -> str:
    """Name a MIDI note in scientific pitch notation.

    Parameters
    ----------
    midi : int
        MIDI note number (any integer; 60 = C4).
    flats : bool
        Spell black keys with flats instead of sharps.

    Returns
    -------
    str

    Examples
    --------
    >>> note_name(60), note_name(70), note_name(70, flats=True), note_name(21)
    ('C4', 'A#4', 'Bb4', 'A0')
    """
    return f"{pitch_class_name(midi % 12, flats)}{midi // 12 - 1}"
