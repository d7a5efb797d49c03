"""What a change to the instrument would do, before wood comes off.

Four kinds of change: a tone hole enlarged (or reduced) to a new diameter, a hole moved (plugged
and drilled again elsewhere), the foot shortened, and a stretch of bore reamed wider. Each gives the predicted change in cents of every fingering in every register. The
sensitivity table gives, for every hole, the change in cents of every fingering and register
per 0.1 mm more diameter (a one-sided difference of the model).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Literal

import numpy as np
from numpy.typing import NDArray

from bench.errors import SettingsError
from bench.model.acoustics import Air, air_at
from bench.model.geometry import Geometry, Hole
from bench.model.instrument import (
    ModelOptions,
    minima_near,
    playing_frequencies,
    states_of,
    with_end_correction,
)

__all__ = [
    "UNCERTAIN_END_CORRECTION_MM",
    "Change",
    "enlarge_hole",
    "format_change",
    "format_sensitivity",
    "move_hole",
    "predict_change",
    "ream",
    "sensitivity",
    "shorten_foot",
]

if TYPE_CHECKING:
    from bench.model.fit import FitResult

_BRACKET = 0.08  # relative half-width of the search around the unchanged frequency
UNCERTAIN_END_CORRECTION_MM = 3.0
"""How far the window's end correction is varied to gauge a change's uncertainty, mm (the
spread of its prior in :mod:`bench.model.fit`)."""


@dataclass(frozen=True, slots=True)
class Change:
    """Predicted effect of a change.

    Attributes
    ----------
    description : str
    fingerings : tuple of str
    before_hz, after_hz : float ndarray, shape (F, K), Hz
    uncertainty_cents : float ndarray, shape (F, K), cents, or None
        The change's uncertainty (see :func:`predict_change`); None when not asked for.
    uncertainty_kind : "fit" | "models" | ""
        ``fit``: one standard deviation propagated from the fit's covariance; ``models``: the
        largest departure under other plausible models; "" when there is none.
    """

    description: str
    fingerings: tuple[str, ...]
    before_hz: NDArray[np.float64]
    after_hz: NDArray[np.float64]
    uncertainty_cents: NDArray[np.float64] | None = None
    uncertainty_kind: Literal["fit", "models", ""] = ""

    @property
    def cents(self) -> NDArray[np.float64]:
        """After minus before, cents, shape (F, K)."""
        out: NDArray[np.float64] = 1200.0 * np.log2(self.after_hz / self.before_hz)
        return out


def _hole_index(geometry: Geometry, label: str) -> int:
    for i, h in enumerate(geometry.holes):
        if h.label == label:
            return i
    raise SettingsError(
        f"no hole {label!r} in {geometry.name}; use one of {', '.join(h.label for h in geometry.holes)}"
    )


def enlarge_hole(geometry: Geometry, label: str, diameter_mm: float) -> Geometry:
    """The geometry with hole ``label`` bored to ``diameter_mm`` (inner and outer alike unless
    undercut, where the outer grows and the undercut's excess is kept).

    Raises
    ------
    SettingsError
        Unknown hole, or a diameter not between 0.5 mm and the bore.
    """
    i = _hole_index(geometry, label)
    hole = geometry.holes[i]
    bore_d = geometry.diameter_at(hole.position_mm)
    if not (math.isfinite(diameter_mm) and 0.5 <= diameter_mm < bore_d):
        raise SettingsError(
            f"diameter {diameter_mm:g} mm for hole {label} is out of range; give 0.5 mm to less than the bore ({bore_d:.3g} mm)"
        )
    excess = hole.inner_diameter_mm - hole.outer_diameter_mm
    inner = min(diameter_mm + max(excess, 0.0), bore_d * 0.999)
    new = replace(hole, inner_diameter_mm=inner, outer_diameter_mm=diameter_mm)
    holes = geometry.holes[:i] + (new,) + geometry.holes[i + 1:]
    return replace(geometry, holes=holes)


def shorten_foot(geometry: Geometry, cut_mm: float) -> Geometry:
    """The geometry with ``cut_mm`` taken off the foot (the bore ends shorter).

    Raises
    ------
    SettingsError
        A cut that is not positive or that reaches the lowest hole.
    """
    new_len = geometry.length_mm - cut_mm
    lowest = max((h.position_mm + h.inner_diameter_mm for h in geometry.holes), default=0.0)
    if not (math.isfinite(cut_mm) and cut_mm > 0 and new_len > max(lowest, 1.0)):
        raise SettingsError(
            f"cutting {cut_mm:g} mm off the foot is out of range; give more than 0 and less than "
            f"{geometry.length_mm - max(lowest, 1.0):.1f} mm (the lowest hole must stay inside)"
        )
    pts = [(z, d) for z, d in geometry.bore_mm if z < new_len]
    pts.append((new_len, geometry.diameter_at(new_len)))
    return replace(geometry, bore_mm=tuple(pts))


def move_hole(geometry: Geometry, label: str, to_mm: float) -> Geometry:
    """The geometry with hole ``label`` plugged and drilled again at ``to_mm`` from the blown end.

    The hole keeps its diameters and its chimney (the wall thickness at the new place may differ;
    give a geometry with the new chimney for that).

    Raises
    ------
    SettingsError
        Unknown hole, or a place outside the bore or where the new hole would overlap its
        neighbours (the holes stay in their order).
    """
    i = _hole_index(geometry, label)
    hole = geometry.holes[i]
    half = hole.inner_diameter_mm / 2.0
    lo = geometry.holes[i - 1].position_mm + geometry.holes[i - 1].inner_diameter_mm / 2.0 + half if i > 0 else half
    hi = (geometry.holes[i + 1].position_mm - geometry.holes[i + 1].inner_diameter_mm / 2.0 - half
          if i + 1 < len(geometry.holes) else geometry.length_mm - half)
    if not (math.isfinite(to_mm) and lo < to_mm < hi):
        raise SettingsError(
            f"moving hole {label} to {to_mm:g} mm is out of range; give a place between {lo:.1f} and {hi:.1f} mm "
            "(inside the bore, clear of the neighbouring holes)"
        )
    if hole.inner_diameter_mm >= geometry.diameter_at(to_mm):
        raise SettingsError(f"hole {label} ({hole.inner_diameter_mm:g} mm) is not smaller than the bore at {to_mm:g} mm")
    holes = geometry.holes[:i] + (replace(hole, position_mm=to_mm),) + geometry.holes[i + 1:]
    return replace(geometry, holes=holes)


REAM_TAPER_MM = 1.0
"""A reamed stretch meets the old bore through a short cone this long at each end (a bore file
needs rising distances, and a reamer leaves a small chamfer rather than a sharp step)."""


def ream(geometry: Geometry, from_mm: float, to_mm: float, by_mm: float) -> Geometry:
    """The geometry with the bore between ``from_mm`` and ``to_mm`` widened by ``by_mm``.

    The diameter grows by ``by_mm`` over the stretch, joined to the old bore by cones of
    :data:`REAM_TAPER_MM` at each end.

    Raises
    ------
    SettingsError
        A stretch outside the bore, shorter than two tapers, or ``by_mm`` not in (0, 5] mm.
    """
    length = geometry.length_mm
    if not (math.isfinite(from_mm) and math.isfinite(to_mm) and 0.0 <= from_mm and to_mm <= length
            and to_mm - from_mm > 2.0 * REAM_TAPER_MM):
        raise SettingsError(
            f"reaming from {from_mm:g} to {to_mm:g} mm is out of range; give a stretch inside 0-{length:g} mm "
            f"longer than {2 * REAM_TAPER_MM:g} mm, the start first"
        )
    if not (math.isfinite(by_mm) and 0.0 < by_mm <= 5.0):
        raise SettingsError(f"reaming by {by_mm:g} mm is out of range; give more than 0 and at most 5 mm (reaming only widens)")
    a, b = from_mm + REAM_TAPER_MM, to_mm - REAM_TAPER_MM
    if from_mm == 0.0:
        a = 0.0  # reaming from the very top: no taper there
    if to_mm == length:
        b = length
    zs = sorted({z for z, _ in geometry.bore_mm} | {from_mm, a, b, to_mm})
    pts = [(z, geometry.diameter_at(z) + (by_mm if a <= z <= b else 0.0)) for z in zs]
    return replace(geometry, bore_mm=tuple(pts))


def _after(
    changed: Geometry, patterns: list[str], before_hz: NDArray[np.float64], air: Air, options: ModelOptions
) -> NDArray[np.float64]:
    """Resonances of the changed geometry near the unchanged ones."""
    states = states_of(patterns) if changed.holes else np.zeros((len(patterns), 0), dtype=np.int8)
    return minima_near(changed, states, before_hz, _BRACKET, air, options)


def predict_change(
    geometry: Geometry,
    changed: Geometry,
    description: str,
    air: Air,
    registers: int = 3,
    options: ModelOptions | None = None,
    uncertainty: bool = False,
    fit: FitResult | None = None,
) -> Change:
    """Predicted frequencies of every fingering before and after a change.

    The changed geometry's modes are searched within 8 % of the unchanged ones, so that mode k
    stays mode k (a change of more than a semitone and a third is followed only that far).

    With ``fit`` (the model fitted to captures, :func:`bench.model.fit.fit_model`) the change is
    predicted on the fitted model -- its window end correction on both geometries, its hole
    diameter factors as ``options``; ``air`` should be the room of the captures warmed by the
    fitted ``warming_c`` -- and its uncertainty is propagated from the fit's covariance:
    ``sqrt(diag(J Sigma J^T))`` with ``J`` the derivative of the change in cents over the fitted
    parameters (forward differences of 1 % of each prior spread) and ``Sigma`` the fit's
    covariance (the first-order propagation of error; JCGM 100:2008 (GUM), sec. 5.1.2). The
    per-register offsets move a note alike before and after, so they do not enter a change.

    Otherwise, with ``uncertainty``, the change is predicted again under other plausible models
    -- the other tone-hole model (Dubos et al. 1999 against Lefebvre & Scavone 2012) and the
    window's end correction :data:`UNCERTAIN_END_CORRECTION_MM` lower and higher (the spread of
    its prior in the fit) -- and the largest departure from the nominal change, in cents, is its
    uncertainty. This is the spread between models, not a confidence interval.
    """
    if fit is not None:
        return _predict_with_fit(geometry, changed, description, air, registers, fit)
    options = options or ModelOptions()
    patterns = [f.holes for f in geometry.fingerings]
    before = playing_frequencies(geometry, patterns, air, registers, options).freq_hz
    after = _after(changed, patterns, before, air, options)
    spread = None
    if uncertainty:
        nominal = 1200.0 * np.log2(after / before)
        variants: list[tuple[Geometry, Geometry, ModelOptions]] = [
            (geometry, changed, replace(options, hole_model="dubos-1999" if options.hole_model != "dubos-1999"
                                        else "lefebvre-scavone-2012")),
        ]
        if geometry.top.kind == "window" and changed.top.kind == "window":
            for delta in (-UNCERTAIN_END_CORRECTION_MM, UNCERTAIN_END_CORRECTION_MM):
                ec = max(geometry.top.end_correction_mm + delta, 0.0)
                variants.append((with_end_correction(geometry, ec), with_end_correction(changed, ec), options))
        spread = np.zeros_like(nominal)
        for g0, g1, opts in variants:
            b = playing_frequencies(g0, patterns, air, registers, opts).freq_hz
            a = _after(g1, patterns, b, air, opts)
            spread = np.fmax(spread, np.abs(1200.0 * np.log2(a / b) - nominal))
    return Change(description, tuple(f.name for f in geometry.fingerings), before, after, spread,
                  "models" if uncertainty else "")


_FIT_STEP = 0.01  # finite-difference step over a fitted parameter, in prior spreads (as in the fit)


def _predict_with_fit(
    geometry: Geometry, changed: Geometry, description: str, air: Air, registers: int, fit: FitResult
) -> Change:
    """The change on the fitted model, its uncertainty propagated from the fit's covariance."""
    patterns = [f.holes for f in geometry.fingerings]
    labels = [h.label for h in geometry.holes]
    values = {p.name: p.value for p in fit.parameters}
    base_scales = fit.options.hole_diameter_scale or (1.0,) * len(labels)

    def change_cents(vals: dict[str, float]) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
        g0, g1 = geometry, changed
        if "end_correction_mm" in vals and g0.top.kind == "window" and g1.top.kind == "window":
            ec = max(vals["end_correction_mm"], 0.0)
            g0, g1 = with_end_correction(g0, ec), with_end_correction(g1, ec)
        scales = tuple(max(vals.get(f"scale_{label}", s), 0.05) for label, s in zip(labels, base_scales, strict=True))
        opts = replace(fit.options, hole_diameter_scale=scales)
        warm = vals.get("warming_c", fit.warming_c) - fit.warming_c
        a = air_at(min(max(air.temp_c + warm, -10.0), 45.0), air.rh_percent) if warm else air
        before = playing_frequencies(g0, patterns, a, registers, opts).freq_hz
        after = _after(g1, patterns, before, a, opts)
        cents: NDArray[np.float64] = 1200.0 * np.log2(after / before)
        return before, after, cents

    before, after, nominal = change_cents(values)
    params = [p for p in fit.parameters if not p.name.startswith("offset_r")]
    index = {p.name: i for i, p in enumerate(fit.parameters)}
    cov = fit.covariance
    if cov is None or not params:
        return Change(description, tuple(f.name for f in geometry.fingerings), before, after,
                      np.zeros_like(nominal), "fit")
    jac = np.zeros((*nominal.shape, len(params)))
    for j, p in enumerate(params):
        step = _FIT_STEP * p.prior_spread
        jac[..., j] = (change_cents({**values, p.name: p.value + step})[2] - nominal) / step
    rows = [index[p.name] for p in params]
    sigma = cov[np.ix_(rows, rows)]
    variance = np.einsum("...i,ij,...j->...", jac, sigma, jac)
    return Change(description, tuple(f.name for f in geometry.fingerings), before, after,
                  np.sqrt(np.clip(variance, 0.0, None)), "fit")


