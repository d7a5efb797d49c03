"""A whole instrument: the impedance seen from the blown end, and its playing frequencies.

The bore is cut at every tone hole into cones and cylinders; each hole is a T-network whose
shunt is open, closed or half-covered as the fingering says; the foot radiates as an unflanged
open end. The jet of a duct flute drives the air column through its window, so the instrument
plays near the minima of ``|Z_top + Z_bore|``, the impedance of the window (or of a plain open
top) in series with the bore's input impedance (Fletcher & Rossing, *The Physics of Musical
Instruments*, 2nd ed., Springer 1998, ch. 16). The first minimum is the first register (mode 1),
the second the octave (mode 2), the third the twelfth (mode 3).

Everything is vectorised over fingerings and frequencies: one call evaluates an array of shape
``(fingerings, frequencies)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from functools import lru_cache
from itertools import pairwise

import numpy as np
from numpy.typing import NDArray
from scipy.signal import find_peaks

from bench.model.acoustics import (
    Air,
    CArray,
    FArray,
    HoleModel,
    Radiation,
    cone_matrix,
    hole_lengths,
    hole_shunt_impedance,
    load,
    radiation_impedance,
    tee_matrix,
)
from bench.model.geometry import Geometry

__all__ = [
    "HALF_HOLE_DIAMETER_FACTOR",
    "ModelOptions",
    "input_impedance",
    "minima_near",
    "playing_frequencies",
    "polish_minima",
    "refine_minima",
    "states_of",
]

HALF_HOLE_DIAMETER_FACTOR = 1.0 / math.sqrt(2.0)
"""A half-covered hole is modelled as an open hole of half the area (diameter / sqrt 2): a
modelling choice; a real half-hole's area depends on the finger."""

_CLOSED, _OPEN, _HALF = 0, 1, 2
_GOLDEN = (math.sqrt(5.0) - 1.0) / 2.0


@dataclass(frozen=True, slots=True)
class ModelOptions:
    """How the instrument is modelled.

    Attributes
    ----------
    losses : bool
        Viscothermal losses in the ducts (False: the lossless limit, for checks).
    radiation : "unflanged" | "unflanged-lossless" | "ideal"
        Open ends: the Levine & Schwinger radiation (Dalmont et al. 2001 fit); its end
        correction only; or an ideal open end (``Z = 0``, for checks).
    hole_model : "lefebvre-scavone-2012" | "dubos-1999"
        Length corrections of the tone holes.
    half_hole_factor : float in (0, 1)
        Effective diameter of a half-covered hole relative to the open hole.
    hole_diameter_scale : tuple of float
        Per-hole factor on the diameter (fitted effective diameters); empty = all 1.
    grid_step_ratio : float > 1
        Ratio between neighbouring frequencies of the coarse search grid.
    """

    losses: bool = True
    radiation: Radiation = "unflanged"
    hole_model: HoleModel = "lefebvre-scavone-2012"
    half_hole_factor: float = HALF_HOLE_DIAMETER_FACTOR
    hole_diameter_scale: tuple[float, ...] = ()
    grid_step_ratio: float = 1.01


def states_of(patterns: list[str]) -> NDArray[np.int8]:
    """Hole states of fingerings, shape (fingerings, holes): 0 closed, 1 open, 2 half.

    >>> states_of(["xo", "hx"]).tolist()
    [[0, 1], [2, 0]]
    """
    code = {"x": _CLOSED, "o": _OPEN, "h": _HALF}
    width = max((len(p) for p in patterns), default=0)
    out = np.zeros((len(patterns), width), dtype=np.int8)
    for i, p in enumerate(patterns):
        out[i, : len(p)] = [code[c] for c in p]
    return out


def _radiation(freq: FArray, radius_m: float, air: Air, options: ModelOptions) -> CArray:
    """Radiation impedance of an open end under the chosen option."""
    if options.radiation == "ideal":
        return np.zeros(freq.shape, dtype=np.complex128)
    return radiation_impedance(freq, radius_m, air, lossless=options.radiation == "unflanged-lossless")


