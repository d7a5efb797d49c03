"""Predicted playing frequencies of every fingering in every register, as a table and a CSV.

A fingering named by a note (``F4``, ``G#5``) sounds that note in its ``register`` (mode); its
other modes aim at the harmonics of the same fundamental, so the target of mode k is
``f_note * k / register`` at equal temperament from ``a4_hz``. A fingering with another name
(``closed``) has no target.
"""

from __future__ import annotations

import contextlib
import csv
import io
import math
import os
import tempfile
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

from bench.errors import SettingsError
from bench.model.acoustics import Air
from bench.model.geometry import Geometry
from bench.model.instrument import ModelOptions, playing_frequencies
from bench.tuning.notes import note_name, parse_note

__all__ = [
    "PREDICTION_COLUMNS",
    "Prediction",
    "format_predictions",
    "predict",
    "target_hz_of",
    "write_csv_new",
    "write_predictions_csv",
    "write_text_new",
]

PREDICTION_COLUMNS = (
    "fingering", "holes", "register", "predicted_hz", "note", "note_cents",
    "target_note", "target_hz", "cents",
)  # fmt: skip
"""Columns of a predictions CSV: fingering name, hole letters, register (mode), predicted
frequency (Hz), nearest equal-tempered note and the prediction's cents from it, the target note
and frequency (Hz) when the fingering is named by a note, and the cents from the target."""


@dataclass(frozen=True, slots=True)
class Prediction:
    """One fingering in one register.

    Attributes
    ----------
    fingering, holes : str
    register : int >= 1
        Mode number (1 first register, 2 octave, 3 twelfth).
    predicted_hz : float, Hz
        NaN when the model found no such mode below its search limit.
    note : str
        Nearest equal-tempered note ("" when not found).
    note_cents : float, cents
        Prediction minus that note.
    target_note : str
        The note this fingering should sound in this mode ("" when it has none).
    target_hz : float | None, Hz
    cents : float | None, cents
        Prediction minus target.
    """

    fingering: str
    holes: str
    register: int
    predicted_hz: float
    note: str
    note_cents: float
    target_note: str
    target_hz: float | None
    cents: float | None


def target_hz_of(name: str, register: int, mode: int, a4_hz: float = 440.0) -> float | None:
    """Target of mode ``mode`` of a fingering that sounds note ``name`` in mode ``register``, Hz.

    >>> round(target_hz_of("A4", 1, 2), 3)
    880.0
    >>> target_hz_of("closed", 1, 1) is None
    True
    """
    try:
        midi = parse_note(name)
    except SettingsError:
        return None
    return float(a4_hz * 2.0 ** ((midi - 69) / 12)) * mode / register  # 12-TET (ISO 16 on A4)


def _nearest(freq_hz: float, a4_hz: float) -> tuple[str, float]:
    """Nearest note and the cents from it."""
    semis = 12.0 * math.log2(freq_hz / a4_hz) + 69.0
    midi = round(semis)
    return note_name(midi), 100.0 * (semis - midi)


def predict(
    geometry: Geometry,
    air: Air,
    registers: int = 3,
    options: ModelOptions | None = None,
    a4_hz: float = 440.0,
    fingerings: Sequence[str] | None = None,
) -> list[Prediction]:
    """Predict every fingering of a geometry in registers 1..``registers``.

    Parameters
    ----------
    geometry : Geometry
    air : Air
        Air in the bore (its temperature and humidity).
    registers : int >= 1
    options : ModelOptions, optional
        Default :class:`ModelOptions()`.
    a4_hz : float > 0, Hz
        Pitch standard of the targets.
    fingerings : sequence of str, optional
        Names to predict; default all.

    Returns
    -------
    list of Prediction
        Fingering by fingering (file order), register by register.

    Raises
    ------
    GeometryError
        A named fingering the geometry does not have.
    """
    chosen = list(geometry.fingerings) if fingerings is None else [geometry.fingering(n) for n in fingerings]
    if not chosen:
        return []
    res = playing_frequencies(geometry, [f.holes for f in chosen], air, registers, options or ModelOptions())
    out: list[Prediction] = []
    for i, fing in enumerate(chosen):
        for k in range(registers):
            f_hz = float(res.freq_hz[i, k])
            target = target_hz_of(fing.name, fing.register, k + 1, a4_hz)
            if math.isfinite(f_hz):
                note, note_cents = _nearest(f_hz, a4_hz)
            else:
                note, note_cents = "", math.nan
            target_note = _nearest(target, a4_hz)[0] if target is not None else ""
            cents = 1200.0 * math.log2(f_hz / target) if target is not None and math.isfinite(f_hz) else None
            out.append(Prediction(fing.name, fing.holes, k + 1, f_hz, note, note_cents, target_note, target, cents))
    return out


