"""Temperaments, each computed from its definition in exact prime-power arithmetic.

A fifth-based temperament is a chain of eleven fifths; each fifth is pure (3/2) or narrowed by
a stated fraction of a comma. Every pitch is then an exact product 2^a 3^b 5^c with rational
exponents (:class:`Monzo`), so properties such as "the quarter-comma third C-E is exactly 5/4"
hold exactly, and cents are evaluated only at the end. Just intonation is defined by its
ratios.

Offsets are deviations from equal temperament in cents on the tonic C, with C = 0. They move to
another tonic by transposition (:func:`offsets_on`); the pitch standard then fixes A4
(:func:`offsets_from_a`).
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from dataclasses import dataclass
from fractions import Fraction

from bench.errors import SettingsError

__all__ = [
    "FIFTH",
    "PYTHAGOREAN_COMMA",
    "SCHISMA",
    "SYNTONIC_COMMA",
    "TEMPERAMENT_ALIASES",
    "TEMPERAMENT_IDS",
    "FifthsDefinition",
    "Monzo",
    "RatioDefinition",
    "Temperament",
    "canonical_temperament_id",
    "definition_of",
    "exact_pitches",
    "get_temperament",
    "offsets_from_a",
    "offsets_on",
    "temperament_fifths",
]

_LOG2_3 = math.log2(3.0)
_LOG2_5 = math.log2(5.0)

Rational = Fraction | int


@dataclass(frozen=True, slots=True)
class Monzo:
    """An exact frequency ratio 2^e2 · 3^e3 · 5^e5 with rational exponents.

    Examples
    --------
    >>> third = (FIFTH / SYNTONIC_COMMA ** Fraction(1, 4)) ** 4 / Monzo(2)
    >>> third == Monzo.from_ratio(Fraction(5, 4))
    True
    """

    e2: Fraction = Fraction(0)
    e3: Fraction = Fraction(0)
    e5: Fraction = Fraction(0)

    def __init__(self, e2: Rational = 0, e3: Rational = 0, e5: Rational = 0) -> None:
        object.__setattr__(self, "e2", Fraction(e2))
        object.__setattr__(self, "e3", Fraction(e3))
        object.__setattr__(self, "e5", Fraction(e5))

    @classmethod
    def from_ratio(cls, ratio: Fraction | int) -> Monzo:
        """Factor a positive rational whose primes are 2, 3 and 5."""
        r = Fraction(ratio)
        if r <= 0:
            raise ValueError(f"ratio {r} must be positive")
        exps = []
        num, den = r.numerator, r.denominator
        for p in (2, 3, 5):
            e = 0
            while num % p == 0:
                num //= p
                e += 1
            while den % p == 0:
                den //= p
                e -= 1
            exps.append(e)
        if num != 1 or den != 1:
            raise ValueError(f"ratio {r} has a prime factor above 5")
        return cls(*exps)

    def __mul__(self, other: Monzo) -> Monzo:
        return Monzo(self.e2 + other.e2, self.e3 + other.e3, self.e5 + other.e5)

    def __truediv__(self, other: Monzo) -> Monzo:
        return Monzo(self.e2 - other.e2, self.e3 - other.e3, self.e5 - other.e5)

    def __pow__(self, exponent: Rational) -> Monzo:
        k = Fraction(exponent)
        return Monzo(self.e2 * k, self.e3 * k, self.e5 * k)

    @property
    def cents(self) -> float:
        """Size in cents (float, evaluated from the exact exponents)."""
        return 1200.0 * (float(self.e2) + float(self.e3) * _LOG2_3 + float(self.e5) * _LOG2_5)

    def ratio(self) -> Fraction | None:
        """The ratio as a Fraction when all exponents are integers, else None."""
        if any(e.denominator != 1 for e in (self.e2, self.e3, self.e5)):
            return None
        return Fraction(2) ** int(self.e2) * Fraction(3) ** int(self.e3) * Fraction(5) ** int(self.e5)

    def octave_reduced(self) -> Monzo:
        """The same pitch class moved by whole octaves into [1, 2)."""
        return self * Monzo(-math.floor(self.cents / 1200.0 + 1e-12))


FIFTH = Monzo(-1, 1)  # 3/2
PYTHAGOREAN_COMMA = Monzo(-19, 12)  # 531441/524288, 23.46 cents
SYNTONIC_COMMA = Monzo(-4, 4, -1)  # 81/80, 21.51 cents
SCHISMA = Monzo(-15, 8, 1)  # 32805/32768 = PC/SC, 1.95 cents

_COMMAS = {"PC": PYTHAGOREAN_COMMA, "SC": SYNTONIC_COMMA, "schisma": SCHISMA}


@dataclass(frozen=True, slots=True)
class FifthsDefinition:
    """A temperament as a chain of eleven fifths upward from ``chain_start``.

    Attributes
    ----------
    chain_start : int, 0..11
        Pitch class of the lowest note of the chain (E♭ = 3 for a meantone, C for the
        circulating ones); the twelfth fifth, from the top of the chain back to
        ``chain_start``, is whatever the octaves leave.
    narrowed : tuple of (pc, comma, fraction)
        Fifths narrowed from 3/2: pitch class of the fifth's lower note, the comma's name
        ("PC", "SC" or "schisma") and the fraction of it taken off. All others are pure.
    """

    chain_start: int
    narrowed: tuple[tuple[int, str, Fraction], ...]

    def fifth_from(self, pc: int) -> Monzo:
        """Defined size of the fifth whose lower note is ``pc``."""
        for low, comma, fraction in self.narrowed:
            if low == pc % 12:
                return FIFTH / _COMMAS[comma] ** fraction
        return FIFTH


@dataclass(frozen=True, slots=True)
class RatioDefinition:
    """A temperament (here: a just intonation) given by twelve ratios above C."""

    ratios: tuple[Fraction, ...]


@dataclass(frozen=True, slots=True)
class Temperament:
    """A twelve-note tuning, as deviations from equal temperament.

    Attributes
    ----------
    id : str
        Identifier (lower case); the value written to the log's ``temperament`` column.
    name : str
        Name for people.
    description : str
        One sentence: how it is built.
    offsets_cents : tuple of 12 float, cents
        Deviation of C, C♯ … B from equal temperament on the tonic C, with C = 0.
    aliases : tuple of str
        Other identifiers accepted for it.
    source : str or None
        File a custom temperament was read from; None for the built-in ones.
    """

    id: str
    name: str
    description: str
    offsets_cents: tuple[float, ...]
    aliases: tuple[str, ...] = ()
    source: str | None = None

    def __post_init__(self) -> None:
        if len(self.offsets_cents) != 12:
            raise ValueError(f"temperament {self.id!r} needs 12 offsets, got {len(self.offsets_cents)}")
        object.__setattr__(self, "offsets_cents", tuple(float(x) for x in self.offsets_cents))


def _pcs(names: str) -> tuple[int, ...]:
    """Pitch classes of space-separated sharp names ("C G D")."""
    sharp = ("C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B")
    flat = {"Db": 1, "Eb": 3, "Gb": 6, "Ab": 8, "Bb": 10}
    return tuple(flat[n] if n in flat else sharp.index(n) for n in names.split())


def _narrow(lows: str, comma: str, fraction: Fraction) -> tuple[tuple[int, str, Fraction], ...]:
    return tuple((pc, comma, fraction) for pc in _pcs(lows))


_EB = 3
_ALL_LOWS = "C G D A E B F# C# G# Eb Bb F"
_CHAIN_EB_TO_GS = "Eb Bb F C G D A E B F# C#"  # lower notes of the eleven fifths Eb ... G#

# id -> (name, description, definition, aliases). Definitions after REFERENCES.md §2.
_BUILT_IN: dict[str, tuple[str, str, FifthsDefinition | RatioDefinition, tuple[str, ...]]] = {
    "equal": (
        "Equal temperament",
        "Twelve equal semitones: every fifth narrowed by 1/12 Pythagorean comma.",
        FifthsDefinition(0, _narrow(_ALL_LOWS, "PC", Fraction(1, 12))),
        ("12tet", "12-tet", "et", "12edo", "equal-temperament"),
    ),
    "pythagorean": (
        "Pythagorean",
        "Pure fifths from Eb to G#; the fifth G#-Eb takes the whole Pythagorean comma.",
        FifthsDefinition(_EB, ()),
        ("pyth",),
    ),
    "meantone4": (
        "Quarter-comma meantone",
        (
            "Fifths Eb to G# each narrowed by 1/4 syntonic comma, giving pure major thirds; "
            "G#-Eb is the wolf."
        ),
        FifthsDefinition(_EB, _narrow(_CHAIN_EB_TO_GS, "SC", Fraction(1, 4))),
        ("quarter-comma", "1/4-comma", "meantone"),
    ),
    "meantone5": (
        "Fifth-comma meantone",
        "Fifths Eb to G# each narrowed by 1/5 syntonic comma; G#-Eb is the wolf.",
        FifthsDefinition(_EB, _narrow(_CHAIN_EB_TO_GS, "SC", Fraction(1, 5))),
        ("fifth-comma", "1/5-comma"),
    ),
    "meantone6": (
        "Sixth-comma meantone",
        "Fifths Eb to G# each narrowed by 1/6 syntonic comma; G#-Eb is the wolf.",
        FifthsDefinition(_EB, _narrow(_CHAIN_EB_TO_GS, "SC", Fraction(1, 6))),
        ("sixth-comma", "1/6-comma"),
    ),
    "werckmeister3": (
        "Werckmeister III",
        "C-G, G-D, D-A and B-F# narrowed by 1/4 Pythagorean comma; all other fifths pure.",
        FifthsDefinition(0, _narrow("C G D B", "PC", Fraction(1, 4))),
        ("wm3", "werckmeister", "werckmeister-iii"),
    ),
    "kirnberger3": (
        "Kirnberger III",
        (
            "C-G, G-D, D-A and A-E narrowed by 1/4 syntonic comma, F#-C# by the schisma; "
            "all other fifths pure."
        ),
        FifthsDefinition(
            0,
            _narrow("C G D A", "SC", Fraction(1, 4)) + _narrow("F#", "schisma", Fraction(1)),
        ),
        ("km3", "kirnberger", "kirnberger-iii"),
    ),
    "vallotti": (
        "Vallotti",
        "The six fifths F-C to E-B narrowed by 1/6 Pythagorean comma; all other fifths pure.",
        FifthsDefinition(0, _narrow("F C G D A E", "PC", Fraction(1, 6))),
        (),
    ),
    "young": (
        "Young II",
        (
            "The six fifths C-G to B-F# narrowed by 1/6 Pythagorean comma (Thomas Young, 1799); "
            "all other fifths pure."
        ),
        FifthsDefinition(0, _narrow("C G D A E B", "PC", Fraction(1, 6))),
        ("young-ii",),
    ),
    "kellner": (
        "Kellner",
        "C-G, G-D, D-A, A-E and B-F# narrowed by 1/5 Pythagorean comma; all other fifths pure.",
        FifthsDefinition(0, _narrow("C G D A B", "PC", Fraction(1, 5))),
        (),
    ),
    "just": (
        "5-limit just intonation",
        (
            "Ratios 1, 16/15, 9/8, 6/5, 5/4, 4/3, 45/32, 3/2, 8/5, 5/3, 9/5, 15/8 on the tonic; "
            "pure near the tonic, rough in remote keys."
        ),
        RatioDefinition(
            tuple(
                Fraction(r)
                for r in ["1", "16/15", "9/8", "6/5", "5/4", "4/3", "45/32", "3/2", "8/5", "5/3", "9/5", "15/8"]
            )
        ),
        ("ji", "5-limit", "just-intonation"),
    ),
}

TEMPERAMENT_IDS: tuple[str, ...] = tuple(_BUILT_IN)

TEMPERAMENT_ALIASES: dict[str, str] = {
    alias: tid for tid, (_, _, _, aliases) in _BUILT_IN.items() for alias in aliases
}


def _key(text: str) -> str:
    return re.sub(r"[\s_]+", "-", text.strip().lower())


def canonical_temperament_id(text: str) -> str:
    """Resolve a built-in temperament identifier or alias (any case) to its identifier.

    Raises
    ------
    SettingsError
        If ``text`` names no built-in temperament.

    Examples
    --------
    >>> canonical_temperament_id("WM3"), canonical_temperament_id("12tet")
    ('werckmeister3', 'equal')
    """
    key = _key(text)
    if key in _BUILT_IN:
        return key
    if key in TEMPERAMENT_ALIASES:
        return TEMPERAMENT_ALIASES[key]
    raise SettingsError(
        f"temperament {text!r} is unknown; use one of {', '.join(TEMPERAMENT_IDS)} "
        "or a .toml file"
    )


def definition_of(temperament_id: str) -> FifthsDefinition | RatioDefinition:
    """The definition a built-in temperament is computed from."""
    return _BUILT_IN[canonical_temperament_id(temperament_id)][2]


def _chain_pitches(definition: FifthsDefinition) -> list[Monzo]:
    """Exact pitch of every pitch class relative to the start of the chain (not reduced)."""
    pitches: dict[int, Monzo] = {definition.chain_start: Monzo()}
    pc = definition.chain_start
    for _ in range(11):
        pitches[(pc + 7) % 12] = pitches[pc] * definition.fifth_from(pc)
        pc = (pc + 7) % 12
    return [pitches[p] for p in range(12)]


def exact_pitches(temperament_id: str) -> tuple[Monzo, ...]:
    """Exact ratios above C of C, C♯ … B of a built-in temperament, each in [1, 2).

    Examples
    --------
    >>> exact_pitches("meantone4")[4].ratio()
    Fraction(5, 4)
    >>> exact_pitches("kirnberger3")[1].ratio()
    Fraction(256, 243)
    """
    definition = definition_of(temperament_id)
    if isinstance(definition, RatioDefinition):
        return tuple(Monzo.from_ratio(r) for r in definition.ratios)
    chain = _chain_pitches(definition)
    return tuple((p / chain[0]).octave_reduced() for p in chain)


def temperament_fifths(pitches: Sequence[Monzo]) -> tuple[Monzo, ...]:
    """The twelve fifths p -> p+7 (p = C, C♯ … B) that a set of exact pitches makes."""
    out = []
    for p in range(12):
        upper = pitches[(p + 7) % 12] * (Monzo(1) if p + 7 >= 12 else Monzo())
        out.append(upper / pitches[p])
    return tuple(out)


def _offsets_from_pitches(pitches: Sequence[Monzo]) -> tuple[float, ...]:
    return tuple(pitches[p].cents - 100.0 * p for p in range(12))


def _build(temperament_id: str) -> Temperament:
    name, description, _, aliases = _BUILT_IN[temperament_id]
    offsets = _offsets_from_pitches(exact_pitches(temperament_id))
    return Temperament(temperament_id, name, description, offsets, aliases)


_TEMPERAMENTS: dict[str, Temperament] = {tid: _build(tid) for tid in TEMPERAMENT_IDS}


def get_temperament(temperament_id: str) -> Temperament:
    """A built-in temperament by identifier or alias (case-insensitive).

    Parameters
    ----------
    temperament_id : str
        One of :data:`TEMPERAMENT_IDS` or an alias from :data:`TEMPERAMENT_ALIASES`.

    Returns
    -------
    Temperament

    Raises
    ------
    SettingsError
        If the identifier is unknown.

    Examples
    --------
    >>> round(get_temperament("Werckmeister3").offsets_cents[1], 2)
    -9.78
    """
    return _TEMPERAMENTS[canonical_temperament_id(temperament_id)]


def offsets_on(temperament: Temperament, tonic_pc: int) -> tuple[float, ...]:
    """The temperament's offsets transposed to another tonic.

    Parameters
    ----------
    temperament : Temperament
    tonic_pc : int, 0..11
        Pitch class of the tonic (C = 0).

    Returns
    -------
    tuple of 12 float, cents
        Deviation from equal temperament of C, C♯ … B, with the tonic at 0:
        ``dev_t[p] = dev_C[(p - t) mod 12]``.

    Examples
    --------
    >>> [round(x, 2) for x in offsets_on(get_temperament("werckmeister3"), 7)][:3]
    [-1.96, -11.73, -3.91]
    """
    t = tonic_pc % 12
    dev = temperament.offsets_cents
    return tuple(dev[(p - t) % 12] for p in range(12))


def offsets_from_a(offsets_cents: Sequence[float]) -> tuple[float, ...]:
    """Shift twelve offsets so that A is 0, i.e. so that A4 sounds at the pitch standard.

    Examples
    --------
    >>> [round(x, 2) for x in offsets_from_a(get_temperament("kellner").offsets_cents)][:3]
    [8.21, -1.56, 2.74]
    """
    a = offsets_cents[9]
    return tuple(x - a for x in offsets_cents)
