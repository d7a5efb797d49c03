"""Acoustic elements of a duct flute: air, lossy ducts, tone holes, radiation.

Pure functions of numpy arrays (frequency in the last axis, any leading shape), SI units. Every
element is a two-port transfer matrix ``(A, B, C, D)`` relating pressure and volume flow at its
input to those at its output, ``[p1, u1] = [[A, B], [C, D]] [p2, u2]``; the input impedance of
an element loaded by ``Z2`` is ``(A Z2 + B) / (C Z2 + D)`` (:func:`load`). All elements are
reciprocal: ``A D - B C = 1``.

Sources (formulas gathered in the project's ACOUSTICS notes):

* viscothermal losses, lowest-order wide-pipe approximation: D. H. Keefe, "Acoustical wave
  propagation in cylindrical ducts", J. Acoust. Soc. Am. 75(1), 58-62 (1984); A. Chaigne and
  J. Kergomard, *Acoustics of Musical Instruments*, Springer (2016), ch. 5;
* cones with spherical waves: Chaigne & Kergomard (2016), ch. 7;
* tone holes as symmetric T-networks: A. Lefebvre and G. P. Scavone, "Characterization of
  woodwind instrument toneholes with the finite element method", J. Acoust. Soc. Am. 131(4),
  3153-3163 (2012), eqs. 31-34; V. Dubos, J. Kergomard, A. Khettabi, J.-P. Dalmont,
  D. H. Keefe and C. J. Nederveen, "Theory of sound propagation in a duct with a branched tube
  using modal decomposition", Acta Acustica 85, 153-169 (1999); matching volume after
  C. J. Nederveen, J. K. M. Jansen and R. R. van Hassel, Acustica 84, 957-966 (1998);
* radiation of an unflanged end: H. Levine and J. Schwinger, Phys. Rev. 73, 383-406 (1948),
  through the fit of J.-P. Dalmont, C. J. Nederveen and N. Joly, "Radiation impedance of tubes
  with different flanges: numerical and experimental investigations", J. Sound Vib. 244(3),
  505-534 (2001);
* the window of a duct flute as an inertance: A. Ernoult and B. Fabre, "Window impedance of
  recorder-like instruments", Acta Acustica 103, 106-116 (2017).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.typing import ArrayLike, NDArray

from bench.tuning.air import STANDARD_PRESSURE_PA, speed_of_sound, water_vapour_fraction

__all__ = [
    "Air",
    "HoleModel",
    "Matrix",
    "Radiation",
    "air_at",
    "cone_matrix",
    "cylinder_matrix",
    "hole_lengths",
    "hole_shunt_impedance",
    "load",
    "load_closed",
    "radiation_impedance",
    "tee_matrix",
    "wave_terms",
]

CArray = NDArray[np.complex128]
FArray = NDArray[np.float64]
Matrix = tuple[CArray, CArray, CArray, CArray]
HoleModel = Literal["lefebvre-scavone-2012", "dubos-1999"]
Radiation = Literal["unflanged", "unflanged-lossless", "ideal"]

_M_DRY_KG_MOL = 0.028965  # molar mass of dry air (Picard et al., Metrologia 45, 149 (2008))
_M_WATER_KG_MOL = 0.018015  # molar mass of water
_R_J_MOL_K = 8.314462618  # molar gas constant (CODATA 2018)


@dataclass(frozen=True, slots=True)
class Air:
    """The air inside the instrument.

    Attributes
    ----------
    temp_c : float, degC
    rh_percent : float, 0..100, percent
    speed_m_s : float, m/s
        Speed of sound (Cramer 1993, :func:`bench.tuning.air.speed_of_sound`).
    density_kg_m3 : float, kg/m^3
    viscosity_pa_s : float, Pa s
        Shear viscosity, ``1.708e-5 (1 + 0.0029 t)`` (Chaigne & Kergomard 2016, ch. 5).
    gamma : float
        Ratio of specific heats (1.402).
    prandtl : float
        Prandtl number (0.71).
    """

    temp_c: float
    rh_percent: float
    speed_m_s: float
    density_kg_m3: float
    viscosity_pa_s: float
    gamma: float = 1.402
    prandtl: float = 0.71


def air_at(
    temp_c: float = 20.0,
    rh_percent: float = 0.0,
    co2_fraction: float = 0.0004,
    pressure_pa: float = STANDARD_PRESSURE_PA,
) -> Air:
    """Air properties at a temperature and humidity.

    The speed of sound is the project's Cramer (1993) model; the density is that of an ideal
    mixture of dry air and water vapour, ``rho = p M_a / (R T) (1 - x_w (1 - M_w / M_a))``
    (the CIPM-2007 formula of Picard et al. 2008 without its compressibility factor, which
    changes rho by 0.04 %); viscosity after Chaigne & Kergomard (2016), ch. 5.

    Parameters
    ----------
    temp_c : float, -10..45, degC
    rh_percent : float, 0..100, percent
    co2_fraction : float, 0..0.1
    pressure_pa : float, Pa

    Returns
    -------
    Air

    Raises
    ------
    SettingsError
        A value outside its accepted range (from :mod:`bench.tuning.air`).

    Examples
    --------
    >>> a = air_at(20.0)
    >>> round(a.speed_m_s, 1), round(a.density_kg_m3, 3)
    (343.4, 1.204)
    """
    c = speed_of_sound(temp_c, rh_percent, pressure_pa, co2_fraction)
    x_w = water_vapour_fraction(temp_c, rh_percent, pressure_pa)
    kelvin = temp_c + 273.15
    rho = pressure_pa * _M_DRY_KG_MOL / (_R_J_MOL_K * kelvin) * (1.0 - x_w * (1.0 - _M_WATER_KG_MOL / _M_DRY_KG_MOL))
    mu = 1.708e-5 * (1.0 + 0.0029 * temp_c)
    return Air(float(temp_c), float(rh_percent), c, rho, mu)


def wave_terms(
    freq_hz: ArrayLike, radius_m: float, air: Air, losses: bool = True
) -> tuple[CArray, CArray]:
    """Propagation constant and characteristic impedance of a lossy cylindrical duct.

    Lowest-order wide-pipe approximation (Keefe 1984; Chaigne & Kergomard 2016, ch. 5):
    ``r_v = a sqrt(omega rho / mu)``, ``eps = (1 - j) / (sqrt(2) r_v)``,
    ``Gamma = j k [1 + eps (1 + (gamma - 1) / sqrt(Pr))]``,
    ``Zc = Z0 [1 + eps (1 - (gamma - 1) / sqrt(Pr))]``, ``Z0 = rho c / (pi a^2)``.

    Parameters
    ----------
    freq_hz : array_like, > 0, Hz
    radius_m : float > 0, m
    air : Air
    losses : bool
        False gives the lossless ``Gamma = j k``, ``Zc = Z0``.

    Returns
    -------
    gamma_per_m : complex ndarray, 1/m
    zc : complex ndarray, Pa s/m^3

    Examples
    --------
    >>> g, z = wave_terms([440.0], 0.007, air_at(20.0), losses=False)
    >>> round(float(g[0].imag), 4), round(float(z[0].real) / 1e6, 3)
    (8.0516, 2.686)
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    omega = 2.0 * np.pi * f
    k = omega / air.speed_m_s
    z0 = air.density_kg_m3 * air.speed_m_s / (math.pi * radius_m**2)
    if not losses:
        lossless_gamma: CArray = (1j * k).astype(np.complex128)
        return lossless_gamma, np.full(f.shape, z0, dtype=np.complex128)
    r_v = radius_m * np.sqrt(omega * air.density_kg_m3 / air.viscosity_pa_s)
    eps = (1.0 - 1.0j) / (math.sqrt(2.0) * r_v)
    thermal = (air.gamma - 1.0) / math.sqrt(air.prandtl)
    gamma: CArray = (1j * k * (1.0 + eps * (1.0 + thermal))).astype(np.complex128)
    zc: CArray = (z0 * (1.0 + eps * (1.0 - thermal))).astype(np.complex128)
    return gamma, zc


