"""Fit the model to what an instrument actually played: a few parameters with priors.

Parameters (each has a prior, a value and spread it is believed to have before any capture):

* ``end_correction_mm`` -- the window's end correction (window top only); prior: the geometry's
  value +- 3 mm;
* ``warming_c`` -- how much warmer the air in the bore is than the room the captures name;
  prior 5 +- 5 degC (the breath warms the bore; *from memory*, a few degrees);
* ``scale_<hole>`` -- a factor on each hole's diameter (its effective diameter: undercut,
  roughness, a finger's shadow); prior 1 +- 0.1; only holes open in some captured fingering;
* ``offset_r<k>_cents`` -- one offset per register (the jet and the player's breath move all
  notes of a register alike); prior 0 +- 15 c.

The residual of a capture is ``1200 log2(f_measured / f_model) - offset_register``, in cents,
divided by the capture's spread (at least 2 c); each parameter adds ``(value - prior) / spread``.
:func:`scipy.optimize.least_squares` minimises the sum of squares. The uncertainty of each
parameter is ``sqrt(diag((J^T J)^-1))`` from the Jacobian at the solution (the Gauss-Newton
covariance; Press et al., *Numerical Recipes*, 3rd ed., 2007, sec. 15.5). A parameter whose
uncertainty is still more than 70 % of its prior spread is reported as not pinned down: the
captures say little about it, and its value is mostly the prior. There are never more
parameters than captures: the list above is cut, from the end, to the number of captures.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import least_squares

from bench.errors import SettingsError
from bench.model.acoustics import air_at
from bench.model.geometry import Geometry
from bench.model.instrument import (
    ModelOptions,
    minima_near,
    playing_frequencies,
    states_of,
)
from bench.tuning.notes import note_name, parse_note
from bench.workflow.captures import Capture

__all__ = [
    "PINNED_FRACTION",
    "FitParameter",
    "FitResult",
    "FitTarget",
    "fit_model",
    "fitted_geometry",
    "format_fit",
    "targets_from_captures",
]

PINNED_FRACTION = 0.7
"""A parameter is pinned down when its uncertainty is below this fraction of its prior spread."""
MIN_SPREAD_CENTS = 2.0
"""Smallest measurement spread a capture is trusted to, cents."""
_BRACKET = 0.06  # relative half-width of the search around the first prediction
_STEP = 0.01  # finite-difference step, in prior spreads


@dataclass(frozen=True, slots=True)
class FitTarget:
    """One measured note: the fingering that played it, the mode, and what was heard.

    Attributes
    ----------
    fingering : str
        Name of the geometry's fingering.
    mode : int >= 1
    measured_hz : float > 0, Hz
    temp_c : float, degC
        Room air when it was captured.
    rh_percent : float, percent
    spread_cents : float > 0, cents
    """

    fingering: str
    mode: int
    measured_hz: float
    temp_c: float
    rh_percent: float
    spread_cents: float


@dataclass(frozen=True, slots=True)
class FitParameter:
    """A fitted parameter.

    Attributes
    ----------
    name, unit : str
    value, uncertainty : float
        Fitted value and its 1-sigma uncertainty, in ``unit``.
    prior, prior_spread : float
    pinned : bool
        False when the captures hardly narrowed the prior (see module docstring).
    """

    name: str
    unit: str
    value: float
    uncertainty: float
    prior: float
    prior_spread: float
    pinned: bool


@dataclass(frozen=True, slots=True)
class FitResult:
    """What the fit found.

    Attributes
    ----------
    parameters : tuple of FitParameter
    targets : tuple of FitTarget
    before_cents, after_cents : float ndarray, cents
        Measured minus model per target, before the fit (priors) and after it.
    geometry : Geometry
        The geometry with the fitted end correction.
    options : ModelOptions
        With the fitted hole diameter factors.
    warming_c : float, degC
    offsets_cents : dict of int to float
        Per-register offset.
    left_out : tuple of str
        Parameters not fitted because there were too few captures.
    covariance : float ndarray, shape (P, P), or None
        Covariance of the fitted parameters (``parameters`` order, in their units): the
        Gauss-Newton ``(J^T J)^-1`` scaled by the prior spreads; None when nothing was fitted.
        :func:`bench.model.whatif.predict_change` propagates it to a change's prediction.
    """

    parameters: tuple[FitParameter, ...]
    targets: tuple[FitTarget, ...]
    before_cents: NDArray[np.float64]
    after_cents: NDArray[np.float64]
    geometry: Geometry
    options: ModelOptions
    warming_c: float
    offsets_cents: dict[int, float]
    left_out: tuple[str, ...]
    covariance: NDArray[np.float64] | None = None


def targets_from_captures(captures: Sequence[Capture], geometry: Geometry, default_rh: float = 50.0) -> list[FitTarget]:
    """The latest capture of each note and register that a fingering of the geometry plays.

    A capture matches the fingering named by its note (enharmonics match: ``Bb4`` is ``A#4``);
    the fingering's ``register`` gives the mode. Captures of a held note that jumped into
    another mode are left out (their fingering was meant for another note).

    Raises
    ------
    SettingsError
        No capture matches any fingering (names the notes seen and the fingerings).
    """
    by_midi: dict[int, tuple[str, int]] = {}
    for f in geometry.fingerings:
        try:
            by_midi[parse_note(f.name)] = (f.name, f.register)
        except SettingsError:
            continue
    latest: dict[tuple[int, int], Capture] = {}
    for cap in captures:
        if cap.jump or not (cap.f0_hz > 0 and math.isfinite(cap.f0_hz)):
            continue
        key = (cap.midi, cap.register)
        if cap.midi in by_midi and (key not in latest or cap.index > latest[key].index):
            latest[key] = cap
    if not latest:
        seen = sorted({c.note for c in captures})
        raise SettingsError(
            f"no capture matches a fingering of {geometry.name}: captured {', '.join(seen) or 'nothing'}; "
            f"fingerings are {', '.join(by_midi and [note_name(m) for m in sorted(by_midi)] or ['none'])}"
        )
    out = []
    for (midi, _), cap in sorted(latest.items()):
        name, mode = by_midi[midi]
        rh = cap.rh_percent if cap.rh_percent is not None else default_rh
        out.append(FitTarget(name, mode, cap.f0_hz, cap.temp_c, rh, max(cap.cents_spread, MIN_SPREAD_CENTS)))
    return out


@dataclass(frozen=True, slots=True)
class _Param:
    name: str
    unit: str
    prior: float
    spread: float


def _parameters(geometry: Geometry, targets: Sequence[FitTarget]) -> tuple[list[_Param], list[str]]:
    """The parameters in priority order, cut to the number of targets; and those left out."""
    params: list[_Param] = []
    if geometry.top.kind == "window":
        params.append(_Param("end_correction_mm", "mm", geometry.top.end_correction_mm, 3.0))
    params.append(_Param("warming_c", "degC", 5.0, 5.0))
    for mode in sorted({t.mode for t in targets}):
        params.append(_Param(f"offset_r{mode}_cents", "cents", 0.0, 15.0))
    patterns = [geometry.fingering(t.fingering).holes for t in targets]
    for i, hole in enumerate(geometry.holes):
        if any(p[i] != "x" for p in patterns):
            params.append(_Param(f"scale_{hole.label}", "", 1.0, 0.1))
    keep = params[: len(targets)]
    return keep, [p.name for p in params[len(targets):]]


class _Model:
    """Evaluates the residuals for a parameter vector (internal to the fit)."""

    def __init__(self, geometry: Geometry, targets: Sequence[FitTarget], params: list[_Param], options: ModelOptions) -> None:
        self.geometry = geometry
        self.targets = list(targets)
        self.params = params
        self.options = options
        self.names = [p.name for p in params]
        self.patterns = [geometry.fingering(t.fingering).holes for t in targets]
        self.states = states_of(self.patterns) if geometry.holes else np.zeros((len(targets), 0), dtype=np.int8)
        self.measured = np.array([t.measured_hz for t in targets])
        self.spread = np.array([t.spread_cents for t in targets])
        self.modes = np.array([t.mode for t in targets])

    def values(self, x: NDArray[np.float64]) -> dict[str, float]:
        return {p.name: p.prior + p.spread * float(v) for p, v in zip(self.params, x, strict=True)}

    def configure(self, vals: dict[str, float]) -> tuple[Geometry, ModelOptions, float]:
        geometry = self.geometry
        if "end_correction_mm" in vals:
            geometry = replace(geometry, top=replace(geometry.top, end_correction_mm=max(vals["end_correction_mm"], 0.0)))
        scales = tuple(max(vals.get(f"scale_{h.label}", 1.0), 0.05) for h in geometry.holes)
        options = replace(self.options, hole_diameter_scale=scales)
        return geometry, options, vals.get("warming_c", 5.0)

    def model_hz(self, vals: dict[str, float], guess_hz: NDArray[np.float64] | None) -> NDArray[np.float64]:
        geometry, options, warming = self.configure(vals)
        out = np.full(len(self.targets), np.nan)
        groups: dict[tuple[float, float], list[int]] = {}
        for i, t in enumerate(self.targets):
            groups.setdefault((t.temp_c, t.rh_percent), []).append(i)
        for (temp_c, rh), idx in groups.items():
            air = air_at(min(max(temp_c + warming, -10.0), 45.0), rh)
            rows = np.array(idx)
            if guess_hz is None:
                res = playing_frequencies(geometry, [self.patterns[i] for i in idx], air, int(self.modes[rows].max()), options)
                out[rows] = res.freq_hz[np.arange(len(idx)), self.modes[rows] - 1]
            else:
                g = guess_hz[rows][:, None]
                found = minima_near(geometry, self.states[rows], g, _BRACKET, air, options)
                out[rows] = found[:, 0]
        return out

    def offsets(self, vals: dict[str, float]) -> NDArray[np.float64]:
        return np.array([vals.get(f"offset_r{m}_cents", 0.0) for m in self.modes])

    def cents(self, vals: dict[str, float], guess_hz: NDArray[np.float64] | None) -> NDArray[np.float64]:
        model = self.model_hz(vals, guess_hz)
        cents: NDArray[np.float64] = 1200.0 * np.log2(self.measured / model) - self.offsets(vals)
        return cents


def fit_model(
    geometry: Geometry,
    targets: Sequence[FitTarget],
    options: ModelOptions | None = None,
    fixed: dict[str, float] | None = None,
) -> FitResult:
    """Fit the model's parameters to measured notes (see the module docstring).

    Parameters
    ----------
    geometry : Geometry
    targets : sequence of FitTarget
        From :func:`targets_from_captures`.
    options : ModelOptions, optional
    fixed : dict of str to float, optional
        Parameters held at a given value instead of fitted (``{"warming_c": 4.0}``).

    Returns
    -------
    FitResult

    Raises
    ------
    SettingsError
        No targets, or a fingering the model finds no mode for.
    """
    if not targets:
        raise SettingsError("no captures to fit; capture some notes of the instrument first")
    options = options or ModelOptions()
    fixed = dict(fixed or {})
    params, left_out = _parameters(geometry, targets)
    free = [p for p in params if p.name not in fixed]
    model = _Model(geometry, targets, free, options)
    prior_vals = {**model.values(np.zeros(len(free))), **fixed}
    guess = model.model_hz(prior_vals, None)
    if not np.all(np.isfinite(guess)):
        bad = [t.fingering for t, g in zip(targets, guess, strict=True) if not math.isfinite(g)]
        raise SettingsError(f"the model finds no such mode for fingering {bad[0]}; check the geometry and the fingering")
    before = 1200.0 * np.log2(model.measured / guess) - model.offsets(prior_vals)

    def residuals(x: NDArray[np.float64]) -> NDArray[np.float64]:
        vals = {**model.values(x), **fixed}
        return np.concatenate([model.cents(vals, guess) / model.spread, x])

    def jacobian(x: NDArray[np.float64]) -> NDArray[np.float64]:
        # forward differences with a fixed step of 1 % of each prior spread: the model's own
        # search converges far below that, so the differences are smooth
        r0 = residuals(x)
        cols = []
        for j in range(len(x)):
            step = np.zeros_like(x)
            step[j] = _STEP
            cols.append((residuals(x + step) - r0) / _STEP)
        return np.stack(cols, axis=1)

    if free:
        sol = least_squares(residuals, np.zeros(len(free)), jac=jacobian, method="trf")
        x = np.asarray(sol.x, dtype=np.float64)
        jac = np.asarray(sol.jac, dtype=np.float64)
        spreads = np.array([p.spread for p in free])
        try:
            cov = np.linalg.inv(jac.T @ jac)
            sd_scaled = np.sqrt(np.clip(np.diag(cov), 0.0, None))
        except np.linalg.LinAlgError:  # no information beyond the priors (whose J^T J is 1)
            cov = np.eye(len(free))
            sd_scaled = np.ones(len(free))
        covariance: NDArray[np.float64] | None = np.asarray(cov * np.outer(spreads, spreads), dtype=np.float64)
    else:
        x = np.zeros(0)
        sd_scaled = np.zeros(0)
        covariance = None
    vals = {**model.values(x), **fixed}
    after = model.cents(vals, guess)
    fitted: list[FitParameter] = []
    for p, v, s in zip(free, x, sd_scaled, strict=True):
        fitted.append(FitParameter(p.name, p.unit, p.prior + p.spread * float(v), p.spread * float(s),
                                   p.prior, p.spread, bool(s < PINNED_FRACTION)))
    fit_geometry, fit_options, warming = model.configure(vals)
    offsets = {int(m): vals.get(f"offset_r{m}_cents", 0.0) for m in sorted(set(model.modes.tolist()))}
    return FitResult(tuple(fitted), tuple(targets), before, after, fit_geometry, fit_options, warming, offsets,
                     tuple(left_out), covariance)


def format_fit(result: FitResult) -> str:
    """Text report: residual per note before and after, then the parameters."""
    lines = [f"{'fingering':<10} {'mode':>4} {'measured Hz':>11} {'before c':>9} {'after c':>8}"]
    for t, b, a in zip(result.targets, result.before_cents, result.after_cents, strict=True):
        lines.append(f"{t.fingering:<10} {t.mode:>4} {t.measured_hz:11.2f} {b:+9.1f} {a:+8.1f}")
    rms_b = float(np.sqrt(np.mean(result.before_cents**2)))
    rms_a = float(np.sqrt(np.mean(result.after_cents**2)))
    lines.append(f"rms: {rms_b:.1f} c before, {rms_a:.1f} c after ({len(result.targets)} notes)")
    lines.append("")
    lines.append(f"{'parameter':<22} {'value':>9} {'+-':>7} {'prior':>14}")
    for p in result.parameters:
        note = "" if p.pinned else "  not pinned down: the captures say little, the value is mostly the prior"
        lines.append(f"{p.name:<22} {p.value:9.3f} {p.uncertainty:7.3f} {p.prior:7.3f} +-{p.prior_spread:<5g}{note}")
    if result.left_out:
        lines.append(f"not fitted (fewer captures than parameters): {', '.join(result.left_out)}")
    return "\n".join(lines) + "\n"


def fitted_geometry(result: FitResult) -> Geometry:
    """The geometry with the fitted end correction and each hole at its effective diameter."""
    scales = result.options.hole_diameter_scale
    holes = tuple(
        replace(h, inner_diameter_mm=h.inner_diameter_mm * s, outer_diameter_mm=h.outer_diameter_mm * s)
        for h, s in zip(result.geometry.holes, scales or (1.0,) * len(result.geometry.holes), strict=True)
    )
    return replace(result.geometry, holes=holes)
