"""Notices go to a line of their own, never over the readings (issue: pop-ups covered the trail
and the tuning panel), and every key gets a visible answer (the first lock press showed nothing).

The pitch is built from the definition of the cent on A4 = 440 Hz (ISO 16:1975)."""

from __future__ import annotations

import asyncio

from bench.ui.notices import NoticeLine
from conftest import until

A4_HZ = 440.0  # ISO 16:1975


def test_a_lock_press_answers_on_the_notice_line_and_no_toast_covers_the_screen(make_app, engine):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=(80, 24)) as pilot:
            for _ in range(20):
                engine.show(A4_HZ * 2 ** (300 / 1200))  # C5 (definition of the cent)
            await until(pilot, lambda: app.reading is not None and app.reading.mapping is not None)
            await pilot.press("l")
            line = app.query_one("#notices", NoticeLine)
            await until(pilot, lambda: "locked to C5" in line.render().plain)
            toasts = list(app._notifications)  # Textual's pop-up notices  # noqa: SLF001
            region = line.region
            return line.render().plain, toasts, region

    text, toasts, region = asyncio.run(scenario())
    assert "target locked to C5" in text
    assert toasts == []  # nothing pops up over the readings
    assert region.height == 1 and region.width == 80  # a line of its own, the whole width


def test_newest_notice_comes_first_and_old_ones_go(make_app, engine):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=(120, 36)) as pilot:
            app.notify("first", timeout=1.0)
            app.notify("second", severity="warning", timeout=1.0)
            line = app.query_one("#notices", NoticeLine)
            both = line.render().plain
            await pilot.pause(1.4)
            await until(pilot, lambda: "first" not in line.render().plain)
            return both, line.render().plain

    both, later = asyncio.run(scenario())
    assert both.index("second") < both.index("first")
    assert "second" not in later


def test_a_calibrated_clock_is_shown_on_the_session_line(make_app, engine):
    # the clock's error taken out of every reading is said where the input is described
    from bench.ui.panels import SessionBar

    engine.clock_ppm = 42.5

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=(120, 36)) as pilot:
            await until(pilot, lambda: "clock" in app.query_one(SessionBar).render().plain)
            return app.query_one(SessionBar).render().plain

    assert "clock +42.5 ppm" in asyncio.run(scenario())


def test_a_held_note_that_gave_no_capture_says_why(make_app, engine):
    # a note too short to settle is named on the notice line with the reason (the maker
    # otherwise sees nothing happen)
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=(120, 36)) as pilot:
            for _ in range(12):  # 0.12 s of A4: a blip of a note
                engine.show(A4_HZ)
            for _ in range(30):
                engine.show(None)
            line = app.query_one("#notices", NoticeLine)
            await until(pilot, lambda: "not captured" in line.render().plain)
            return line.render().plain

    assert "A4" in asyncio.run(scenario())
