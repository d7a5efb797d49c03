"""Instrument profiles: the compass of an instrument, which notes lie in which register, and
how its music is written.

The built-in family is the recorder family (REFERENCES §5, common practice): lowest notes
sopranino F5, soprano C5, alto F4, tenor C4, bass F3, great bass C3, contrabass F2,
sub-great-bass C2, each with a compass of two octaves and a tone (alto F4-G6).

Register split (common practice, from memory -- a maker's profile can set its own):

* first register: the lowest note up to the ninth above it (alto F4-G5, soprano C5-D6); the
  fingered tube sounds its fundamental (cross-fingerings included);
* second register: the next nine semitones (alto G#5-E6, soprano D#6-B6), played by venting
  the thumb hole, so the tube sounds its second mode (the octave);
* third register: from the double octave above the lowest note to the top of the compass
  (alto F6-G6, soprano C7-D7), where the third and higher modes and special fingerings are used.

Display transposition (common practice, from memory; verify against the music you read):
sopranino and soprano are written an octave below sounding (treble clef); alto and tenor at
pitch (treble clef); bass in bass clef an octave below sounding; great bass, contrabass and
sub-great-bass in bass clef at pitch.

Custom profiles are TOML files (see :func:`load_profile_file`)::

    [instrument]
    name = "wren-alto"            # how --profile refers to it; letters, digits, - and _
    title = "Wren alto in F"      # shown on charts
    lowest = "F4"                 # lowest note, sounding
    highest = "G6"                # highest note of the compass, sounding
    registers = ["F4", "G#5", "F6"]   # first note of register 1, 2, 3 ... (rising)
    written_offset_semitones = 0  # sounding minus written; 12 = sounds an octave above written
    clef = "treble"               # "treble" or "bass"
    missing = []                  # notes of the compass the instrument cannot play (optional)
"""

from __future__ import annotations

import itertools
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from bench.errors import SettingsError
from bench.textsafe import clip, printable
from bench.tuning.notes import note_name, parse_note

__all__ = [
    "FAMILY",
    "InstrumentProfile",
    "family_profile",
    "get_profile",
    "guess_profile",
    "load_profile_file",
    "parse_profile_text",
    "profile_names",
]

PROFILE_LIMIT_BYTES = 100_000
"""Largest profile file read, bytes."""
COMPASS_SEMITONES = 26
"""Two octaves and a tone (REFERENCES §5, common practice)."""
SECOND_REGISTER_FROM = 15
"""Semitones above the lowest note where the second register starts (from memory)."""
THIRD_REGISTER_FROM = 24
"""Semitones above the lowest note where the third register starts (from memory)."""