def cylinder_matrix(
    freq_hz: ArrayLike, length_m: float, radius_m: float, air: Air, losses: bool = True
) -> Matrix:
    """Transfer matrix of a cylinder, ``[[cosh GL, Zc sinh GL], [sinh GL / Zc, cosh GL]]``.

    Keefe (1984); Chaigne & Kergomard (2016), ch. 5.

    Parameters
    ----------
    freq_hz : array_like, > 0, Hz
    length_m : float >= 0, m
    radius_m : float > 0, m
    air : Air
    losses : bool

    Returns
    -------
    Matrix
        ``(A, B, C, D)``, complex arrays of the shape of ``freq_hz``.

    Examples
    --------
    >>> A, B, C, D = cylinder_matrix([300.0, 900.0], 0.3, 0.007, air_at(20.0))
    >>> bool(np.allclose(A * D - B * C, 1.0))
    True
    """
    gamma, zc = wave_terms(freq_hz, radius_m, air, losses)
    gl = gamma * length_m
    ch, sh = np.cosh(gl), np.sinh(gl)
    return ch, zc * sh, sh / zc, ch


def cone_matrix(
    freq_hz: ArrayLike,
    length_m: float,
    radius_in_m: float,
    radius_out_m: float,
    air: Air,
    losses: bool = True,
) -> Matrix:
    """Transfer matrix of a truncated cone with spherical waves.

    With ``x1 = r1 L / (r2 - r1)``, ``y1 = 1 / x1``, ``y2 = (r2 - r1) / (r2 L)`` and
    ``Zc = rho c / (pi r1 r2)`` (Chaigne & Kergomard 2016, ch. 7)::

        A = (r2/r1) cosh GL - y1 sinh GL / G      B = Zc sinh GL
        C = [(1 - y1 y2 / G^2) sinh GL + (y1 - y2) cosh GL / G] / Zc
        D = (r1/r2) cosh GL + y2 sinh GL / G

    Losses use the cylinder's terms at the equivalent radius
    ``r_eq = L r1 / (x1 ln(1 + L / x1))`` (a modelling choice common in transfer-matrix codes).
    Falls back to :func:`cylinder_matrix` when the radii are equal.

    Parameters
    ----------
    freq_hz : array_like, > 0, Hz
    length_m : float > 0, m
    radius_in_m, radius_out_m : float > 0, m
        Radius at the input (nearer the blown end) and at the output.
    air : Air
    losses : bool

    Returns
    -------
    Matrix

    Examples
    --------
    >>> A, B, C, D = cone_matrix([500.0], 0.2, 0.008, 0.006, air_at(20.0))
    >>> bool(np.allclose(A * D - B * C, 1.0))
    True
    """
    r1, r2 = float(radius_in_m), float(radius_out_m)
    if abs(r2 - r1) <= 1e-9 * max(r1, r2) or length_m <= 0.0:
        return cylinder_matrix(freq_hz, length_m, 0.5 * (r1 + r2), air, losses)
    length = float(length_m)
    x1 = r1 * length / (r2 - r1)
    r_eq = length * r1 / (x1 * math.log1p(length / x1))
    gamma, zc_eq = wave_terms(freq_hz, r_eq, air, losses)
    zc = zc_eq * (r_eq * r_eq) / (r1 * r2)
    y1 = (r2 - r1) / (r1 * length)
    y2 = (r2 - r1) / (r2 * length)
    gl = gamma * length
    ch, sh = np.cosh(gl), np.sinh(gl)
    a = (r2 / r1) * ch - y1 * sh / gamma
    b = zc * sh
    c = ((1.0 - y1 * y2 / gamma**2) * sh + (y1 - y2) * ch / gamma) / zc
    d = (r1 / r2) * ch + y2 * sh / gamma
    return a, b, c, d


