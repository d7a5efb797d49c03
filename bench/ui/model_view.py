"""The model view over the live screen: the captures so far against the instrument model.

Left, every captured note and register: what was heard, what the model predicts (the geometry
as given), the difference in cents and what is left of it after the fit. Right, the fitted
parameters with their uncertainty. Under them, one line naming the parameters the captures
cannot pin down. The app computes the report (:func:`bench.model.live.model_report`) in a
worker thread after each capture and hands it here; this view only shows it.

Sharp and flat differ in colour (amber / blue, as on the live screen) and in sign.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from rich.style import Style
from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Horizontal
from textual.widgets import Footer, Label, Static

from bench.ui.capture_line import CaptureLine
from bench.ui.notices import NoticeLine
from bench.ui.workflow_screens import WorkflowView

if TYPE_CHECKING:  # the model (scipy's optimiser) loads in the worker, not with the screen
    from bench.model.live import ModelReport

__all__ = ["ModelScreen", "describe_parameter", "notes_text", "parameters_text", "status_text"]

_SHARP = Style(color="#ffae3b")
_FLAT = Style(color="#5aa9ff")
_CENTRED = Style(color="#7ee07e")
_DIM = Style(color="#6c747c")
_HEAD = Style(bold=True)
LEGEND = "model Hz: geometry as given, bore 5 degC over room; fit c: left after the fit"
"""What the columns mean (one line under the title)."""
WIDE_COLUMNS = 110
"""Terminal columns from which the notes table also draws each ``off c`` as a bar."""
ON_MODEL_CENTS = 3.0
"""A residual within this many cents is drawn as agreeing with the model."""


def describe_parameter(name: str) -> str:
    """A short reader's name of a fit parameter (:mod:`bench.model.fit`), with its unit.

    >>> describe_parameter("scale_h3"), describe_parameter("offset_r2_cents")
    ('h3 diameter \u00d7', 'R2 offset c')
    """
    if name == "end_correction_mm":
        return "window end corr. mm"
    if name == "warming_c":
        return "bore warming degC"
    if name.startswith("offset_r") and name.endswith("_cents"):
        return f"R{name[len('offset_r'):-len('_cents')]} offset c"
    if name.startswith("scale_"):
        return f"{name[len('scale_'):]} diameter \u00d7"
    return name


def _cents_style(cents: float) -> Style:
    if abs(cents) <= ON_MODEL_CENTS:
        return _CENTRED
    return _SHARP if cents > 0 else _FLAT


BAR_HALF_CELLS = 12
"""Cells either side of the centre of the wide view's bar of ``off c``."""
BAR_FULL_CENTS = 24.0
"""Cents at the end of the bar (2 c a cell); beyond, the bar ends in an arrow."""
NOTES_WIDTH = 39
"""Width of the notes table without the bar, characters."""


def _bar(cents: float) -> Text:
    """``off c`` as a bar from the centre: right for sharp, left for flat (2 c a cell)."""
    cells = min(round(abs(cents) / BAR_FULL_CENTS * BAR_HALF_CELLS), BAR_HALF_CELLS)
    over = abs(cents) > BAR_FULL_CENTS
    bar = "\u2588" * cells
    if over:
        bar = bar[:-1] + ("\u25b6" if cents > 0 else "\u25c0")
    style = _cents_style(cents)
    text = Text()
    if cents >= 0:
        text.append(" " * BAR_HALF_CELLS + "\u2502", _DIM)
        text.append(bar.ljust(BAR_HALF_CELLS), style)
    else:
        text.append(bar[::-1].rjust(BAR_HALF_CELLS), style)
        text.append("\u2502" + " " * BAR_HALF_CELLS, _DIM)
    return text