@dataclass(frozen=True, slots=True)
class InstrumentProfile:
    """An instrument's compass, register split and display transposition.

    Attributes
    ----------
    name : str
        Identifier used on the command line (``alto``, ``wren-alto``).
    title : str
        Human-readable name.
    lowest_midi, highest_midi : int, MIDI
        Compass, sounding pitch, both included.
    register_starts : tuple of int, MIDI
        First note of register 1, 2, 3 ...; rising; the first equals ``lowest_midi``.
    written_offset_semitones : int, semitones
        Sounding minus written pitch (12: sounds an octave above written).
    clef : "treble" | "bass"
        Clef the music is written in.
    missing : frozenset of int, MIDI
        Notes inside the compass the instrument does not have.
    source : str
        Where the profile came from (``built-in`` or a file path).
    """

    name: str
    title: str
    lowest_midi: int
    highest_midi: int
    register_starts: tuple[int, ...]
    written_offset_semitones: int = 0
    clef: str = "treble"
    missing: frozenset[int] = field(default_factory=frozenset)
    source: str = "built-in"

    @property
    def lowest_hz(self) -> float:
        """Equal-tempered frequency of the lowest note at A4 = 440 Hz, Hz."""
        return float(440.0 * 2.0 ** ((self.lowest_midi - 69) / 12))

    @property
    def register_count(self) -> int:
        """Number of registers the profile defines."""
        return len(self.register_starts)

    def notes(self) -> list[int]:
        """MIDI numbers of every note the instrument has, rising."""
        return [
            m for m in range(self.lowest_midi, self.highest_midi + 1) if m not in self.missing
        ]

    def has_note(self, midi: int) -> bool:
        """True when ``midi`` lies in the compass and is not missing."""
        return self.lowest_midi <= midi <= self.highest_midi and midi not in self.missing

    def register_of(self, midi: int) -> int:
        """Register (1, 2, 3 ...) a sounding note is played in on this instrument.

        Notes below the compass count as register 1, notes above it as the top register.

        Examples
        --------
        >>> alto = get_profile("alto")
        >>> alto.register_of(65), alto.register_of(80), alto.register_of(89)
        (1, 2, 3)
        """
        reg = 1
        for i, start in enumerate(self.register_starts):
            if midi >= start:
                reg = i + 1
        return reg

    def notes_in_register(self, register: int) -> list[int]:
        """MIDI numbers of the notes of one register (1-based), rising."""
        return [m for m in self.notes() if self.register_of(m) == register]

    def expected(self) -> list[tuple[int, int]]:
        """(midi, register) of every note of the compass, rising."""
        return [(m, self.register_of(m)) for m in self.notes()]

    def written_midi(self, sounding_midi: int) -> int:
        """Written note for a sounding note (display transposition)."""
        return sounding_midi - self.written_offset_semitones

    def written_name(self, sounding_midi: int, flats: bool = False) -> str:
        """Written note name for a sounding note.

        >>> get_profile("soprano").written_name(72)
        'C4'
        """
        return note_name(self.written_midi(sounding_midi), flats=flats)

    def describe(self) -> str:
        """One line: name, compass and registers."""
        regs = ", ".join(
            f"R{i + 1} from {note_name(s)}" for i, s in enumerate(self.register_starts)
        )
        written = (
            f"written {abs(self.written_offset_semitones)} semitones "
            f"{'below' if self.written_offset_semitones > 0 else 'above'} sounding"
            if self.written_offset_semitones
            else "written at pitch"
        )
        return (
            f"{self.name}: {self.title}, {note_name(self.lowest_midi)}-"
            f"{note_name(self.highest_midi)} ({regs}; {written}, {self.clef} clef)"
        )


def family_profile(
    name: str, title: str, lowest: str, written_offset_semitones: int, clef: str
) -> InstrumentProfile:
    """A recorder-family profile: compass of two octaves and a tone, the usual register split."""
    low = parse_note(lowest)
    return InstrumentProfile(
        name=name,
        title=title,
        lowest_midi=low,
        highest_midi=low + COMPASS_SEMITONES,
        register_starts=(low, low + SECOND_REGISTER_FROM, low + THIRD_REGISTER_FROM),
        written_offset_semitones=written_offset_semitones,
        clef=clef,
    )


FAMILY: dict[str, InstrumentProfile] = {
    p.name: p
    for p in (
        # lowest notes: REFERENCES §5 (common practice); transpositions: common practice,
        # from memory.
        family_profile("sopranino", "sopranino recorder in F", "F5", 12, "treble"),
        family_profile("soprano", "soprano recorder in C", "C5", 12, "treble"),
        family_profile("alto", "alto recorder in F", "F4", 0, "treble"),
        family_profile("tenor", "tenor recorder in C", "C4", 0, "treble"),
        family_profile("bass", "bass recorder in F", "F3", 12, "bass"),
        family_profile("great-bass", "great bass recorder in C", "C3", 0, "bass"),
        family_profile("contrabass", "contrabass recorder in F", "F2", 0, "bass"),
        family_profile("sub-great-bass", "sub-great-bass recorder in C", "C2", 0, "bass"),
    )
}
"""The built-in recorder family, smallest first."""


def profile_names() -> list[str]:
    """Names of the built-in profiles, smallest instrument first."""
    return list(FAMILY)