@lru_cache(maxsize=64)
def _pieces(geometry: Geometry) -> tuple[tuple[str, float, float, float, float, int], ...]:
    """Elements from the top down: ("duct", z0, z1, r0, r1, -1) and ("hole", z, z, r, r, index);
    kept for the geometries in use (a fit or a search asks again for the same ones)."""
    cuts = sorted({z for z, _ in geometry.bore_mm} | {h.position_mm for h in geometry.holes})
    hole_at = {h.position_mm: i for i, h in enumerate(geometry.holes)}
    out: list[tuple[str, float, float, float, float, int]] = []
    for z0, z1 in pairwise(cuts):
        if z0 in hole_at:
            r = geometry.diameter_at(z0) / 2000.0
            out.append(("hole", z0, z0, r, r, hole_at[z0]))
        out.append(("duct", z0 / 1000.0, z1 / 1000.0,
                    geometry.diameter_at(z0) / 2000.0, geometry.diameter_at(z1) / 2000.0, -1))
    return tuple(out)


def top_impedance(freq_hz: FArray, geometry: Geometry, air: Air, options: ModelOptions) -> CArray:
    """Impedance of the blown end in series with the bore, Pa s/m^3.

    ``open``: the radiation of the bore's top radius. ``window``: the window's inertance
    ``j omega rho l_w / S_w`` (Ernoult & Fabre 2017, ``l_w`` the end correction) plus the
    low-frequency radiation resistance ``rho c (k R_w)^2 / (4 S_w)`` of a pipe of the window's
    equivalent radius ``R_w = sqrt(S_w / pi)`` (Levine & Schwinger 1948).
    """
    top = geometry.top
    if top.kind == "open":
        return _radiation(freq_hz, geometry.bore_mm[0][1] / 2000.0, air, options)
    area_m2 = top.area_mm2 * 1e-6
    omega = 2.0 * np.pi * freq_hz
    inertance = 1j * omega * air.density_kg_m3 * (top.end_correction_mm / 1000.0) / area_m2
    if options.radiation == "ideal":
        return inertance.astype(np.complex128)
    r_w = math.sqrt(area_m2 / math.pi)
    k = omega / air.speed_m_s
    resistance = air.density_kg_m3 * air.speed_m_s * (k * r_w) ** 2 / (4.0 * area_m2)
    if options.radiation == "unflanged-lossless":
        resistance = 0.0 * resistance
    return (inertance + resistance).astype(np.complex128)