def notes_text(report: ModelReport | None, bars: bool = False) -> Text:
    """The table of captured notes: heard, model, difference, residual after the fit; with
    ``bars``, the difference also drawn as a bar (the wide view)."""
    text = Text(no_wrap=True, overflow="ellipsis")
    head = "note  R heard Hz model Hz  off c  fit c"
    if bars:
        head += f"  {'flat':<{BAR_HALF_CELLS}}\u2502{'sharp':>{BAR_HALF_CELLS}}"
    text.append(head + "\n", _HEAD)
    if report is None or not report.rows:
        text.append("no note to show yet", _DIM)
        return text
    for row in report.rows:
        text.append(f"{row.fingering:<5}{row.register:>2} {row.measured_hz:8.2f} {row.model_hz:8.2f} ")
        text.append(f"{row.before_cents:+6.1f}", _cents_style(row.before_cents))
        text.append(f" {row.after_cents:+6.1f}", _cents_style(row.after_cents))
        if bars:
            text.append("  ")
            text.append_text(_bar(row.before_cents))
        text.append("\n")
    text.rstrip()
    return text


def parameters_text(report: ModelReport | None) -> Text:
    """The fitted parameters: value, 1-sigma uncertainty, a mark where not pinned down."""
    text = Text(no_wrap=True, overflow="ellipsis")
    text.append("fitted              value      \u00b1\n", _HEAD)
    if report is None or not report.parameters:
        text.append("no fit yet", _DIM)
        return text
    for p in report.parameters:
        digits = 3 if p.unit == "" else 2
        style = _DIM if not p.pinned else Style()
        mark = " ?" if not p.pinned else ""
        text.append(f"{describe_parameter(p.name):<19} {p.value:6.{digits}f} {p.uncertainty:6.{digits}f}{mark}\n", style)
    text.rstrip()
    return text


def status_text(report: ModelReport | None, geometry_problem: str, busy: bool) -> tuple[str, str]:
    """The view's title line and its line under the tables (what cannot be pinned down)."""
    if geometry_problem:
        return "Model: no instrument geometry", geometry_problem
    if report is None:
        return "Model: fitting the captures\u2026" if busy else "Model", "capture some notes (g, or G for automatic capture)"
    refreshing = " \u00b7 refitting\u2026" if busy else ""
    if report.problem:
        return f"Model \u00b7 {report.title}{refreshing}", report.problem
    title = (
        f"Model \u00b7 {report.title} \u00b7 fitted to {len(report.rows)} notes in {report.elapsed_s:.1f} s{refreshing}"
    )
    parts = []
    if report.unpinned:
        names = ", ".join(describe_parameter(n) for n in report.unpinned)
        parts.append(f"? not pinned down by these captures (mostly the prior): {names}")
    else:
        parts.append("every fitted parameter is pinned down by these captures")
    if report.left_out:
        parts.append(f"not fitted (too few notes): {', '.join(describe_parameter(n) for n in report.left_out)}")
    if report.not_used:
        parts.append(f"not in the fit: {', '.join(report.not_used)}")
    return title, "\n".join(parts)


class ModelScreen(WorkflowView):
    """Captured notes against the instrument model, and the model fitted to them."""

    def compose(self) -> ComposeResult:
        yield CaptureLine(id="model-captures", classes="capture-line")
        yield NoticeLine(classes="notice-line")
        yield Label("Model", id="model-title")
        yield Label(LEGEND, id="model-legend")
        with Horizontal(id="model-tables"):
            yield Static(notes_text(None), id="model-notes")
            yield Static(parameters_text(None), id="model-params")
        yield Static("", id="model-status")
        yield Footer()

    _shown: tuple[ModelReport | None, str, bool] | None = None

    def on_resize(self, event: object = None) -> None:
        """Bars beside the notes only where there is room for them."""
        if self._shown is not None:
            self.show(*self._shown)

    def show(self, report: ModelReport | None, geometry_problem: str = "", busy: bool = False) -> None:
        """Put a report on the view (the app calls this; the view computes nothing)."""
        self._shown = (report, geometry_problem, busy)
        title, status = status_text(report, geometry_problem, busy)
        self.query_one("#model-title", Label).update(title)
        bars = self.size.width >= WIDE_COLUMNS
        notes = self.query_one("#model-notes", Static)
        notes.styles.width = NOTES_WIDTH + (2 + 2 * BAR_HALF_CELLS + 1 if bars else 0)
        notes.update(notes_text(report, bars))
        self.query_one("#model-params", Static).update(parameters_text(report))
        self.query_one("#model-status", Static).update(status)