def sensitivity(
    geometry: Geometry, air: Air, registers: int = 3, step_mm: float = 0.1, options: ModelOptions | None = None
) -> tuple[tuple[str, ...], tuple[str, ...], NDArray[np.float64]]:
    """Cents per ``step_mm`` more diameter, for every hole, fingering and register.

    Returns
    -------
    holes : tuple of str
        Hole labels.
    fingerings : tuple of str
    cents : float ndarray, shape (holes, fingerings, registers), cents per ``step_mm``
    """
    options = options or ModelOptions()
    patterns = [f.holes for f in geometry.fingerings]
    before = playing_frequencies(geometry, patterns, air, registers, options).freq_hz
    table = np.empty((len(geometry.holes), len(patterns), registers))
    for i, hole in enumerate(geometry.holes):
        bigger = _grow(hole, step_mm)
        changed = replace(geometry, holes=geometry.holes[:i] + (bigger,) + geometry.holes[i + 1:])
        table[i] = 1200.0 * np.log2(_after(changed, patterns, before, air, options) / before)
    return tuple(h.label for h in geometry.holes), tuple(f.name for f in geometry.fingerings), table


def _grow(hole: Hole, step_mm: float) -> Hole:
    """The hole with both diameters larger by ``step_mm``."""
    return replace(hole, inner_diameter_mm=hole.inner_diameter_mm + step_mm,
                   outer_diameter_mm=hole.outer_diameter_mm + step_mm)