def input_impedance(
    geometry: Geometry,
    states: NDArray[np.int8],
    freq_hz: FArray,
    air: Air,
    options: ModelOptions = ModelOptions(),
    include_top: bool = True,
) -> CArray:
    """Impedance seen by the jet, ``Z_top + Z_bore``, for several fingerings at once.

    Parameters
    ----------
    geometry : Geometry
    states : int8 ndarray, shape (F, holes)
        Hole states per fingering (:func:`states_of`).
    freq_hz : float ndarray, shape (F, M) or (M,), Hz
    air : Air
    options : ModelOptions
    include_top : bool
        False gives the bore's input impedance alone.

    Returns
    -------
    complex ndarray, shape (F, M), Pa s/m^3
    """
    n_f = states.shape[0]
    given = np.asarray(freq_hz, dtype=np.float64)
    freq = np.broadcast_to(given, (n_f, given.shape[-1]))
    # One frequency row shared by every fingering: each element is computed once on it, and
    # fingerings whose holes agree from the foot up to the element share the impedance seen
    # there (one row per distinct suffix of hole states: 82 rows instead of 216 for the 27
    # fingerings of the alto over its 8 holes). Otherwise every fingering is its own group.
    shared = given.ndim == 1
    f_el = given if shared else freq
    foot_r = geometry.bore_mm[-1][1] / 2000.0
    radiation = _radiation(f_el, foot_r, air, options)
    if shared:
        group = np.zeros(n_f, dtype=np.intp)  # the group of each fingering
        z = radiation.reshape(1, -1).astype(np.complex128)
    else:
        group = np.arange(n_f)
        z = np.broadcast_to(radiation, freq.shape).astype(np.complex128)
    scales = options.hole_diameter_scale
    for kind, z0, z1, r0, r1, idx in reversed(_pieces(geometry)):
        if kind == "duct":
            z = load(cone_matrix(f_el, z1 - z0, r0, r1, air, options.losses), z)
            continue
        hole = geometry.holes[idx]
        if shared:  # the new groups: a group below and this hole's state
            pairs, group = np.unique(group * 3 + states[:, idx], return_inverse=True)
            group = group.reshape(-1)
            parent, state_of = pairs // 3, pairs % 3
        else:
            parent, state_of = np.arange(n_f), states[:, idx]
        scale = scales[idx] if idx < len(scales) else 1.0
        z_new = np.empty((len(parent), z.shape[1]), dtype=np.complex128)
        for state in (_CLOSED, _OPEN, _HALF):
            rows = np.flatnonzero(state_of == state)
            if rows.size == 0:
                continue
            f_rows = given if shared else freq[rows]
            factor = scale * (options.half_hole_factor if state == _HALF else 1.0)
            b_in = hole.inner_diameter_mm / 2000.0 * factor
            b_out = hole.outer_diameter_mm / 2000.0 * factor
            t = hole.chimney_mm / 1000.0
            lengths = hole_lengths(f_rows, r0, b_in, t, air, options.hole_model)
            is_open = state != _CLOSED
            zs = hole_shunt_impedance(
                f_rows, lengths, b_in, b_out, t, air, is_open, options.losses, options.radiation
            )
            k = 2.0 * np.pi * f_rows / air.speed_m_s
            z0_main = air.density_kg_m3 * air.speed_m_s / (math.pi * r0**2)
            t_a = lengths.series_open_m if is_open else lengths.series_closed_m
            za = (1j * z0_main * k * t_a).astype(np.complex128)
            z_new[rows] = load(tee_matrix(za, zs), z[parent[rows]])
        z = z_new
    if shared:
        z = z[group]  # one row per fingering again
    if include_top:
        z = z + top_impedance(f_el, geometry, air, options)
    return z


def refine_minima(
    geometry: Geometry,
    states: NDArray[np.int8],
    lo_hz: FArray,
    hi_hz: FArray,
    air: Air,
    options: ModelOptions = ModelOptions(),
    iterations: int = 36,
) -> FArray:
    """Frequencies of the minimum of ``|Z|`` inside brackets, by golden-section search.

    Golden-section search (J. Kiefer, Proc. AMS 4, 502 (1953)) run on every bracket at once,
    finished by one parabolic interpolation step.

    Parameters
    ----------
    geometry : Geometry
    states : int8 ndarray, shape (F, holes)
    lo_hz, hi_hz : float ndarray, shape (F, K), Hz
        Brackets; a NaN bracket gives NaN.
    air : Air
    options : ModelOptions
    iterations : int
        Each shrinks the bracket by 0.618 (36: by 3e-8; 16: by 5e-4, after which the final
        parabola is exact to far below a thousandth of a cent on a smooth minimum).

    Returns
    -------
    float ndarray, shape (F, K), Hz
    """
    missing = ~(np.isfinite(lo_hz) & np.isfinite(hi_hz))
    a = np.where(missing, 100.0, lo_hz)
    b = np.where(missing, 101.0, hi_hz)

    def mag(f: FArray) -> FArray:
        return np.abs(input_impedance(geometry, states, f, air, options))

    c = b - _GOLDEN * (b - a)
    d = a + _GOLDEN * (b - a)
    fc, fd = mag(c), mag(d)
    for _ in range(iterations):
        left = fc < fd  # the minimum lies in [a, d]
        b = np.where(left, d, b)
        a = np.where(left, a, c)
        new_c = b - _GOLDEN * (b - a)
        new_d = a + _GOLDEN * (b - a)
        probe = np.where(left, new_c, new_d)
        fp = mag(probe)
        c, d = np.where(left, new_c, d), np.where(left, c, new_d)
        fc, fd = np.where(left, fp, fd), np.where(left, fc, fp)
    # one parabola through the two inner points and the bracket's middle finishes the search
    # (successive parabolic interpolation, the second half of Brent's method: R. P. Brent,
    # *Algorithms for Minimization without Derivatives*, 1973, ch. 5)
    m = 0.5 * (a + b)
    fm = mag(m)
    num = (m - c) ** 2 * (fm - fd) - (m - d) ** 2 * (fm - fc)
    den = (m - c) * (fm - fd) - (m - d) * (fm - fc)
    with np.errstate(divide="ignore", invalid="ignore"):
        vertex = m - 0.5 * num / den
    ok = np.isfinite(vertex) & (vertex >= a) & (vertex <= b) & (fm <= np.maximum(fc, fd))
    out = np.where(ok, vertex, m)
    return np.where(missing, np.nan, out)


