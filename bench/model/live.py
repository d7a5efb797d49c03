"""The model beside a live session: the captures so far against the instrument model, and a fit.

:func:`model_report` is what the live screen's model view shows after each capture: every
captured note and register, measured against the model's prediction (the geometry as given, a
bore 5 degC above the room: the fit's priors), the residual after refitting the model to all of
them (:func:`bench.model.fit.fit_model`), the fitted parameters with their uncertainty, and which
parameters the captures cannot pin down. It is pure and takes about a second: the screen runs it
in a worker thread, never on its own thread nor on the engine's.
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from dataclasses import dataclass

from bench.errors import BenchError
from bench.model.fit import FitParameter, fit_model, targets_from_captures
from bench.model.geometry import Geometry
from bench.tuning.notes import parse_note
from bench.workflow.captures import Capture

__all__ = ["ModelReport", "NoteRow", "model_report"]


@dataclass(frozen=True, slots=True)
class NoteRow:
    """One captured note and register against the model.

    Attributes
    ----------
    fingering : str
        The geometry's fingering that plays it.
    register : int >= 1
    measured_hz : float, Hz
        The latest capture of it.
    model_hz : float, Hz
        The model's prediction before the fit (geometry as given, the priors).
    before_cents : float, cents
        Measured minus model, before the fit.
    after_cents : float, cents
        Measured minus model after the fit (its residual).
    """

    fingering: str
    register: int
    measured_hz: float
    model_hz: float
    before_cents: float
    after_cents: float


@dataclass(frozen=True, slots=True)
class ModelReport:
    """What the model view shows.

    Attributes
    ----------
    title : str
        The geometry's title.
    captures : int
        Captures handed in.
    rows : tuple of NoteRow
        One per captured note and register the geometry has a fingering for.
    parameters : tuple of FitParameter
    left_out : tuple of str
        Parameters not fitted (fewer captures than parameters).
    not_used : tuple of str
        Captures not fitted: ``<note> <jump>`` for a note that broke into another register (not
        a measurement of it), ``<note> R<register> (no fingering)`` for one the geometry has no
        fingering for.
    elapsed_s : float, seconds
        Time the fit took.
    problem : str
        Why there is no fit ("" when there is one).
    """

    title: str
    captures: int
    rows: tuple[NoteRow, ...] = ()
    parameters: tuple[FitParameter, ...] = ()
    left_out: tuple[str, ...] = ()
    not_used: tuple[str, ...] = ()
    elapsed_s: float = 0.0
    problem: str = ""

    @property
    def unpinned(self) -> tuple[str, ...]:
        """Names of the parameters the captures do not pin down."""
        return tuple(p.name for p in self.parameters if not p.pinned)


def model_report(geometry: Geometry, captures: Sequence[Capture], default_rh: float = 60.0) -> ModelReport:
    """Measured against predicted for every captured note, and the model refitted to them.

    Parameters
    ----------
    geometry : Geometry
        The instrument (with fingerings named by their notes).
    captures : sequence of Capture
        The session's captures; the latest of each note and register is used
        (:func:`bench.model.fit.targets_from_captures`).
    default_rh : float, percent
        Humidity where a capture names none.

    Returns
    -------
    ModelReport
        With ``problem`` set (and no rows) when nothing can be fitted; never raises for bad
        captures or a fingering the model cannot play.
    """
    names = set()
    for f in geometry.fingerings:
        try:
            names.add(parse_note(f.name))
        except BenchError:
            continue
    not_used = tuple(sorted({f"{c.note} {c.jump}" if c.jump else f"{c.note} R{c.register} (no fingering)"
                             for c in captures if c.jump or c.midi not in names}))
    if not captures:
        return ModelReport(geometry.title, 0, problem="no capture yet: hold a note steady, or press g while it sounds")
    t0 = time.perf_counter()
    try:
        targets = targets_from_captures(captures, geometry, default_rh=default_rh)
        result = fit_model(geometry, targets)
    except BenchError as exc:
        return ModelReport(geometry.title, len(captures), not_used=not_used, problem=str(exc))
    elapsed_s = time.perf_counter() - t0
    rows = tuple(
        NoteRow(t.fingering, t.mode, t.measured_hz, t.measured_hz * 2.0 ** (-float(b) / 1200.0), float(b), float(a))
        for t, b, a in zip(result.targets, result.before_cents, result.after_cents, strict=True)
    )
    return ModelReport(geometry.title, len(captures), rows, result.parameters, result.left_out, not_used, elapsed_s)