def get_profile(name_or_path: str | Path) -> InstrumentProfile:
    """A built-in profile by name, or a custom profile from a ``.toml`` file.

    Raises
    ------
    SettingsError
        Unknown name, or a file that is missing or invalid (one line naming file and line).

    Examples
    --------
    >>> get_profile("alto").describe()
    'alto: alto recorder in F, F4-G6 (R1 from F4, R2 from G#5, R3 from F6; written at pitch, treble clef)'
    """
    text = str(name_or_path)
    key = text.strip().lower().replace("_", "-").replace(" ", "-")
    if key in FAMILY:
        return FAMILY[key]
    if text.lower().endswith(".toml") or Path(text).exists():
        return load_profile_file(text)
    raise SettingsError(
        f"profile {text!r} is unknown; use one of {', '.join(FAMILY)} or a .toml file"
    )


def guess_profile(midis: list[int]) -> InstrumentProfile:
    """The family member that best fits the notes played.

    The one whose compass holds the most of ``midis``; among equals, the one whose lowest
    note is nearest the lowest note played. Alto when nothing was played.

    >>> guess_profile([72, 74, 76, 77, 79]).name
    'soprano'
    """
    if not midis:
        return FAMILY["alto"]
    low = min(midis)

    def score(p: InstrumentProfile) -> tuple[int, int]:
        inside = sum(1 for m in midis if p.lowest_midi <= m <= p.highest_midi)
        return (inside, -abs(p.lowest_midi - low))

    return max(FAMILY.values(), key=score)


# --- custom profile files ----------------------------------------------------------------

_KEYS = {
    "name": str,
    "title": str,
    "lowest": str,
    "highest": str,
    "registers": list,
    "written_offset_semitones": int,
    "clef": str,
    "missing": list,
}
_REQUIRED = ("name", "lowest", "highest")
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_-]*$")
_TOML_LINE_RE = re.compile(r"\(at line (\d+), column \d+\)")
_EXAMPLE = 'e.g. [instrument] name = "wren-alto", lowest = "F4", highest = "G6"'


def _line_of(text: str, key: str, section: str = "instrument") -> int:
    """Line number (1-based) where ``key`` is set in ``text``; the section line if not found."""
    key_re = re.compile(rf"^\s*{re.escape(key)}\s*=")
    section_line = 1
    for i, line in enumerate(text.splitlines(), start=1):
        if line.strip().startswith(f"[{section}]"):
            section_line = i
        if key_re.match(line):
            return i
    return section_line


def _top_line_of(text: str, key: str) -> int:
    """Line (1-based) of a ``[key]`` table header or a top-level ``key =``; 1 if not found."""
    key_re = re.compile(rf"^\s*(\[\s*{re.escape(key)}\s*\]|{re.escape(key)}\s*=)")
    for i, line in enumerate(text.splitlines(), start=1):
        if key_re.match(line):
            return i
    return 1


