"""Temperaments against the published table, exact arithmetic and pytuning.

Oracle values: /work/shared/REFERENCES.md §2 (the table there agrees with the Tonalsoft
Encyclopedia for Werckmeister III, Kirnberger's letter to Forkel for Kirnberger III, Duffin's
1/6-comma chart, Kellner's A = 0 table and the music21 scale archive).
"""

from __future__ import annotations

import math
from fractions import Fraction

import pytest
import sympy as sp
from pytuning.scales import (
    create_equal_interval_scale,
    create_pythagorean_scale,
    create_quarter_comma_meantone_scale,
)

from bench.errors import SettingsError
from bench.tuning import TEMPERAMENT_IDS, get_temperament, offsets_from_a, offsets_on
from bench.tuning.temperaments import (
    FIFTH,
    PYTHAGOREAN_COMMA,
    SCHISMA,
    SYNTONIC_COMMA,
    FifthsDefinition,
    Monzo,
    canonical_temperament_id,
    definition_of,
    exact_pitches,
    temperament_fifths,
)

# REFERENCES.md §2, deviation from 12-TET in cents on tonic C, C = 0 (published values,
# rounded to 0.01 cent; sources listed in the module docstring).
PUBLISHED = {
    "equal": [0.0] * 12,
    "pythagorean": [0, 13.69, 3.91, -5.87, 7.82, -1.96, 11.73, 1.96, 15.64, 5.87, -3.91, 9.78],
    "meantone4": [0, -23.95, -6.84, 10.26, -13.69, 3.42, -20.53, -3.42, -27.37, -10.26, 6.84, -17.11],
    "meantone5": [0, -16.42, -4.69, 7.04, -9.39, 2.35, -14.08, -2.35, -18.77, -7.04, 4.69, -11.73],
    "meantone6": [0, -11.41, -3.26, 4.89, -6.52, 1.63, -9.78, -1.63, -13.04, -4.89, 3.26, -8.15],
    "werckmeister3": [0, -9.78, -7.82, -5.87, -9.78, -1.96, -11.73, -3.91, -7.82, -11.73, -3.91, -7.82],
    "kirnberger3": [0, -9.78, -6.84, -5.87, -13.69, -1.96, -9.78, -3.42, -7.82, -10.26, -3.91, -11.73],
    "vallotti": [0, -5.87, -3.91, -1.96, -7.82, 1.96, -7.82, -1.96, -3.91, -5.87, 0.00, -9.78],
    "young": [0, -9.78, -3.91, -5.87, -7.82, -1.96, -11.73, -1.96, -7.82, -5.87, -3.91, -9.78],
    "kellner": [0, -9.78, -5.47, -5.87, -10.95, -1.96, -11.73, -2.74, -7.82, -8.21, -3.91, -8.99],
    "just": [0, 11.73, 3.91, 15.64, -13.69, -1.96, -9.78, 1.96, 13.69, -15.64, 17.60, -11.73],
}
# Values are printed to 0.01 cent, so a correct computation is within half a unit of them.
ROUNDING_TOL_CENTS = 0.005 + 1e-9

CIRCULATING = ("equal", "werckmeister3", "kirnberger3", "vallotti", "young", "kellner")
WOLF_CHAINS = ("pythagorean", "meantone4", "meantone5", "meantone6")


def test_every_identifier_has_a_published_row() -> None:
    assert set(TEMPERAMENT_IDS) == set(PUBLISHED)


@pytest.mark.parametrize("tid", sorted(PUBLISHED))
def test_offsets_match_published_table(tid: str) -> None:
    # REFERENCES.md §2 table, <= 0.01 cent (here: within the table's rounding, 0.005 cent).
    got = get_temperament(tid).offsets_cents
    assert len(got) == 12
    for pc, (g, want) in enumerate(zip(got, PUBLISHED[tid])):
        assert abs(g - want) <= ROUNDING_TOL_CENTS, (tid, pc, g, want)


@pytest.mark.parametrize(
    ("comma", "cents"),
    # REFERENCES.md §2: PC 23.4600 c, SC 21.5063 c, schisma 1.9537 c.
    [(PYTHAGOREAN_COMMA, 23.4600), (SYNTONIC_COMMA, 21.5063), (SCHISMA, 1.9537)],
)
def test_comma_sizes(comma: Monzo, cents: float) -> None:
    assert comma.cents == pytest.approx(cents, abs=5e-5)