def polish_minima(
    geometry: Geometry,
    states: NDArray[np.int8],
    guess_hz: FArray,
    half_width: float,
    air: Air,
    options: ModelOptions = ModelOptions(),
    iterations: int = 4,
) -> FArray:
    """Frequencies of the minimum of ``|Z|`` near good guesses (see :func:`_polish`)."""
    return _polish(geometry, states, guess_hz, half_width, air, options, iterations)[0]


def _polish(
    geometry: Geometry,
    states: NDArray[np.int8],
    guess_hz: FArray,
    half_width: float,
    air: Air,
    options: ModelOptions = ModelOptions(),
    iterations: int = 4,
    start_fraction: float = 1.0,
) -> tuple[FArray, FArray]:
    """Frequencies of the minimum of ``|Z|`` near good guesses, by shrinking parabolas.

    Near a resonance ``Z ~ R + j a (f - f0)`` with ``R`` and ``a`` nearly constant, so ``|Z|^2``
    is nearly a parabola in ``f`` whose vertex is the minimum: each round evaluates ``|Z|^2`` at
    ``v - h, v, v + h`` and moves ``v`` to the vertex of the parabola through them (successive
    parabolic interpolation, Brent 1973, ch. 5), then shrinks ``h`` eightfold. Three points per
    round, for every fingering and mode in one call, instead of one golden-section step per call.
    The result is kept within ``guess * (1 +- half_width)``.

    Parameters
    ----------
    geometry : Geometry
    states : int8 ndarray, shape (F, holes)
    guess_hz : float ndarray, shape (F, K), Hz
        Starting points within about ``half_width`` of the minima; NaN gives NaN.
    half_width : float > 0
        Relative half-width of the first parabola (the grid step of the search that found the
        guesses) and of the range the result is kept in.
    air : Air
    options : ModelOptions
    iterations : int >= 1
    start_fraction : float in (0, 1]
        The first parabola is ``start_fraction * half_width`` wide (guesses better than the
        grid's own points start narrower).

    Returns
    -------
    freq_hz : float ndarray, shape (F, K), Hz
    z_abs : float ndarray, shape (F, K), Pa s/m^3
        ``|Z|`` at the start of the last round, within ``2 h`` (a few millionths) of the
        result: at a minimum it differs from ``|Z|`` there only in the second order.
    """
    guess = np.asarray(guess_hz, dtype=np.float64)
    missing = ~np.isfinite(guess)
    g0 = np.where(missing, 100.0, guess)
    lo, hi = g0 * (1.0 - half_width), g0 * (1.0 + half_width)
    v = g0
    h = g0 * half_width * start_fraction
    k = guess.shape[1]
    zm = np.zeros_like(g0)
    for _ in range(iterations):
        probe = np.concatenate([v - h, v, v + h], axis=1)
        z2 = np.abs(input_impedance(geometry, states, probe, air, options)) ** 2
        zl, zm, zr = z2[:, :k], z2[:, k: 2 * k], z2[:, 2 * k:]
        curv = zl - 2.0 * zm + zr
        with np.errstate(divide="ignore", invalid="ignore"):
            shift = 0.5 * h * (zl - zr) / curv
        # a parabola opening downwards (not yet near the minimum): step towards the lower side
        shift = np.where(np.isfinite(shift) & (curv > 0), np.clip(shift, -2.0 * h, 2.0 * h),
                         np.where(zl < zr, -h, h))
        v = np.clip(v + shift, lo, hi)
        h = h / 8.0
    return np.where(missing, np.nan, v), np.where(missing, np.nan, np.sqrt(zm))