def parse_profile_text(text: str, where: str = "<profile>") -> InstrumentProfile:
    """Build a profile from TOML text (format: module docstring).

    Parameters
    ----------
    text : str
        TOML with one ``[instrument]`` table.
    where : str
        File name used in error messages.

    Raises
    ------
    SettingsError
        One line: ``<where>:<line>: <what is wrong>; <what to do>``.

    Examples
    --------
    >>> p = parse_profile_text('[instrument]\\nname = "kestrel"\\nlowest = "C5"\\nhighest = "D7"\\n')
    >>> p.register_starts == (72, 87, 96), p.written_offset_semitones
    (True, 0)
    """

    def fail(line: int, message: str) -> SettingsError:
        return SettingsError(f"{where}:{line}: {message}")

    text = text.removeprefix("\ufeff")  # a byte order mark is no part of the TOML
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = _TOML_LINE_RE.search(msg)
        line = int(m.group(1)) if m else 1
        reason = _TOML_LINE_RE.sub("", msg).strip()
        raise fail(line, f"not valid TOML ({reason}); write key = \"value\" lines") from None
    except ValueError:  # an integer past Python's digit limit
        raise fail(1, "not valid TOML (a number of thousands of digits); give a small whole number") from None
    except RecursionError:
        raise fail(1, "not valid TOML (brackets nested thousands deep); check the brackets") from None
    extra = [k for k in data if k != "instrument"]
    if extra:
        raise fail(
            _top_line_of(text, extra[0]),
            f"unexpected {extra[0]!r} outside [instrument]; put every key under [instrument]",
        )
    table = data.get("instrument")
    if not isinstance(table, dict):
        raise fail(1, f"no [instrument] table; start the file with [instrument], {_EXAMPLE}")
    for key, value in table.items():
        if key not in _KEYS:
            raise fail(
                _line_of(text, key),
                f"unknown key {key!r}; use one of {', '.join(_KEYS)}",
            )
        want = _KEYS[key]
        if not isinstance(value, want) or (want is int and isinstance(value, bool)):
            raise fail(
                _line_of(text, key),
                f"{key} = {value!r} should be {'a whole number' if want is int else 'a list' if want is list else 'a string in quotes'}",
            )
    for key in _REQUIRED:
        if key not in table:
            raise fail(_top_line_of(text, "instrument"),
                       f"{key} is missing; add it under [instrument], {_EXAMPLE}")

    def note(key: str, value: object) -> int:
        try:
            return parse_note(str(value))
        except SettingsError:
            raise fail(
                _line_of(text, key), f"{key} {value!r} is not a note; write e.g. \"F4\" or \"C#5\""
            ) from None

    name = table["name"]
    if not _NAME_RE.match(name):
        raise fail(_line_of(text, "name"), f"name {name!r} must be letters, digits, - or _, e.g. \"wren-alto\"")
    low = note("lowest", table["lowest"])
    high = note("highest", table["highest"])
    if high <= low:
        raise fail(
            _line_of(text, "highest"),
            f"highest {table['highest']!r} is not above lowest {table['lowest']!r}; give the top note of the compass",
        )
    if "registers" in table:
        starts = tuple(note("registers", v) for v in table["registers"])
        if not starts or starts[0] != low:
            raise fail(
                _line_of(text, "registers"),
                f"registers must start with the lowest note {table['lowest']!r}; list the first note of each register",
            )
        if any(b <= a for a, b in itertools.pairwise(starts)) or starts[-1] > high:
            raise fail(
                _line_of(text, "registers"),
                "registers must rise and stay inside lowest..highest; list the first note of each register",
            )
    else:
        starts = tuple(
            s for s in (low, low + SECOND_REGISTER_FROM, low + THIRD_REGISTER_FROM) if s <= high
        )
    offset = table.get("written_offset_semitones", 0)
    if abs(offset) > 24:
        raise fail(_line_of(text, "written_offset_semitones"),
                   f"written_offset_semitones {offset} is out of range; use -24..24 (12 = an octave)")
    clef = table.get("clef", "treble")
    if clef not in ("treble", "bass"):
        raise fail(_line_of(text, "clef"), f"clef {clef!r} is unknown; use \"treble\" or \"bass\"")
    missing = frozenset(note("missing", v) for v in table.get("missing", []))
    outside = [note_name(m) for m in sorted(missing) if not low <= m <= high]
    if outside:
        raise fail(_line_of(text, "missing"),
                   f"missing note {outside[0]} lies outside the compass; list notes between lowest and highest")
    return InstrumentProfile(
        name=name,
        title=printable(str(table.get("title", name))),  # escape codes from a file shown as text
        lowest_midi=low,
        highest_midi=high,
        register_starts=starts,
        written_offset_semitones=offset,
        clef=clef,
        missing=missing,
        source=where,
    )


def load_profile_file(path: str | Path) -> InstrumentProfile:
    """Read a custom profile from a TOML file (format: module docstring).

    Raises
    ------
    SettingsError
        Missing or unreadable file, or invalid content (``file:line: problem; fix``).
    """
    from bench.safeio import FileRefused, read_text_file

    path = Path(path)
    try:
        text = read_text_file(path, limit_bytes=PROFILE_LIMIT_BYTES)
    except FileRefused as exc:
        if exc.missing:
            raise SettingsError(
                f"{clip(str(path))}: no such profile file; give a .toml file or one of {', '.join(FAMILY)}"
            ) from None
        raise SettingsError(f"{clip(str(path))}: cannot read the profile ({exc.reason}); give a UTF-8 .toml file") from None
    return parse_profile_text(text, where=str(path))
