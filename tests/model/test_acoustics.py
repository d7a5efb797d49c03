"""The acoustic elements and the whole-instrument resonances against published limits.

Each check names its outside source. Lossless variants of the same matrices are used where the
published result is a lossless one.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy.optimize import brentq

from bench.model.acoustics import (
    air_at,
    cone_matrix,
    cylinder_matrix,
    hole_lengths,
    hole_shunt_impedance,
    load_closed,
    radiation_impedance,
    tee_matrix,
)
from bench.model.geometry import parse_geometry_text
from bench.model.instrument import ModelOptions, playing_frequencies

AIR = air_at(20.0, 50.0)
LOSSLESS_IDEAL = ModelOptions(losses=False, radiation="ideal")


def _tube(points: str, extra: str = "") -> str:
    return f'[instrument]\nname = "t"\n[bore]\npoints_mm = {points}\n[top]\nkind = "open"\n{extra}'


def _cents(a: float, b: float) -> float:
    return 1200.0 * math.log2(a / b)


def test_open_open_cylinder_lossless_half_wave_series():
    # Fletcher & Rossing, The Physics of Musical Instruments (1998), ch. 8: an ideal pipe open
    # at both ends resonates at f = n c / 2L.
    g = parse_geometry_text(_tube("[[0, 14.0], [600, 14.0]]"))
    res = playing_frequencies(g, [""], AIR, registers=4, options=LOSSLESS_IDEAL)
    for n in range(1, 5):
        expected = n * AIR.speed_m_s / (2 * 0.6)
        assert abs(_cents(res.freq_hz[0, n - 1], expected)) < 0.01


def test_open_open_cone_lossless_has_the_cylinder_series():
    # Fletcher & Rossing (1998), ch. 8: a truncated cone open at both ends has the same
    # resonances as a cylinder of its length, f = n c / 2L (spherical waves).
    g = parse_geometry_text(_tube("[[0, 20.0], [500, 10.0]]"))
    res = playing_frequencies(g, [""], AIR, registers=3, options=LOSSLESS_IDEAL)
    for n in range(1, 4):
        assert abs(_cents(res.freq_hz[0, n - 1], n * AIR.speed_m_s / (2 * 0.5))) < 0.01


@pytest.mark.parametrize("n", [1, 2, 3, 4])
def test_closed_open_cylinder_lossless_odd_quarter_waves(n):
    # Fletcher & Rossing (1998), ch. 8: closed at one end, open at the other,
    # f = (2n - 1) c / 4L. Impedance seen from the open end with the far end closed is
    # A / C, whose zeros are those resonances.
    length = 0.4
    expected = (2 * n - 1) * AIR.speed_m_s / (4 * length)

    def im_z(f: float) -> float:
        return float(load_closed(cylinder_matrix([f], length, 0.007, AIR, losses=False))[0].imag)

    found = brentq(im_z, expected * 0.97, expected * 1.03, xtol=1e-9)
    assert abs(_cents(found, expected)) < 0.01


@pytest.mark.parametrize("n", [1, 2, 3])
def test_cone_closed_at_narrow_end_tan_kl_equals_minus_k_x1(n):
    # Fletcher & Rossing (1998), ch. 8 (also Chaigne & Kergomard 2016, ch. 7): a cone closed
    # at its narrow end (apex distance x1) and ideally open at the wide end resonates where
    # tan kL = -k x1. Closed input, open output: the input impedance B / D is infinite where
    # D = 0.
    r1, r2, length = 0.005, 0.012, 0.35
    x1 = r1 * length / (r2 - r1)
    c = AIR.speed_m_s

    def reference(k: float) -> float:
        return math.tan(k * length) + k * x1

    k_ref = brentq(reference, ((n - 0.5) * math.pi + 1e-6) / length, (n * math.pi - 1e-9) / length)

    def d_of(f: float) -> float:
        return float(cone_matrix([f], length, r1, r2, AIR, losses=False)[3][0].real)

    f_ref = k_ref * c / (2 * math.pi)
    found = brentq(d_of, f_ref * 0.98, f_ref * 1.02, xtol=1e-9)
    assert abs(_cents(found, f_ref)) < 0.01


def test_unflanged_end_correction_low_frequency():
    # Levine & Schwinger, Phys. Rev. 73, 383 (1948): end correction 0.6133 a as ka -> 0,
    # and radiation resistance Z0 (ka)^2 / 4 at low frequency.
    a = 0.007
    f = np.array([5.0])
    k = 2 * math.pi * f[0] / AIR.speed_m_s
    z0 = AIR.density_kg_m3 * AIR.speed_m_s / (math.pi * a * a)
    zr = radiation_impedance(f, a, AIR)[0]
    assert zr.imag / (z0 * k) == pytest.approx(0.6133 * a, rel=1e-4)
    assert zr.real / z0 == pytest.approx((k * a) ** 2 / 4, rel=1e-3)


def test_pipe_with_two_unflanged_ends_is_longer_by_twice_0_6133_a():
    # Levine & Schwinger (1948): each unflanged end adds 0.6133 a at low frequency, so a long
    # thin pipe open at both ends resonates at n c / 2 (L + 2 x 0.6133 a), to 0.01 c.
    a_m, length_m = 0.005, 2.0
    g = parse_geometry_text(_tube("[[0, 10.0], [2000, 10.0]]"))
    res = playing_frequencies(
        g, [""], AIR, registers=2, options=ModelOptions(losses=False, radiation="unflanged-lossless")
    )
    for n in (1, 2):
        expected = n * AIR.speed_m_s / (2 * (length_m + 2 * 0.6133 * a_m))
        assert abs(_cents(res.freq_hz[0, n - 1], expected)) < 0.01


def _matrices():
    f = np.geomspace(50.0, 8000.0, 64)
    yield "cylinder lossy", cylinder_matrix(f, 0.12, 0.007, AIR)
    yield "cylinder lossless", cylinder_matrix(f, 0.12, 0.007, AIR, losses=False)
    yield "cone widening", cone_matrix(f, 0.1, 0.006, 0.009, AIR)
    yield "cone narrowing", cone_matrix(f, 0.1, 0.009, 0.006, AIR)
    yield "cone lossless", cone_matrix(f, 0.1, 0.009, 0.006, AIR, losses=False)
    for model in ("lefebvre-scavone-2012", "dubos-1999"):
        lengths = hole_lengths(f, 0.0075, 0.003, 0.004, AIR, model)
        k = 2 * np.pi * f / AIR.speed_m_s
        z0 = AIR.density_kg_m3 * AIR.speed_m_s / (math.pi * 0.0075**2)
        for is_open in (True, False):
            zs = hole_shunt_impedance(f, lengths, 0.0033, 0.003, 0.004, AIR, is_open)
            t_a = lengths.series_open_m if is_open else lengths.series_closed_m
            yield f"hole {model} open={is_open}", tee_matrix((1j * z0 * k * t_a).astype(complex), zs)


@pytest.mark.parametrize(("name", "matrix"), list(_matrices()), ids=[n for n, _ in _matrices()])
def test_every_element_is_reciprocal(name, matrix):
    # Reciprocal two-ports have det [[A, B], [C, D]] = 1 (Chaigne & Kergomard 2016, ch. 7).
    a, b, c, d = matrix
    assert np.allclose(a * d - b * c, 1.0, rtol=0, atol=1e-9)


def test_losses_lower_a_narrow_tube_by_tens_of_cents():
    # ACOUSTICS notes (Keefe 1984): a 14 mm bore near 280 Hz plays about 20 c lower than the
    # lossless figure; the sign and size are checked loosely (10-40 c).
    g = parse_geometry_text(_tube("[[0, 14.0], [600, 14.0]]"))
    lossy = playing_frequencies(g, [""], AIR, 1, ModelOptions(radiation="ideal")).freq_hz[0, 0]
    ideal = playing_frequencies(g, [""], AIR, 1, LOSSLESS_IDEAL).freq_hz[0, 0]
    assert -40.0 < _cents(lossy, ideal) < -10.0


def test_end_correction_is_within_the_trade_range_of_the_diameter():
    # *common practice*: an open end adds 0.3-0.6 of the diameter to the sounding length.
    g = parse_geometry_text(_tube("[[0, 14.0], [400, 14.0]]"))
    f1 = playing_frequencies(g, [""], AIR, 1, ModelOptions(losses=False)).freq_hz[0, 0]
    added_m = AIR.speed_m_s / (2 * f1) - 0.4
    per_end_over_diameter = added_m / 2 / 0.014
    assert 0.3 <= per_end_over_diameter <= 0.6


def test_a_smaller_open_hole_lowers_the_note():
    # *common practice*: the note falls as an open tone hole is made smaller.
    freqs = []
    for d in (7.0, 6.0, 5.0, 4.0, 3.0):
        hole = f"[[holes]]\nposition_mm = 220.0\ndiameter_mm = {d}\nchimney_mm = 3.0\n[fingerings]\nopen = \"o\"\n"
        g = parse_geometry_text(_tube("[[0, 14.0], [320, 14.0]]", hole))
        freqs.append(playing_frequencies(g, ["o"], AIR, 1).freq_hz[0, 0])
    assert all(b < a for a, b in itertools.pairwise(freqs))


def test_window_of_the_bore_area_with_levine_schwinger_correction_equals_an_open_top():
    # Levine & Schwinger (1948): at low frequency an unflanged open end acts as 0.6133 a of
    # extra pipe. A window whose area is the bore's and whose end correction is 0.6133 a is
    # that same inertance, so a long thin pipe plays the same first mode with either top.
    a_mm = 5.0
    side_mm = math.sqrt(math.pi) * a_mm  # a square window of the bore's area
    base = "[[0, 10.0], [2000, 10.0]]"
    open_top = parse_geometry_text(_tube(base))
    window = parse_geometry_text(_tube(base).replace(
        'kind = "open"',
        f'kind = "window"\nwidth_mm = {side_mm}\nlength_mm = {side_mm}\nend_correction_mm = {0.6133 * a_mm}',
    ))
    opts = ModelOptions(losses=False, radiation="unflanged-lossless")
    f_open = playing_frequencies(open_top, [""], AIR, 1, opts).freq_hz[0, 0]
    f_window = playing_frequencies(window, [""], AIR, 1, opts).freq_hz[0, 0]
    assert abs(_cents(f_window, f_open)) < 0.01


def test_a_larger_window_end_correction_lowers_every_note():
    # Ernoult & Fabre (2017): the window's inertance lowers the resonances; more inertance
    # (a longer end correction) lowers them further.
    text = _tube("[[0, 19.0], [400, 12.0]]").replace('kind = "open"', 'kind = "window"\nwidth_mm = 12\nlength_mm = 4\nend_correction_mm = {ec}')
    low = playing_frequencies(parse_geometry_text(text.format(ec=4.0)), [""], AIR, 3).freq_hz[0]
    high = playing_frequencies(parse_geometry_text(text.format(ec=8.0)), [""], AIR, 3).freq_hz[0]
    assert np.all(high < low)


def test_vectorised_refinement_agrees_with_scipy_minimize_scalar():
    # The resonance search refines all brackets at once by golden section; scipy's bounded
    # Brent search (scipy.optimize.minimize_scalar) on the same |Z| must find the same minima.
    from scipy.optimize import minimize_scalar

    from bench.model.geometry import builtin_geometry
    from bench.model.instrument import input_impedance, states_of

    g = builtin_geometry("wren-alto")
    patterns = [g.fingering(n).holes for n in ("F4", "C5", "A5")]
    res = playing_frequencies(g, patterns, AIR, registers=2)
    for i, pattern in enumerate(patterns):
        states = states_of([pattern])
        for k in range(2):
            f0 = res.freq_hz[i, k]

            def mag(f: float, states=states) -> float:
                return float(np.abs(input_impedance(g, states, np.array([f]), AIR))[0, 0])

            ref = minimize_scalar(mag, bounds=(f0 * 0.99, f0 * 1.01), method="bounded",
                                  options={"xatol": 1e-7})
            assert abs(_cents(f0, ref.x)) < 0.001


def test_following_a_mode_through_a_change_agrees_with_scipy_minimize_scalar():
    # minima_near (a local grid, then shrinking parabolas) after a hole is enlarged must find
    # the minimum scipy's bounded Brent search finds near it.
    from scipy.optimize import minimize_scalar

    from bench.model.geometry import builtin_geometry
    from bench.model.instrument import input_impedance, minima_near, states_of
    from bench.model.whatif import enlarge_hole

    g = builtin_geometry("wren-alto")
    patterns = [g.fingering(n).holes for n in ("C5", "D5", "C6")]
    states = states_of(patterns)
    before = playing_frequencies(g, patterns, AIR, registers=2).freq_hz
    changed = enlarge_hole(g, "h4", 7.2)
    after = minima_near(changed, states, before, 0.06, AIR)
    for i in range(len(patterns)):
        for k in range(2):
            f0 = after[i, k]

            def mag(f: float, i=i) -> float:
                return float(np.abs(input_impedance(changed, states[i: i + 1], np.array([f]), AIR))[0, 0])

            ref = minimize_scalar(mag, bounds=(f0 * 0.99, f0 * 1.01), method="bounded", options={"xatol": 1e-7})
            assert abs(_cents(f0, ref.x)) < 0.001
    assert _cents(after[0, 0], before[0, 0]) > 3.0  # h4 is C5's first open hole: it rose