def minima_near(
    geometry: Geometry,
    states: NDArray[np.int8],
    near_hz: FArray,
    half_width: float,
    air: Air,
    options: ModelOptions = ModelOptions(),
) -> FArray:
    """Frequencies of the minimum of ``|Z|`` within ``near_hz * (1 +- half_width)``.

    A local grid with the coarse search's step (``options.grid_step_ratio``) across the range,
    in one call for every fingering and mode, picks its local minimum nearest the old frequency;
    :func:`polish_minima` finishes from there. Used to follow a mode through a change of the geometry.

    Parameters
    ----------
    geometry : Geometry
    states : int8 ndarray, shape (F, holes)
    near_hz : float ndarray, shape (F, K), Hz
        Where the modes were before the change; NaN gives NaN.
    half_width : float in (0, 0.5)
    air : Air
    options : ModelOptions

    Returns
    -------
    float ndarray, shape (F, K), Hz
    """
    near = np.asarray(near_hz, dtype=np.float64)
    missing = ~np.isfinite(near)
    base = np.where(missing, 100.0, near)
    step = options.grid_step_ratio - 1.0
    n = max(math.ceil(half_width / step), 1)
    offsets = np.linspace(-half_width, half_width, 2 * n + 1)
    k = near.shape[1]
    probe = (base[:, None, :] * (1.0 + offsets)[None, :, None]).reshape(near.shape[0], -1)
    z = np.abs(input_impedance(geometry, states, probe, air, options)).reshape(near.shape[0], len(offsets), k)
    # the local minimum of the grid nearest the old frequency (not the deepest one in the
    # range: a neighbouring mode may be deeper); the deepest point when there is none
    is_min = np.zeros(z.shape, dtype=bool)
    is_min[:, 1:-1] = (z[:, 1:-1] <= z[:, :-2]) & (z[:, 1:-1] <= z[:, 2:])
    distance = np.where(is_min, np.abs(offsets)[None, :, None], np.inf)
    best = np.where(is_min.any(axis=1), np.argmin(distance, axis=1), np.argmin(z, axis=1))
    start = base * (1.0 + offsets[best])
    found = polish_minima(geometry, states, start, half_width / n, air, options)
    return np.where(missing, np.nan, found)


@dataclass(frozen=True, slots=True)
class Resonances:
    """Playing frequencies per fingering and register.

    Attributes
    ----------
    freq_hz : float ndarray, shape (F, K), Hz
        Mode k (register k) of fingering f at ``[f, k - 1]``; NaN when not found.
    depth : float ndarray, shape (F, K)
        ``|Z|`` at the minimum over the characteristic impedance of the top of the bore (how
        strongly the mode is supported; smaller is stronger).
    """

    freq_hz: FArray
    depth: FArray