def test_commas_are_the_published_ratios() -> None:
    # REFERENCES.md §2: PC = 531441/524288, SC = 81/80, schisma = PC/SC = 32805/32768 (exact).
    assert PYTHAGOREAN_COMMA.ratio() == Fraction(531441, 524288)
    assert SYNTONIC_COMMA.ratio() == Fraction(81, 80)
    assert SCHISMA == PYTHAGOREAN_COMMA / SYNTONIC_COMMA
    assert SCHISMA.ratio() == Fraction(32805, 32768)


@pytest.mark.parametrize(
    ("tid", "pc", "ratio"),
    [
        # REFERENCES.md §2 exact checks.
        ("meantone4", 4, Fraction(5, 4)),  # 1/4-comma C-E pure third
        ("meantone5", 11, Fraction(15, 8)),  # 1/5-comma C-B pure major seventh
        ("meantone6", 6, Fraction(45, 32)),  # 1/6-comma C-F# pure augmented fourth
        ("kirnberger3", 4, Fraction(5, 4)),
        ("kirnberger3", 6, Fraction(45, 32)),
        ("kirnberger3", 11, Fraction(15, 8)),
        ("kirnberger3", 1, Fraction(256, 243)),
        # Pythagorean: pure fifths, so 3-limit ratios (definition).
        ("pythagorean", 8, Fraction(6561, 4096)),
        ("pythagorean", 3, Fraction(32, 27)),
    ],
)
def test_exact_ratios(tid: str, pc: int, ratio: Fraction) -> None:
    assert exact_pitches(tid)[pc].ratio() == ratio


def test_equal_temperament_is_exactly_twelfth_roots_of_two() -> None:
    # Definition of 12-TET (REFERENCES.md §1): pitch class p is 2^(p/12), exactly.
    for p, pitch in enumerate(exact_pitches("equal")):
        assert pitch == Monzo(Fraction(p, 12)), p


@pytest.mark.parametrize("tid", CIRCULATING)
def test_circulating_temperaments_close_on_seven_octaves(tid: str) -> None:
    # REFERENCES.md §2: circulating ones close to exactly 7 octaves: the twelve *defined*
    # fifths (the eleven of the chain and the closing one) multiply to 2^7 exactly, and the
    # fifths the computed pitches make are exactly those.
    definition = definition_of(tid)
    assert isinstance(definition, FifthsDefinition)
    defined = [definition.fifth_from(p) for p in range(12)]
    product = Monzo()
    for fifth in defined:
        product = product * fifth
    assert product == Monzo(7)
    assert list(temperament_fifths(exact_pitches(tid))) == defined


@pytest.mark.parametrize("tid", WOLF_CHAINS)
def test_wolf_chains_have_one_odd_fifth_g_sharp_to_e_flat(tid: str) -> None:
    # REFERENCES.md §2: chain Eb ... G#, wolf G#-Eb; the wolf takes what the others leave.
    definition = definition_of(tid)
    assert isinstance(definition, FifthsDefinition)
    fifths = temperament_fifths(exact_pitches(tid))
    for p in range(12):
        if p != 8:  # G#
            assert fifths[p] == definition.fifth_from(p), p
    narrowed = FIFTH / fifths[0]  # the chain's tempered fifth, e.g. SC^(1/4)
    assert fifths[8] == FIFTH / PYTHAGOREAN_COMMA * narrowed**11


@pytest.mark.parametrize(
    ("tid", "fifth_cents"),
    # REFERENCES.md §2, "Tempered fifth" column.
    [
        ("meantone4", 696.578),
        ("meantone5", 697.654),
        ("meantone6", 698.371),
        ("werckmeister3", 696.090),
        ("vallotti", 698.045),
        ("young", 698.045),
        ("kellner", 697.263),
    ],
)
def test_tempered_fifth_size(tid: str, fifth_cents: float) -> None:
    fifths = temperament_fifths(exact_pitches(tid))
    assert fifths[0].cents == pytest.approx(fifth_cents, abs=0.0005)  # C-G is tempered in all


def test_kirnberger_f_sharp_c_sharp_is_narrowed_by_the_schisma() -> None:
    # REFERENCES.md §2: F#-C# by schisma, 700.001 c.
    fifth = temperament_fifths(exact_pitches("kirnberger3"))[6]
    assert fifth == FIFTH / SCHISMA
    assert fifth.cents == pytest.approx(700.001, abs=0.0005)


