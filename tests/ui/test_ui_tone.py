"""The reference tone's keys on the screen: o sounds the target, O its voice, , and . its level;
the session line shows note, Hz and level; no output is one line, not a crash.

Outside references: F4 = 349.2282 Hz and A4 = 440 Hz in equal temperament at A4 = 440 Hz
(/work/shared/REFERENCES.md section 1, ISO 16:1975); 3 dB steps (the decibel's definition).
"""

from __future__ import annotations

import asyncio

from bench.ui.notices import NoticeLine
from bench.ui.panels import SessionBar
from conftest import until
from ui_fakes import FakeOutput

F4_HZ = 349.2282  # REFERENCES section 1


def run(coro):
    return asyncio.run(coro)


def _line(app) -> str:
    return app.query_one(SessionBar).render().plain


def _notices(app) -> str:
    return app.query_one(NoticeLine).render().plain


def test_tone_keys_sound_the_locked_note_and_the_session_line_shows_it(engine, make_app):
    out = FakeOutput()

    async def scenario():
        app = make_app(engine, tone_opener=out)
        async with app.run_test(size=(100, 30)) as pilot:
            app.lock_target(65)  # F4
            await pilot.press("o")
            await until(pilot, lambda: "tone F4 349.23 Hz -18 dB" in _line(app))
            assert out.generator is not None and abs(out.generator.freq_hz - F4_HZ) < 5e-5
            assert any("reference tone ON: F4 349.23 Hz" in m for m, _ in app.notes)
            await pilot.press("full_stop")
            await until(pilot, lambda: "-15 dB" in _line(app))
            await pilot.press("comma", "comma")
            await until(pilot, lambda: "-21 dB" in _line(app))
            assert out.generator.level_dbfs == -21.0
            await pilot.press("O")
            await pilot.pause()
            assert out.generator.timbre == "reed" and "soft reed" in _notices(app)
            await pilot.press("u")  # released: the tone stays on F4 until another note holds
            await pilot.pause()
            assert "tone F4" in _line(app)
            await pilot.press("o")
            await until(pilot, lambda: "tone " not in _line(app))
            assert out.stopped == 1 and not app.errors()

    run(scenario())


def test_without_an_output_the_tone_key_gives_one_line_and_the_screen_runs_on(engine, make_app):
    out = FakeOutput(fail="no audio output device found; connect headphones or a speaker")

    async def scenario():
        app = make_app(engine, tone_opener=out)
        async with app.run_test(size=(80, 24)) as pilot:
            await pilot.press("o")
            await until(pilot, lambda: "no audio output device" in _notices(app))
            errors = app.errors()
            assert len(errors) == 1 and errors[0].startswith("reference tone off: no audio output device found")
            assert not app.session.tone.on
            await until(pilot, lambda: "tone: no output" in _line(app))  # kept there, unlike a notice
            engine.show(F4_HZ)  # the screen goes on reading
            await pilot.pause(0.2)
            assert app.reading is not None and app.reading.mapping is not None

    run(scenario())


def test_tone_entries_in_the_command_list_and_the_drone_note_at_start(engine, make_app):
    out = FakeOutput()

    async def scenario():
        app = make_app(engine, tone_opener=out, tone_note="A4")  # as bench run --drone A4
        async with app.run_test(size=(80, 24)) as pilot:
            await until(pilot, lambda: "tone A4 440.00 Hz -18 dB" in _line(app))
            entries = {name: callback for name, callback, _ in app.palette_entries()}
            await entries["Reference tone 3 dB softer"]()
            assert out.generator is not None and out.generator.level_dbfs == -21.0
            await entries["Reference tone voice: sine / soft reed"]()
            assert out.generator.timbre == "reed"
            await entries["Reference tone on / off: the target note sounds through the output"]()
            await until(pilot, lambda: "tone " not in _line(app))

    run(scenario())


def test_at_80_columns_the_tone_item_stays_whole_with_the_log_on(engine, make_app):
    out = FakeOutput()

    async def scenario():
        app = make_app(engine, tone_opener=out)
        async with app.run_test(size=(80, 24)) as pilot:
            app.lock_target(65)
            await pilot.press("s", "o")
            engine.log_path = engine.log_path.with_name("session-20261205-051200.csv")  # a real log's name
            engine.show(F4_HZ, level_dbfs=-20.0)
            await until(pilot, lambda: "tone F4" in _line(app) and "-20.0 dBFS" in _line(app))
            text = _line(app)
            width = app.query_one(SessionBar).content_size.width
            assert "REC" in text and text.startswith("running") and len(text) <= width, text
            assert "tone F4 349.23 Hz -18 dB" in text, text  # whole: the log's name and the source gave way
            await pilot.press("comma")  # -21 dB: still whole
            await until(pilot, lambda: "tone F4 349.23 Hz -21 dB" in _line(app))

    run(scenario())
