"""Advice: the fewest hole changes that bring the captured notes closest to their targets.

What is corrected is what was *measured*: each captured note's error is its measured frequency
against its target in the tuning in force (temperament, pitch standard, reference temperature;
:func:`bench.tuning.mapping.target_hz_at_air` at the capture's own room temperature). The model
supplies only the *change* a cut makes, ``1200 log2(f_after / f_before)`` of the model, so a
model that is off by a few cents in absolute pitch still gives good advice: the predicted error
after a cut is the measured error plus the model's change.

Three kinds of change to a tone hole, each bounded by the maker's limits:

* ``enlarge`` -- bore the hole wider (inner and outer diameter alike): raises the notes that vent
  through the hole (*common practice*). Cannot be undone.
* ``undercut`` -- widen the hole where it meets the bore only (the inner diameter): raises them
  too, less for the same amount. Cannot be undone.
* ``wax`` -- line the hole with wax, a smaller effective diameter: lowers them. The wax can be
  taken out again. At most :data:`WAX_MAX_FRACTION` of the diameter (a modelling choice).

The search (a greedy forward selection over bounded linear least squares):

1. The sensitivity of every captured note to every allowed change of every hole is the model's
   change for one step (``step_mm``, 0.1 mm by default), in cents per mm.
2. Starting with no change, each round adds the one (hole, kind) whose addition lowers the sum
   of squared errors (cents^2) of the captured notes most, the amounts of all chosen changes
   being solved together by bounded linear least squares (:func:`scipy.optimize.lsq_linear`;
   Stark & Parker, *Bounded-variable least-squares*, Computational Statistics 10, 1995). A hole
   is changed in one way only. The rounds stop when the next change's gain, the square root of
   the drop in the sum of squares (the error it takes away, in cents), is under
   ``min_gain_cents`` (1 c by default), or as soon as every captured note is within
   ``tolerance_cents`` (2 c by default) of its target: the smallest set of holes that does the
   job, and no change at all for an instrument already in tune.
3. Two Gauss-Newton rounds correct the amounts with sensitivities taken at the changed geometry
   (the response to a hole's diameter is not quite linear), then every amount is rounded to a
   whole number of steps and the final geometry is predicted by the full model.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Literal

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import lsq_linear

from bench.errors import SettingsError
from bench.model.acoustics import Air, air_at
from bench.model.fit import FitTarget
from bench.model.geometry import Geometry
from bench.model.instrument import (
    ModelOptions,
    minima_near,
    playing_frequencies,
    states_of,
)
from bench.tuning import TuningSettings
from bench.tuning.mapping import target_hz_at_air
from bench.tuning.notes import parse_note

__all__ = [
    "ALL_KINDS",
    "WAX_MAX_FRACTION",
    "Advice",
    "CutKind",
    "Limits",
    "SuggestedCut",
    "apply_cut",
    "format_advice",
    "measured_errors_cents",
    "suggest",
]

CutKind = Literal["enlarge", "undercut", "wax"]
ALL_KINDS: tuple[CutKind, ...] = ("enlarge", "undercut", "wax")
WAX_MAX_FRACTION = 0.25
"""Wax narrows a hole by at most this fraction of its diameter (a modelling choice: more wax
than that changes the hole's shape more than its diameter)."""
MAX_BORE_FRACTION = 0.9
"""A hole (or its undercut) is never widened beyond this fraction of the bore there."""
_BRACKET = 0.06  # relative half-width of the search for a changed mode around the unchanged one
_GAUSS_NEWTON_ROUNDS = 2


@dataclass(frozen=True, slots=True)
class Limits:
    """What the maker allows.

    Attributes
    ----------
    allow : tuple of CutKind
        Kinds of change allowed (``enlarge``, ``undercut``, ``wax``).
    max_diameter_mm : float or None, mm
        No hole (nor its undercut) gets wider than this; None: up to 0.9 of the bore.
    step_mm : float > 0, mm
        One step of a cut ("take 0.1 mm, play again").
    min_gain_cents : float >= 0, cents
        A change is proposed only if it takes away at least this much error: the square root of
        the drop in the sum of squared errors of the captured notes.
    tolerance_cents : float >= 0, cents
        A note this close to its target is in tune; nothing more is proposed once all are.
    """

    allow: tuple[CutKind, ...] = ("enlarge",)
    max_diameter_mm: float | None = None
    step_mm: float = 0.1
    min_gain_cents: float = 1.0
    tolerance_cents: float = 2.0

    def __post_init__(self) -> None:
        if not self.allow:
            raise SettingsError("no kind of change allowed; give --allow enlarge, undercut or wax")
        if not (math.isfinite(self.step_mm) and 0.01 <= self.step_mm <= 2.0):
            raise SettingsError(f"--step-mm {self.step_mm:g} is out of range; give 0.01 to 2 mm (e.g. 0.1)")
        if self.max_diameter_mm is not None and not (math.isfinite(self.max_diameter_mm) and 0.5 <= self.max_diameter_mm <= 100.0):
            raise SettingsError(f"--max-diameter {self.max_diameter_mm:g} mm is out of range; give 0.5 to 100 mm")


@dataclass(frozen=True, slots=True)
class SuggestedCut:
    """One proposed change to one hole.

    Attributes
    ----------
    label : str
        The hole.
    kind : CutKind
    from_mm, to_mm : float, mm
        The diameter it changes (outer for ``enlarge`` and ``wax``, inner for ``undercut``).
    steps : int >= 1
        Number of steps of ``step_mm``.
    step_mm : float, mm
    reversible : bool
        True for wax only: wood taken away cannot be put back.
    """

    label: str
    kind: CutKind
    from_mm: float
    to_mm: float
    steps: int
    step_mm: float
    reversible: bool


@dataclass(frozen=True, slots=True)
class Advice:
    """The proposal and what it is predicted to do.

    Attributes
    ----------
    cuts : tuple of SuggestedCut
        Largest effect first; empty when no change gains ``min_gain_cents``.
    notes : tuple of str
        ``<fingering>/<mode>`` of each captured note.
    before_cents, after_cents : float ndarray, cents
        Measured error of each captured note against its target, and the error predicted after
        all the cuts.
    step_cents : tuple of float ndarray
        For each cut, the predicted errors before it (row 0) and after each of its steps (rows
        1..steps; columns: notes), the earlier cuts done; linear between the model's end points.
    geometry : Geometry
        The geometry after all the cuts.
    """

    cuts: tuple[SuggestedCut, ...]
    notes: tuple[str, ...]
    before_cents: NDArray[np.float64]
    after_cents: NDArray[np.float64]
    step_cents: tuple[NDArray[np.float64], ...]
    geometry: Geometry


def apply_cut(geometry: Geometry, index: int, kind: CutKind, amount_mm: float) -> Geometry:
    """The geometry with hole ``index`` changed by ``amount_mm`` (>= 0) of the given kind.

    ``enlarge`` adds to both diameters, ``undercut`` to the inner one, ``wax`` takes from both.
    """
    hole = geometry.holes[index]
    if kind == "enlarge":
        new = replace(hole, inner_diameter_mm=hole.inner_diameter_mm + amount_mm,
                      outer_diameter_mm=hole.outer_diameter_mm + amount_mm)
    elif kind == "undercut":
        new = replace(hole, inner_diameter_mm=hole.inner_diameter_mm + amount_mm)
    else:
        new = replace(hole, inner_diameter_mm=hole.inner_diameter_mm - amount_mm,
                      outer_diameter_mm=hole.outer_diameter_mm - amount_mm)
    return replace(geometry, holes=geometry.holes[:index] + (new,) + geometry.holes[index + 1:])


def _bound_mm(geometry: Geometry, index: int, kind: CutKind, limits: Limits) -> float:
    """Largest amount of a change the limits allow, mm (0 when none)."""
    hole = geometry.holes[index]
    if kind == "wax":
        return WAX_MAX_FRACTION * hole.outer_diameter_mm
    widest = MAX_BORE_FRACTION * geometry.diameter_at(hole.position_mm)
    if limits.max_diameter_mm is not None:
        widest = min(widest, limits.max_diameter_mm)
    if kind == "enlarge":
        return max(widest - max(hole.inner_diameter_mm, hole.outer_diameter_mm), 0.0)
    return max(widest - hole.inner_diameter_mm, 0.0)


def measured_errors_cents(targets: Sequence[FitTarget], settings: TuningSettings) -> NDArray[np.float64]:
    """Measured error of each captured note against its target, cents.

    The target is the note's frequency in ``settings`` (temperament, tonic, pitch standard) for
    an instrument in tune at ``settings.ref_temp_c``, as heard in the capture's room air
    (:func:`bench.tuning.mapping.target_hz_at_air`).

    Raises
    ------
    SettingsError
        A fingering not named by a note.
    """
    out = np.empty(len(targets))
    for i, t in enumerate(targets):
        try:
            midi = parse_note(t.fingering)
        except SettingsError:
            raise SettingsError(f"fingering {t.fingering!r} is not named by a note, so it has no target; name it after its note") from None
        air_settings = replace(settings, temp_c=min(max(t.temp_c, -10.0), 45.0))
        out[i] = 1200.0 * math.log2(t.measured_hz / target_hz_at_air(midi, air_settings))
    return out


class _Evaluator:
    """The model's frequency of each captured note, for a changed geometry."""

    def __init__(self, geometry: Geometry, targets: Sequence[FitTarget], air: Air, options: ModelOptions) -> None:
        self.patterns = [geometry.fingering(t.fingering).holes for t in targets]
        self.states = states_of(self.patterns) if geometry.holes else np.zeros((len(targets), 0), dtype=np.int8)
        self.modes = np.array([t.mode for t in targets])
        self.air = air
        self.options = options
        res = playing_frequencies(geometry, self.patterns, air, int(self.modes.max()), options)
        self.base_hz = res.freq_hz[np.arange(len(targets)), self.modes - 1]
        if not np.all(np.isfinite(self.base_hz)):
            bad = targets[int(np.flatnonzero(~np.isfinite(self.base_hz))[0])]
            raise SettingsError(f"the model finds no mode {bad.mode} for fingering {bad.fingering}; check the geometry")

    def change_cents(self, changed: Geometry) -> NDArray[np.float64]:
        g = self.base_hz[:, None]
        found = minima_near(changed, self.states, g, _BRACKET, self.air, self.options)
        out: NDArray[np.float64] = 1200.0 * np.log2(found[:, 0] / self.base_hz)
        return out


def _with_cuts(geometry: Geometry, cuts: Sequence[tuple[int, CutKind]], amounts: NDArray[np.float64]) -> Geometry:
    for (i, kind), a in zip(cuts, amounts, strict=True):
        if a > 0:
            geometry = apply_cut(geometry, i, kind, float(a))
    return geometry


def _ss(x: NDArray[np.float64]) -> float:
    return float(np.sum(x**2))


def _rms(x: NDArray[np.float64]) -> float:
    return float(np.sqrt(np.mean(x**2))) if x.size else 0.0


def suggest(
    geometry: Geometry,
    targets: Sequence[FitTarget],
    settings: TuningSettings,
    limits: Limits = Limits(),
    warming_c: float = 5.0,
    options: ModelOptions | None = None,
) -> Advice:
    """The smallest set of hole changes within ``limits`` that brings the captured notes closest
    to their targets (method: module docstring).

    Parameters
    ----------
    geometry : Geometry
        The instrument as it is (or as fitted: effective hole diameters).
    targets : sequence of FitTarget
        The captured notes (:func:`bench.model.fit.targets_from_captures`).
    settings : TuningSettings
        The targets in force.
    limits : Limits
    warming_c : float, degC
        How much warmer the bore is than the captures' room (the model's changes hardly depend
        on it).
    options : ModelOptions, optional

    Returns
    -------
    Advice

    Raises
    ------
    SettingsError
        No targets, or a captured fingering the model cannot follow.
    """
    if not targets:
        raise SettingsError("no captured notes to correct; capture some notes of the instrument first")
    options = options or ModelOptions()
    errors = measured_errors_cents(targets, settings)
    room_c = float(np.median([t.temp_c for t in targets]))
    rh = float(np.median([t.rh_percent for t in targets]))
    air = air_at(min(max(room_c + warming_c, -10.0), 45.0), rh)
    model = _Evaluator(geometry, targets, air, options)
    notes = tuple(f"{t.fingering}/{t.mode}" for t in targets)

    candidates: list[tuple[int, CutKind]] = []
    upper: list[float] = []
    for i in range(len(geometry.holes)):
        if all(p[i] == "x" for p in model.patterns):
            continue  # closed in every captured note: the captures say nothing about it
        for kind in limits.allow:
            bound = _bound_mm(geometry, i, kind, limits)
            if bound >= limits.step_mm:
                candidates.append((i, kind))
                upper.append(bound)
    step = limits.step_mm
    sens = np.zeros((len(targets), len(candidates)))
    for j, (i, kind) in enumerate(candidates):
        sens[:, j] = model.change_cents(apply_cut(geometry, i, kind, step)) / step

    chosen: list[int] = []
    amounts = np.zeros(0)
    best_ss = _ss(errors)
    while True:
        now = errors + sens[:, chosen] @ amounts
        if float(np.max(np.abs(now))) <= limits.tolerance_cents:
            break  # every captured note is in tune: stop here
        best: tuple[float, int, NDArray[np.float64]] | None = None
        used = {candidates[j][0] for j in chosen}
        for j in range(len(candidates)):
            if candidates[j][0] in used:
                continue
            cols = [*chosen, j]
            sol = lsq_linear(sens[:, cols], -errors, bounds=(np.zeros(len(cols)), np.array([upper[c] for c in cols])))
            ss = _ss(errors + sens[:, cols] @ sol.x)
            if best is None or ss < best[0]:
                best = (ss, j, np.asarray(sol.x, dtype=np.float64))
        if best is None or math.sqrt(max(best_ss - best[0], 0.0)) < limits.min_gain_cents:
            break
        best_ss, j, amounts = best
        chosen.append(j)

    cuts = [candidates[j] for j in chosen]
    bounds_hi = np.array([upper[j] for j in chosen])
    for _ in range(_GAUSS_NEWTON_ROUNDS if cuts else 0):
        current = _with_cuts(geometry, cuts, amounts)
        pred = errors + model.change_cents(current)
        local = np.zeros((len(targets), len(cuts)))
        for c, (i, kind) in enumerate(cuts):
            local[:, c] = (model.change_cents(apply_cut(current, i, kind, step)) - (pred - errors)) / step
        lo_delta = -amounts
        hi_delta = bounds_hi - amounts
        sol = lsq_linear(local, -pred, bounds=(lo_delta, np.maximum(hi_delta, lo_delta + 1e-12)))
        amounts = np.clip(amounts + sol.x, 0.0, bounds_hi)
    steps = np.floor(amounts / step + 0.5).astype(int)
    steps = np.minimum(steps, np.floor(bounds_hi / step + 1e-9).astype(int)) if cuts else steps
    keep = [c for c in range(len(cuts)) if steps[c] > 0]
    cuts = [cuts[c] for c in keep]
    steps = steps[keep]
    amounts = steps * step
    sens_kept = sens[:, [chosen[c] for c in keep]]
    # largest effect first
    order = sorted(range(len(cuts)), key=lambda c: -float(np.sum((sens_kept[:, c] * amounts[c]) ** 2)))
    cuts = [cuts[c] for c in order]
    steps = steps[order]
    amounts = amounts[order]
    final = _with_cuts(geometry, cuts, amounts)
    after = errors + (model.change_cents(final) if cuts else 0.0)

    out_cuts: list[SuggestedCut] = []
    step_cents: list[NDArray[np.float64]] = []
    done = geometry
    start = errors.copy()
    for (i, kind), n in zip(cuts, steps, strict=True):
        hole = geometry.holes[i]
        base_mm = hole.inner_diameter_mm if kind == "undercut" else hole.outer_diameter_mm
        sign = -1.0 if kind == "wax" else 1.0
        out_cuts.append(SuggestedCut(hole.label, kind, base_mm, base_mm + sign * n * step, int(n), step,
                                     reversible=kind == "wax"))
        done = apply_cut(done, i, kind, float(n) * step)
        end = errors + model.change_cents(done)
        frac = np.arange(0, int(n) + 1)[:, None] / float(n)
        step_cents.append(start[None, :] + frac * (end - start)[None, :])
        start = end
    return Advice(tuple(out_cuts), notes, errors, np.asarray(after, dtype=np.float64), tuple(step_cents), final)


_VERB = {"enlarge": "enlarge", "undercut": "undercut (widen at the bore)", "wax": "wax (narrow)"}


def format_advice(advice: Advice) -> str:
    """Text report: each cut with its steps and whether it can be undone, then every note."""
    lines: list[str] = []
    if not advice.cuts:
        lines.append("no change proposed: every note is within the tolerance, or no allowed change takes away enough error")
    for n, cut in enumerate(advice.cuts, 1):
        what = "outer" if cut.kind != "undercut" else "inner"
        undo = "can be undone (the wax comes out)" if cut.reversible else "CANNOT be undone"
        lines.append(
            f"{n}. hole {cut.label}: {_VERB[cut.kind]} from {cut.from_mm:.2f} to {cut.to_mm:.2f} mm ({what} diameter); {undo}"
        )
        action = "add" if cut.kind == "wax" else "take"
        cents = advice.step_cents[n - 1]
        moved = np.argsort(-np.abs(cents[-1] - cents[0]))[:3]
        for s in range(cut.steps):
            shown = ", ".join(f"{advice.notes[k]} {cents[s + 1, k]:+.1f} c" for k in moved)
            lines.append(f"   step {s + 1}/{cut.steps}: {action} {cut.step_mm:g} mm, play again (expect {shown})")
    lines.append("")
    lines.append(f"{'note/mode':<12} {'now c':>8} {'after c':>8}")
    for name, b, a in zip(advice.notes, advice.before_cents, advice.after_cents, strict=True):
        lines.append(f"{name:<12} {b:+8.1f} {a:+8.1f}")
    lines.append(f"rms: {_rms(advice.before_cents):.1f} c now, {_rms(advice.after_cents):.1f} c after "
                 f"({len(advice.notes)} notes)")
    return "\n".join(lines) + "\n"
