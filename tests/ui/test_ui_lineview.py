"""The views' repaint saving: a change the view cannot show is not drawn again, a change it
can show always is (figure, colour class, size)."""

from __future__ import annotations

import asyncio
from typing import ClassVar

from rich.text import Text
from textual.app import App, ComposeResult
from textual.reactive import reactive

from bench.ui.lineview import LineView


class Figure(LineView):
    """Shows ``value`` in whole units."""

    DEFAULT_CSS = "Figure { height: 1; color: #ffffff; } Figure.-warm { color: #ff8800; }"
    value: reactive[float] = reactive(0.0)

    def __init__(self) -> None:
        super().__init__()
        self.builds = 0

    def render(self) -> Text:
        return Text(f"{round(self.value):d} units")

    def _build_strips(self, width):
        self.builds += 1
        return super()._build_strips(width)


class FigureApp(App[None]):
    def compose(self) -> ComposeResult:
        yield Figure()


def test_only_changes_the_view_can_show_are_drawn():
    async def scenario():
        app = FigureApp()
        async with app.run_test(size=(30, 3)) as pilot:
            fig = app.query_one(Figure)
            fig.value = 1.2
            await pilot.pause(0.1)
            shown_first = fig.render_line(0).text
            builds = fig.builds
            fig.value = 1.4  # still "1 units"
            await pilot.pause(0.1)
            unchanged = fig.builds - builds
            fig.value = 2.6
            await pilot.pause(0.1)
            shown_changed = fig.render_line(0).text
            builds = fig.builds
            colour_before = fig.render_line(0)._segments[0].style.color
            fig.add_class("-warm")  # same text, another colour: drawn again
            await pilot.pause(0.1)
            restyled = fig.builds - builds
            colour_after = fig.render_line(0)._segments[0].style.color
            return shown_first, unchanged, shown_changed, restyled, colour_before, colour_after

    first, unchanged, changed, restyled, before, after = asyncio.run(scenario())
    assert first.startswith("1 units")
    assert unchanged == 0
    assert changed.startswith("3 units")
    assert restyled >= 1 and before != after


class Marked(LineView):
    """One mark drawn in the style of a component class."""

    COMPONENT_CLASSES: ClassVar[set[str]] = {"marked--mark"}
    DEFAULT_CSS = """
    Marked { height: 1; }
    Marked > .marked--mark { color: #00ff00; }
    Marked.-alarm > .marked--mark { color: #ff0000; }
    """

    def render(self) -> Text:
        return Text.assemble(("mark", self.get_component_rich_style("marked--mark")))


class MarkedApp(App[None]):
    def compose(self) -> ComposeResult:
        yield Marked()


def test_component_styles_survive_a_style_update():
    # Textual keeps a widget's component-class styles in DOMNode._component_styles and fills it
    # after notify_style_update() (textual.css.stylesheet.Stylesheet.apply); the view's own cache
    # of Rich styles must not share that attribute, or a style update empties Textual's entries
    # and get_component_styles() raises KeyError (Textual API: DOMNode.get_component_styles).
    async def scenario():
        app = MarkedApp()
        async with app.run_test(size=(20, 3)) as pilot:
            view = app.query_one(Marked)
            await pilot.pause(0.1)
            green = view.render_line(0)._segments[0].style.color
            view.notify_style_update()
            kept = view.get_component_styles("marked--mark").color
            view.add_class("-alarm")
            await pilot.pause(0.1)
            red = view.render_line(0)._segments[0].style.color
            return green, kept, red

    green, kept, red = asyncio.run(scenario())
    assert green.triplet == (0, 255, 0) and red.triplet == (255, 0, 0)  # the colours of DEFAULT_CSS above
    assert kept.rgb == (0, 255, 0)
