"""The two workflow views over the live screen: the tuning chart of the whole instrument and
the blowing curve of the note being played.

Both are plain screens the app installs once and switches to with a key; the app keeps
feeding them (they only show what it hands them) and the keys of the live screen keep working
on them: capture, automatic capture, label, hold, lock...
"""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.screen import Screen
from textual.widgets import Footer, Label

from bench.ui.blowing_plot import BlowingPlot
from bench.ui.capture_line import CaptureLine
from bench.ui.notices import NoticeLine
from bench.ui.tuning_map import TuningMap

CHART_PLOT_MIN_ROWS = 34
"""Terminal rows from which the chart view also draws the blowing plot under the map."""


class WorkflowView(Screen[None]):
    """Base of the workflow views: a capture line on top, a footer below; Esc goes back to
    the live view. On each showing, the app fills the view with the state of the moment."""

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "app.live_view", "live view", tooltip="Back to the live view")]

    def on_screen_resume(self) -> None:
        # imported here, not on top: bench.ui.app imports this module
        from bench.ui.app import BenchApp

        app = self.app
        if not isinstance(app, BenchApp):
            raise TypeError(f"a workflow view is filled by a BenchApp, not by {type(app).__name__}")
        app.fill_workflow_view(self)


class ChartScreen(WorkflowView):
    """The tuning chart: every note of the profile's compass per register, the latest capture
    of each against its target, unchecked notes hatched."""

    def compose(self) -> ComposeResult:
        yield CaptureLine(id="chart-captures", classes="capture-line")
        yield NoticeLine(classes="notice-line")
        yield Label("", id="chart-title")
        yield TuningMap(id="chart-map")
        yield Label("", id="chart-last")
        yield Label("", id="chart-blowing")
        yield BlowingPlot(id="chart-plot")
        yield Footer()

    def on_resize(self, event: object = None) -> None:
        """The blowing plot under the chart only where it has room (w shows it in full)."""
        plot = self.query_one("#chart-plot", BlowingPlot)
        plot.display = self.size.height >= CHART_PLOT_MIN_ROWS


class BlowingScreen(WorkflowView):
    """The blowing curve: cents against level of the held note, slope and break level."""

    def compose(self) -> ComposeResult:
        yield CaptureLine(id="blowing-captures", classes="capture-line")
        yield NoticeLine(classes="notice-line")
        yield BlowingPlot(id="blowing-plot")
        yield Footer()


__all__ = ["BlowingScreen", "ChartScreen", "WorkflowView"]