def radiation_impedance(
    freq_hz: ArrayLike, radius_m: float, air: Air, lossless: bool = False
) -> CArray:
    """Radiation impedance of an unflanged open end.

    Levine & Schwinger (1948) through the fit of Dalmont, Nederveen & Joly (2001), valid for
    ``ka < 1.5``: ``|R| = (1 + 0.2 ka - 0.084 (ka)^2) / (1 + 0.2 ka + 0.416 (ka)^2)``,
    ``l / a = 0.6133 [(1 + 0.044 (ka)^2) / (1 + 0.19 (ka)^2) - 0.02 sin^2(2 ka)]``,
    ``R = -|R| exp(-2 j k l)``, ``Zr = Z0 (1 + R) / (1 - R)``.

    Parameters
    ----------
    freq_hz : array_like, > 0, Hz
    radius_m : float > 0, m
    air : Air
    lossless : bool
        True keeps only the end correction (``|R| = 1``, ``Zr = j Z0 tan(k l)``).

    Returns
    -------
    complex ndarray, Pa s/m^3

    Examples
    --------
    >>> air = air_at(20.0)
    >>> zr = radiation_impedance([10.0], 0.007, air, lossless=True)
    >>> k = 2 * np.pi * 10.0 / air.speed_m_s
    >>> round(float(zr[0].imag / (k * air.density_kg_m3 * air.speed_m_s / (np.pi * 0.007**2))) / 0.007, 4)
    0.6133
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    k = 2.0 * np.pi * f / air.speed_m_s
    ka = k * radius_m
    z0 = air.density_kg_m3 * air.speed_m_s / (math.pi * radius_m**2)
    l_end = radius_m * 0.6133 * ((1.0 + 0.044 * ka**2) / (1.0 + 0.19 * ka**2) - 0.02 * np.sin(2.0 * ka) ** 2)
    if lossless:
        return (1j * z0 * np.tan(k * l_end)).astype(np.complex128)
    mag = (1.0 + 0.2 * ka - 0.084 * ka**2) / (1.0 + 0.2 * ka + 0.416 * ka**2)
    refl: CArray = (-mag * np.exp(-2j * k * l_end)).astype(np.complex128)
    return (z0 * (1.0 + refl) / (1.0 - refl)).astype(np.complex128)


@dataclass(frozen=True, slots=True)
class HoleLengths:
    """Length corrections of a tone hole, m (arrays of the frequency's shape).

    Attributes
    ----------
    inner_m : inner (shunt) length correction ``t_i``
    series_open_m, series_closed_m : series length corrections ``t_a`` (negative)
    matching_m : matching volume as a length of the hole, ``t_m``
    """

    inner_m: FArray
    series_open_m: FArray
    series_closed_m: FArray
    matching_m: float


def hole_lengths(
    freq_hz: ArrayLike,
    bore_radius_m: float,
    hole_radius_m: float,
    chimney_m: float,
    air: Air,
    model: HoleModel = "lefebvre-scavone-2012",
) -> HoleLengths:
    """Length corrections of a tone hole in a cylindrical bore.

    ``lefebvre-scavone-2012`` (J. Acoust. Soc. Am. 131, 3153, eqs. 31-34), with
    ``d = b / a``::

        t_i = b (0.822 - 0.095 d - 1.566 d^2 + 2.138 d^3 - 1.640 d^4 + 0.502 d^5)
              [1 + (1 - 4.56 d + 6.55 d^2)(0.17 ka + 0.92 (ka)^2 + 0.16 (ka)^3 - 0.29 (ka)^4)]
        t_a open   = (-0.35 + 0.06 tanh(2.7 t / b)) b d^2
        t_a closed = (-0.12 - 0.17 tanh(2.4 t / b)) b d^2

    ``dubos-1999`` (Acta Acustica 85, 153): ``t_i = b (0.82 - 0.193 d - 1.09 d^2 + 1.27 d^3
    - 0.71 d^4)``, ``t_a = b (-0.37 + 0.087 d) d^2`` open and closed. Both use the matching
    volume ``t_m = b d (1 + 0.207 d^3) / 8`` (Nederveen, Jansen & van Hassel 1998).

    Parameters
    ----------
    freq_hz : array_like, > 0, Hz
    bore_radius_m : float > 0, m
        Main bore radius ``a`` at the hole.
    hole_radius_m : float > 0, m
        Hole radius ``b`` where it meets the bore.
    chimney_m : float > 0, m
        Chimney height ``t``.
    air : Air
    model : "lefebvre-scavone-2012" | "dubos-1999"

    Returns
    -------
    HoleLengths

    Examples
    --------
    >>> h = hole_lengths([100.0], 0.007, 0.003, 0.003, air_at(20.0), "dubos-1999")
    >>> round(float(h.inner_m[0]) * 1000, 3), round(float(h.series_open_m[0]) * 1000, 4)
    (1.839, -0.1833)
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    a, b, t = float(bore_radius_m), float(hole_radius_m), float(chimney_m)
    d = b / a
    t_m = b * d * (1.0 + 0.207 * d**3) / 8.0
    if model == "dubos-1999":
        t_i = b * (0.82 - 0.193 * d - 1.09 * d**2 + 1.27 * d**3 - 0.71 * d**4) + 0.0 * f
        t_a = b * (-0.37 + 0.087 * d) * d**2 + 0.0 * f
        return HoleLengths(t_i, t_a, t_a.copy(), t_m)
    if model != "lefebvre-scavone-2012":
        raise ValueError(f"hole model {model!r} is unknown; use 'lefebvre-scavone-2012' or 'dubos-1999'")
    ka = 2.0 * np.pi * f / air.speed_m_s * a
    poly = 0.822 - 0.095 * d - 1.566 * d**2 + 2.138 * d**3 - 1.640 * d**4 + 0.502 * d**5
    freq_term = (1.0 - 4.56 * d + 6.55 * d**2) * (0.17 * ka + 0.92 * ka**2 + 0.16 * ka**3 - 0.29 * ka**4)
    t_i = b * poly * (1.0 + freq_term)
    t_a_open = (-0.35 + 0.06 * math.tanh(2.7 * t / b)) * b * d**2 + 0.0 * f
    t_a_closed = (-0.12 - 0.17 * math.tanh(2.4 * t / b)) * b * d**2 + 0.0 * f
    return HoleLengths(t_i, t_a_open, t_a_closed, t_m)


def hole_shunt_impedance(
    freq_hz: ArrayLike,
    lengths: HoleLengths,
    inner_radius_m: float,
    outer_radius_m: float,
    chimney_m: float,
    air: Air,
    is_open: bool,
    losses: bool = True,
    radiation: Radiation = "unflanged",
) -> CArray:
    """Shunt impedance of a tone hole: inner mass plus the chimney's input impedance.

    ``Zs = j Zh k t_i + Z_chimney``, where the chimney is the matching volume (a cylinder of
    length ``t_m`` at the inner radius) followed by the wall (a cylinder, or a cone from the
    inner to the outer radius when undercut), ended by the unflanged radiation of the outer
    radius when open, or by a rigid cover when closed. Lossless, this is Lefebvre & Scavone
    (2012)'s ``j Zh [k t_i + tan(k (t + t_m + t_r))]`` open and ``j Zh [k t_i - cot(k (t + t_m))]``
    closed. Modelling an undercut as a cone is a modelling choice (no published closed form).

    Parameters
    ----------
    freq_hz : array_like, > 0, Hz
    lengths : HoleLengths
    inner_radius_m, outer_radius_m : float > 0, m
    chimney_m : float > 0, m
    air : Air
    is_open : bool
    losses : bool
    radiation : "unflanged" | "unflanged-lossless" | "ideal"
        The open end's radiation: :func:`radiation_impedance`, its end correction only, or none
        (``Z = 0``, for checks).

    Returns
    -------
    complex ndarray, Pa s/m^3
    """
    f = np.asarray(freq_hz, dtype=np.float64)
    k = 2.0 * np.pi * f / air.speed_m_s
    zh = air.density_kg_m3 * air.speed_m_s / (math.pi * inner_radius_m**2)
    wall = cone_matrix(f, chimney_m, inner_radius_m, outer_radius_m, air, losses)
    if is_open:
        z_end = (
            np.zeros(f.shape, dtype=np.complex128)
            if radiation == "ideal"
            else radiation_impedance(f, outer_radius_m, air, lossless=radiation == "unflanged-lossless")
        )
        z = load(wall, z_end)
    else:
        z = load_closed(wall)
    z = load(cylinder_matrix(f, lengths.matching_m, inner_radius_m, air, losses), z)
    return (1j * zh * k * lengths.inner_m + z).astype(np.complex128)


def tee_matrix(series_z: CArray, shunt_z: CArray) -> Matrix:
    """Symmetric T-network of a tone hole, ``[[1 + Za/2Zs, Za (1 + Za/4Zs)], [1/Zs, 1 + Za/2Zs]]``.

    Two series halves ``Za / 2`` around a shunt ``Zs`` (Keefe 1990; Lefebvre & Scavone 2012).

    Parameters
    ----------
    series_z : complex ndarray, Pa s/m^3
        ``Za = j Z0 k t_a``.
    shunt_z : complex ndarray, Pa s/m^3

    Returns
    -------
    Matrix

    Examples
    --------
    >>> za, zs = np.array([2j]), np.array([5 + 3j])
    >>> A, B, C, D = tee_matrix(za, zs)
    >>> bool(np.allclose(A * D - B * C, 1.0))
    True
    """
    ratio = series_z / (2.0 * shunt_z)
    a = 1.0 + ratio
    return a, series_z * (1.0 + 0.5 * ratio), 1.0 / shunt_z, a


def load(matrix: Matrix, z_load: CArray) -> CArray:
    """Input impedance of a two-port loaded by ``z_load``, ``(A Z + B) / (C Z + D)``."""
    a, b, c, d = matrix
    return (a * z_load + b) / (c * z_load + d)


def load_closed(matrix: Matrix) -> CArray:
    """Input impedance of a two-port closed rigidly at its output, ``A / C``."""
    a, _, c, _ = matrix
    return a / c