def test_young_is_vallotti_one_fifth_higher() -> None:
    # REFERENCES.md §2 (exact): Young II = Vallotti moved up a fifth.
    v = exact_pitches("vallotti")
    y = exact_pitches("young")
    for p in range(12):
        moved = (v[(p - 7) % 12] / v[5]).octave_reduced()  # F of Vallotti becomes Young's C
        assert moved == y[p], p


def _pytuning_cents(scale: list[sp.Expr]) -> list[float]:
    return [1200.0 * math.log2(float(sp.N(x, 30))) for x in scale[:12]]


@pytest.mark.parametrize(
    ("tid", "scale"),
    [
        # pytuning 0.7.3 (PyPI) as an outside reference; 3 fifths down from C = chain Eb ... G#.
        ("pythagorean", lambda: create_pythagorean_scale(number_down_fifths=3)),
        ("meantone4", lambda: create_quarter_comma_meantone_scale(number_down_fifths=3)),
        (
            "meantone5",
            lambda: create_equal_interval_scale(
                sp.Rational(3, 2) / sp.Rational(81, 80) ** sp.Rational(1, 5), number_down_intervals=3
            ),
        ),
        (
            "meantone6",
            lambda: create_equal_interval_scale(
                sp.Rational(3, 2) / sp.Rational(81, 80) ** sp.Rational(1, 6), number_down_intervals=3
            ),
        ),
    ],
)
def test_against_pytuning(tid: str, scale: object) -> None:
    ref = _pytuning_cents(scale())  # type: ignore[operator]
    ours = [pitch.cents for pitch in exact_pitches(tid)]
    # REFERENCES.md §2 reports agreement to 1e-13 c; allow float rounding of 1e-9 c.
    assert ours == pytest.approx(ref, abs=1e-9)


def test_transposition_werckmeister_on_g() -> None:
    # REFERENCES.md §2: Werckmeister III on G, C ... B.
    want = [-1.96, -11.73, -3.91, -7.82, -11.73, -3.91, -7.82, 0, -9.78, -7.82, -5.87, -9.78]
    got = offsets_on(get_temperament("werckmeister3"), 7)
    assert got == pytest.approx(want, abs=ROUNDING_TOL_CENTS)


def test_transposition_rule() -> None:
    # REFERENCES.md §2: dev_t[p] = dev_C[(p - t) mod 12]; the tonic is always 0.
    for tid in TEMPERAMENT_IDS:
        base = get_temperament(tid).offsets_cents
        for t in range(12):
            row = offsets_on(get_temperament(tid), t)
            assert row[t] == 0.0
            assert all(row[p] == base[(p - t) % 12] for p in range(12))


def test_a_normalisation_kellner() -> None:
    # REFERENCES.md §2: Kellner with A = 0 (the tuner's targets at the pitch standard).
    want = [8.21, -1.56, 2.74, 2.35, -2.74, 6.26, -3.52, 5.47, 0.39, 0, 4.30, -0.78]
    got = offsets_from_a(get_temperament("kellner").offsets_cents)
    assert got == pytest.approx(want, abs=ROUNDING_TOL_CENTS)
    # Kellner's own printed A = 0 table, quoted in REFERENCES.md §2 (his beat-rate construction
    # differs from 1/5 PC by up to 0.09 c; printed to 0.1 c).
    printed = [8.2, -1.6, 2.8, 2.3, -2.7, 6.2, -3.5, 5.5, 0.4, 0, 4.3, -0.7]
    assert got == pytest.approx(printed, abs=0.1)


@pytest.mark.parametrize(
    ("alias", "tid"),
    [("12TET", "equal"), ("et", "equal"), ("Quarter-Comma", "meantone4"), ("WM3", "werckmeister3"),
     ("Kirnberger", "kirnberger3"), ("ji", "just"), ("VALLOTTI", "vallotti"), ("young_ii", "young")],
)
def test_aliases_and_case(alias: str, tid: str) -> None:
    assert canonical_temperament_id(alias) == tid
    assert get_temperament(alias).id == tid


def test_unknown_temperament_message() -> None:
    with pytest.raises(SettingsError, match=r"temperament 'wm4' is unknown; use one of equal, .*kellner, just or a \.toml file"):
        get_temperament("wm4")


def test_monzo_from_ratio_rejects_seven_limit() -> None:
    with pytest.raises(ValueError, match="prime factor above 5"):
        Monzo.from_ratio(Fraction(7, 4))