def playing_frequencies(
    geometry: Geometry,
    patterns: list[str],
    air: Air,
    registers: int = 3,
    options: ModelOptions = ModelOptions(),
    max_hz: float = 16000.0,
) -> Resonances:
    """Playing frequencies of fingerings: the first minima of ``|Z_top + Z_bore|``.

    A coarse logarithmic grid (step ``options.grid_step_ratio``) from a quarter of the
    half-wave frequency of the whole bore to ``max_hz``; minima of ``|Z|`` with a prominence of
    at least a factor 1.5 (scipy.signal.find_peaks on ``-log |Z|``) are taken in rising order and
    refined: first the vertex of the parabola in ``|Z|^2`` through the grid's minimum and its
    neighbours, then three rounds of :func:`polish_minima`'s shrinking parabolas starting an
    eighth of a grid step wide (within 0.01 c of a fine golden-section search on the built-in
    instruments: tests/model/test_fast_paths.py). The grid ends at ``max_hz`` or, lower, at ``registers + 1`` times the half-wave
    frequency of the bore down to the highest hole any fingering opens (a mode's frequency is
    below ``k c / 2 L`` of the shortest air column that plays it, with room to spare for the
    window's and the holes' end corrections, which only lower it).

    Parameters
    ----------
    geometry : Geometry
    patterns : list of str
        Fingerings (x/o/h per hole).
    air : Air
    registers : int >= 1
        How many modes to find.
    options : ModelOptions
    max_hz : float, Hz

    Returns
    -------
    Resonances
    """
    states = states_of(patterns) if geometry.holes else np.zeros((len(patterns), 0), dtype=np.int8)
    length_m = geometry.length_mm / 1000.0
    f_lo = 0.25 * air.speed_m_s / (2.0 * length_m)
    open_at = [h.position_mm for i, h in enumerate(geometry.holes) if np.any(states[:, i] != _CLOSED)]
    shortest_m = min([geometry.length_mm, *open_at]) / 1000.0
    top_hz = min(max_hz, (registers + 1) * air.speed_m_s / (2.0 * shortest_m))
    n_grid = math.ceil(math.log(top_hz / f_lo) / math.log(options.grid_step_ratio)) + 1
    grid = np.geomspace(f_lo, top_hz, n_grid)
    z_grid = np.abs(input_impedance(geometry, states, grid, air, options))
    guess = np.full((len(patterns), registers), np.nan)
    log_z = -np.log(np.maximum(z_grid, 1e-300))
    for i in range(len(patterns)):
        peaks, _ = find_peaks(log_z[i], prominence=math.log(1.5))
        for k, p in enumerate(peaks[:registers]):
            guess[i, k] = _grid_vertex(grid, z_grid[i], p)
    # the grid's own parabola stands for the first round of the polish: it starts an eighth of
    # a grid step wide, three rounds from there reach what four from the grid point did
    step = options.grid_step_ratio - 1.0
    freq, z_abs = _polish(geometry, states, guess, step, air, options, iterations=3, start_fraction=0.125)
    z_top_bore = air.density_kg_m3 * air.speed_m_s / (math.pi * (geometry.bore_mm[0][1] / 2000.0) ** 2)
    depth = z_abs / z_top_bore
    return Resonances(freq, np.where(np.isfinite(freq), depth, np.nan))


def _grid_vertex(grid: FArray, z_abs: FArray, p: int) -> float:
    """Vertex of the parabola in ``|Z|^2`` through grid point ``p`` and its neighbours, kept
    between the neighbours (the grid point itself at an edge or where there is no minimum)."""
    if p <= 0 or p >= len(grid) - 1:
        return float(grid[p])
    x0, x1, x2 = grid[p - 1], grid[p], grid[p + 1]
    y0, y1, y2 = z_abs[p - 1] ** 2, z_abs[p] ** 2, z_abs[p + 1] ** 2
    num = (x1 - x0) ** 2 * (y1 - y2) - (x1 - x2) ** 2 * (y1 - y0)
    den = (x1 - x0) * (y1 - y2) - (x1 - x2) * (y1 - y0)
    if den == 0.0 or not math.isfinite(num / den):
        return float(grid[p])
    return float(min(max(x1 - 0.5 * num / den, x0), x2))


def with_end_correction(geometry: Geometry, end_correction_mm: float) -> Geometry:
    """The geometry with another window end correction (a window top only)."""
    return replace(geometry, top=replace(geometry.top, end_correction_mm=end_correction_mm))