def format_predictions(preds: Sequence[Prediction]) -> str:
    """A text table of predictions, one line per fingering and register."""
    lines = [f"{'fingering':<10} {'holes':<10} {'reg':>3} {'predicted Hz':>12} {'note':>9}  {'target':<7} {'cents':>7}"]
    for p in preds:
        hz = f"{p.predicted_hz:12.2f}" if math.isfinite(p.predicted_hz) else f"{'not found':>12}"
        near = f"{p.note}{p.note_cents:+.0f}" if p.note else ""
        cents = f"{p.cents:+7.1f}" if p.cents is not None else f"{'':>7}"
        lines.append(f"{p.fingering:<10} {p.holes:<10} {p.register:>3} {hz} {near:>9}  {p.target_note:<7} {cents}")
    return "\n".join(lines) + "\n"


def _cell(value: float | None, digits: int) -> str:
    if value is None or not math.isfinite(value):
        return ""
    return f"{value:.{digits}f}"


def write_text_new(path: str | Path, text: str, overwrite: bool = False) -> Path:
    """Write a text file through a temporary file in the same folder, then move it into place.

    Without ``overwrite`` an existing file is never replaced (the final step is a hard link,
    which fails if the name was taken meanwhile).

    Raises
    ------
    SettingsError
        The file exists and ``overwrite`` is False, or it cannot be written.
    """
    out = Path(path)
    if out.exists() and not overwrite:
        raise SettingsError(f"{out} exists; give --overwrite to replace it or choose another file name")
    folder = out.parent if str(out.parent) else Path(".")
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{out.name}.", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise SettingsError(f"cannot write {out}: {exc.strerror or exc}; choose a folder you can write to") from None
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as f:
            f.write(text)
        if overwrite:
            os.replace(tmp_name, out)
        else:
            os.link(tmp_name, out)
            os.unlink(tmp_name)
    except FileExistsError:
        with contextlib.suppress(OSError):
            os.unlink(tmp_name)
        raise SettingsError(f"{out} exists; give --overwrite to replace it or choose another file name") from None
    except OSError as exc:
        with contextlib.suppress(OSError):
            os.unlink(tmp_name)
        raise SettingsError(f"cannot write {out}: {exc.strerror or exc}") from None
    return out


def write_csv_new(path: str | Path, header: Sequence[str], rows: Sequence[Sequence[str]], overwrite: bool = False) -> Path:
    """Write a CSV with :func:`write_text_new` (never replacing a file unasked)."""
    buf = io.StringIO(newline="")
    writer = csv.writer(buf)
    writer.writerow(header)
    writer.writerows(rows)
    return write_text_new(path, buf.getvalue(), overwrite)


def write_predictions_csv(preds: Sequence[Prediction], path: str | Path, overwrite: bool = False) -> Path:
    """Write predictions with :data:`PREDICTION_COLUMNS` (see :func:`write_csv_new`)."""
    rows = [
        [p.fingering, p.holes, str(p.register), _cell(p.predicted_hz, 3), p.note, _cell(p.note_cents, 2),
         p.target_note, _cell(p.target_hz, 3), _cell(p.cents, 2)]
        for p in preds
    ]
    return write_csv_new(path, PREDICTION_COLUMNS, rows, overwrite)
