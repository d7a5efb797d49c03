"""The model view (key m): captured notes against the instrument model, and the refitted fit.

The notes played are the demo's: the built-in Wren alto with h3 0.3 mm too small and h5 0.4 mm
too large, each pitch from the model (bench.model.demo) -- truth known by construction. The
view must show every captured note against the model, the fit's residuals near 0, the fitted
parameters (h3 acting smaller, h5 larger), a line naming what the captures cannot pin down, and
it must do the fit off the screen's thread without holding the screen.
"""

from __future__ import annotations

import asyncio
import threading
import time

from conftest import until
from ui_fakes import FakeEngine

from bench.model.demo import demo_notes
from bench.tuning import TuningSettings
from bench.ui.app import MODEL_DEBOUNCE_S
from bench.ui.model_view import ModelScreen

NOTES = ["F4", "G4", "A4", "Bb4", "C5", "D5", "E5", "F#5"]  # the notes the alto's holes were placed for


def _engine() -> FakeEngine:
    return FakeEngine(TuningSettings(temp_c=20.0, ref_temp_c=20.0, rh_percent=60.0))


def _play(engine: FakeEngine, names: list[str]) -> None:
    demo = {n.name: n.freq_hz for n in demo_notes()}
    for name in names:
        for _ in range(100):  # one second of a steady note: the automatic capture takes it
            engine.show(demo[name])
        for _ in range(20):
            engine.show(None)


def _text(app, selector: str) -> str:
    return str(app.screen.query_one(selector).render())


def test_the_model_view_shows_the_captures_against_the_model_and_the_fit(make_app, monkeypatch):
    from bench.model import live

    threads: list[threading.Thread] = []
    real = live.model_report

    def recorded(*args, **kwargs):
        threads.append(threading.current_thread())
        return real(*args, **kwargs)

    monkeypatch.setattr(live, "model_report", recorded)
    engine = _engine()

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=(80, 24)) as pilot:
            _play(engine, NOTES)
            await until(pilot, lambda: len(app.workflow.captures()) == len(NOTES))
            await pilot.press("m")
            await until(pilot, lambda: isinstance(app.screen, ModelScreen))
            await until(pilot, lambda: app.model_report is not None and len(app.model_report.rows) == len(NOTES), 30.0)
            await pilot.pause(0.1)
            shown = {k: _text(app, k) for k in ("#model-title", "#model-notes", "#model-params", "#model-status")}
            regions = [app.screen.query_one(k).region for k in ("#model-notes", "#model-params", "#model-status")]
            await pilot.press("m")  # the same key again: back to the live view
            await until(pilot, lambda: not isinstance(app.screen, ModelScreen))
            return app.model_report, shown, regions

    report, shown, regions = asyncio.run(scenario())
    assert threads and all(t is not threading.main_thread() for t in threads)  # a worker did the fit
    rows = {r.fingering: r for r in report.rows}
    assert set(rows) == set(NOTES)
    assert max(abs(r.after_cents) for r in report.rows) < 1.0  # the fit explains the notes
    assert rows["D5"].before_cents < -5.0 and rows["Bb4"].before_cents > 5.0  # the two holes, before
    params = {p.name: p for p in report.parameters}
    assert params["scale_h3"].value < 0.97 and params["scale_h5"].value > 1.03
    # what the screen says
    assert "Wren alto" in shown["#model-title"] and "fitted to 8 notes" in shown["#model-title"]
    for name in NOTES:
        assert name in shown["#model-notes"]
    assert f"{rows['D5'].measured_hz:8.2f}" in shown["#model-notes"] and f"{rows['D5'].model_hz:8.2f}" in shown["#model-notes"]
    assert "h3 diameter" in shown["#model-params"] and f"{params['scale_h3'].uncertainty:6.3f}" in shown["#model-params"]
    unpinned = [p for p in report.parameters if not p.pinned]
    assert unpinned  # eight first-register notes cannot tell the register offset from the bore's warmth
    assert "not pinned down" in shown["#model-status"]
    assert "R1 offset c" in shown["#model-status"]
    # at 80 x 24 both tables and the status line are on the screen, above the footer
    assert all(r.right <= 80 and r.bottom <= 23 for r in regions)
    assert max(len(line) for line in shown["#model-params"].splitlines()) <= regions[1].width


def test_the_fit_never_holds_the_screen_and_captures_in_a_run_give_one_fit(make_app, monkeypatch):
    from bench.model import live

    calls: list[int] = []
    real = live.model_report

    def slow(geometry, captures, **kwargs):
        calls.append(len(captures))
        time.sleep(1.5)  # a slow machine: the screen must keep polling meanwhile
        return real(geometry, captures, **kwargs)

    monkeypatch.setattr(live, "model_report", slow)
    engine = _engine()

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=(120, 40)) as pilot:
            await pilot.press("m")
            await until(pilot, lambda: isinstance(app.screen, ModelScreen))
            await pilot.pause(0.3)
            first = _text(app, "#model-status")
            _play(engine, NOTES[:3])  # three captures in a row, within the debounce time
            await until(pilot, lambda: len(app.workflow.captures()) == 3)
            await until(pilot, lambda: calls)
            polls = app._polls
            t0 = time.monotonic()
            await until(pilot, lambda: time.monotonic() - t0 > 0.8)
            polls_during_fit, busy_title = app._polls - polls, _text(app, "#model-title")
            await until(pilot, lambda: app.model_report is not None and len(app.model_report.rows) == 3, 30.0)
            await pilot.pause(2 * MODEL_DEBOUNCE_S)
            return first, polls_during_fit, busy_title, list(calls)

    first, polls_during_fit, busy_title, made = asyncio.run(scenario())
    assert "capture some notes" in first  # nothing captured yet, nothing fitted
    assert polls_during_fit >= 10  # ~0.8 s at 30 polls a second, less on a loaded machine
    assert "refitting" in busy_title or "fitting" in busy_title
    assert made[-1] == 3 and len(made) <= 2  # the run of captures was fitted once (twice if one slipped in)


def test_a_profile_without_geometry_says_how_to_give_one(make_app):
    engine = _engine()

    async def scenario():
        app = make_app(engine, profile="tenor")
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.press("m")
            await until(pilot, lambda: isinstance(app.screen, ModelScreen))
            await pilot.pause(0.1)
            return _text(app, "#model-status")

    assert "--geometry FILE" in asyncio.run(scenario())


def test_a_geometry_given_is_the_one_the_view_fits(make_app):
    from bench.model.geometry import builtin_geometry

    engine = _engine()

    async def scenario():
        app = make_app(engine, profile="tenor", geometry=builtin_geometry("wren-alto"))
        async with app.run_test(size=(80, 24)) as pilot:
            _play(engine, ["F4", "G4"])
            await until(pilot, lambda: len(app.workflow.captures()) == 2)
            await pilot.press("m")
            await until(pilot, lambda: app.model_report is not None, 30.0)
            await pilot.pause(0.1)
            return _text(app, "#model-title"), _text(app, "#model-status")

    title, status = asyncio.run(scenario())
    assert "Wren alto" in title and "fitted to 2 notes" in title
    assert "--geometry" not in status