def format_change(change: Change) -> str:
    """Text table: fingering, then the change in cents per register."""
    k = change.before_hz.shape[1]
    unc = change.uncertainty_cents
    width = 9 if unc is None else 14
    lines = [change.description, f"{'fingering':<10}" + "".join(f"{f'R{r + 1} c':>{width}}" for r in range(k))]
    cents = change.cents
    for j, (name, row) in enumerate(zip(change.fingerings, cents, strict=True)):
        cells = ""
        for r, c in enumerate(row):
            if not math.isfinite(c):
                cells += f"{'-':>{width}}"
            elif unc is None:
                cells += f"{c:+9.1f}"
            else:
                cells += f"{f'{c:+.1f} +-{unc[j, r]:.1f}':>{width}}"
        lines.append(f"{name:<10}{cells}")
    if unc is not None and change.uncertainty_kind == "fit":
        lines.append("+-: one standard deviation propagated from the fit to the captures (J Sigma J^T over the "
                     "fitted parameters)")
    elif unc is not None:
        lines.append("+-: spread between model variants, not a confidence interval: the largest departure under the "
                     f"other tone-hole model or a window end correction {UNCERTAIN_END_CORRECTION_MM:g} mm off")
    return "\n".join(lines) + "\n"


def format_sensitivity(
    holes: tuple[str, ...], fingerings: tuple[str, ...], table: NDArray[np.float64], step_mm: float = 0.1
) -> str:
    """Text table per register: rows fingerings, columns holes, cents per ``step_mm``."""
    lines: list[str] = []
    for r in range(table.shape[2]):
        lines.append(f"register {r + 1}: cents per {step_mm:g} mm more hole diameter")
        lines.append(f"{'fingering':<10}" + "".join(f"{h:>8}" for h in holes))
        for j, name in enumerate(fingerings):
            cells = "".join(f"{table[i, j, r]:+8.2f}" if math.isfinite(table[i, j, r]) else f"{'-':>8}" for i in range(len(holes)))
            lines.append(f"{name:<10}{cells}")
        lines.append("")
    return "\n".join(lines)
