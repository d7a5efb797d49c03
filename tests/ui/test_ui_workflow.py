"""The session workflow on the bench screen: capture key, automatic capture, session label,
the tuning chart view and the blowing-curve view.

Pitches are built from the definition of the cent (1200 per octave, A. J. Ellis 1885; also
ANSI/ASA S1.1) on A4 = 440 Hz (ISO 16:1975) in equal temperament, so the expected offsets
are outside the program; the checks are of what the screen and the captures file show.
"""

from __future__ import annotations

import asyncio
import csv
import re

from bench.tuning import TuningSettings
from bench.ui.app import BenchApp
from bench.ui.blowing_plot import BlowingPlot
from bench.ui.capture_line import CaptureLine
from bench.ui.dialogs import ValueDialog
from bench.ui.help_screen import KeyGuide
from bench.ui.tuning_map import TuningMap
from bench.ui.workflow_screens import BlowingScreen, ChartScreen
from bench.workflow.captures import read_captures
from conftest import until
from ui_fakes import FakeEngine

SIZE = (120, 36)
A4_HZ = 440.0  # ISO 16:1975


def hz_at(cents_from_a4: float) -> float:
    """Frequency ``cents_from_a4`` cents above A4 = 440 Hz (definition of the cent)."""
    return A4_HZ * 2.0 ** (cents_from_a4 / 1200.0)


def run(coro):
    return asyncio.run(coro)


def hold(engine: FakeEngine, f0_hz: float | None, seconds: float, **kwargs) -> None:
    """Publish ``seconds`` of a steady reading (the fake engine spaces readings 10 ms)."""
    for _ in range(round(seconds / 0.01)):
        engine.show(f0_hz, **kwargs)


def fresh_engine() -> FakeEngine:
    # Air at the tuned-at temperature: corrected cents equal the raw ones.
    return FakeEngine(TuningSettings(a4_hz=A4_HZ, temp_c=20.0, ref_temp_c=20.0))


def test_capture_key_puts_the_note_on_the_chart_and_in_the_captures_file(make_app, tmp_path):
    engine = fresh_engine()

    async def scenario():
        app = make_app(engine, log_dir=tmp_path / "logs")
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("s")  # start the session log
            assert engine.log_path is not None
            await pilot.press("G")  # automatic capture off: only the key captures
            assert app.workflow.auto is False
            assert app.query_one(CaptureLine).auto is False
            hold(engine, hz_at(10.0), 0.8)  # A4, 10 cents sharp
            await until(pilot, lambda: app._polls > 5)
            await pilot.pause(0.2)
            assert app.workflow.captures() == []  # automatic capture is off
            await pilot.press("g")
            engine.show(hz_at(10.0))  # the engine's next reading carries the request out
            await until(pilot, lambda: len(app.workflow.captures()) == 1)
            cap = app.workflow.captures()[0]
            await pilot.press("v")
            await until(pilot, lambda: isinstance(app.screen, ChartScreen))
            entry = app.screen.query_one(TuningMap).chart.entry(69, 1)
            shown = app.screen.query_one(TuningMap).render().plain
            return app, cap, entry, shown, engine.log_path

    app, cap, entry, shown, log_path = run(scenario())
    assert cap.note == "A4" and cap.register == 1 and cap.source == "manual"
    assert abs(cap.cents - 10.0) < 0.1
    assert entry is not None and entry.capture is cap
    assert "+10" in shown.splitlines()[-1]  # the cents row under the columns
    assert any("captured A4 R1" in m and "+10.0 c sharp" in m for m, _ in app.notes)
    assert any("automatic capture OFF" in m for m, _ in app.notes)
    captures_file = log_path.with_name(log_path.stem + ".captures.csv")
    written = read_captures(captures_file)
    assert [(c.note, c.register, round(c.cents, 1)) for c in written] == [("A4", 1, round(cap.cents, 1))]


def test_capture_key_with_nothing_sounding_says_so(make_app):
    engine = fresh_engine()

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            hold(engine, None, 0.5)
            await pilot.pause(0.2)
            await pilot.press("g")
            engine.show(None)  # the engine's next reading carries the request out
            await pilot.pause(0.2)
            return app

    app = run(scenario())
    assert app.workflow is None  # closed on unmount
    assert any("nothing is sounding" in m for m, s in app.notes if s == "warning")


def test_automatic_capture_takes_a_settled_note_and_can_be_switched_off(make_app):
    engine = fresh_engine()

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            assert app.workflow.auto is True
            hold(engine, hz_at(-200.0 - 8.0), 1.0)  # G4, 8 cents flat
            hold(engine, None, 0.2)
            await until(pilot, lambda: len(app.workflow.captures()) == 1)
            first = app.workflow.captures()[0]
            await pilot.press("G")
            hold(engine, hz_at(300.0), 1.0)  # C5 on target, while automatic capture is off
            hold(engine, None, 0.2)
            await pilot.pause(0.3)
            after_off = len(app.workflow.captures())
            line = app.query_one(CaptureLine).render().plain
            return app, first, after_off, line

    app, first, after_off, line = run(scenario())
    assert first.note == "G4" and first.source == "auto" and abs(first.cents + 8.0) < 0.1
    assert any("captured G4 R1" in m and "-8.0 c flat" in m for m, _ in app.notes)
    assert after_off == 1
    assert "BY KEY" in line and "taken 1" in line and "unchecked 26/27" in line


def test_label_dialog_labels_the_next_captures(make_app, tmp_path):
    engine = fresh_engine()

    async def scenario():
        app = make_app(engine, log_dir=tmp_path / "logs")
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("s")
            await pilot.press("e")
            assert isinstance(app.screen, ValueDialog)
            await pilot.press("ctrl+a", "backspace", *"=after hole 3", "enter")
            assert not isinstance(app.screen, ValueDialog)
            hold(engine, hz_at(0.0), 0.8)
            await pilot.pause(0.2)
            await pilot.press("g")
            engine.show(hz_at(0.0))  # the engine's next reading carries the request out
            await until(pilot, lambda: any(c.source == "manual" for c in app.workflow.captures()))
            await pilot.press("e")
            await pilot.press("ctrl+a", "backspace", *("x" * 90), "enter")
            line = app.query_one(CaptureLine).render().plain
            return app, engine.log_path, line

    app, log_path, line = run(scenario())
    assert app.session_label == "=after hole 3"  # the 90-character label was refused
    assert any("too long" in m for m in app.errors())
    assert "'=after hole 3'" in line
    captures_file = log_path.with_name(log_path.stem + ".captures.csv")
    with open(captures_file, encoding="utf-8", newline="") as f:
        rows = list(csv.DictReader(f))
    manual = [r for r in rows if r["source"] == "manual"]
    # A cell starting with "=" would run as a formula in a spreadsheet (CSV injection,
    # OWASP): the writer leads it with "'"; the reader gives the label back.
    assert manual and manual[-1]["label"] == "'=after hole 3"
    assert [c.label for c in read_captures(captures_file) if c.source == "manual"][-1] == "=after hole 3"


def test_chart_view_lists_the_compass_and_marks_unchecked_notes(make_app):
    engine = fresh_engine()

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            hold(engine, hz_at(-400.0 - 20.0), 1.0)  # F4, 20 cents flat
            hold(engine, None, 0.2)
            await until(pilot, lambda: len(app.workflow.captures()) == 1)
            await pilot.press("v")
            await until(pilot, lambda: isinstance(app.screen, ChartScreen))
            await pilot.pause(0.1)
            text = app.screen.query_one(TuningMap).render().plain
            title = str(app.screen.query_one("#chart-title").render())
            await pilot.press("v")  # the same key goes back
            back = app.screen is app._main_screen
            return text, title, back

    text, title, back = run(scenario())
    lines = text.splitlines()
    names = lines[-2].split()
    # The alto recorder: F4 to G6, two octaves and a tone, chromatic (common practice).
    expected = ["F4", "F#4", "G4", "G#4", "A4", "A#4", "B4"]
    octave = ["C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B"]
    expected += [f"{n}5" for n in octave] + ["C6", "C#6", "D6", "D#6", "E6", "F6", "F#6", "G6"]
    assert names == expected
    figures = lines[-1].split()
    assert figures[0] == "-20" and figures[1:] == ["?"] * 26
    assert "1 of 27 notes checked" in title
    # F4's column falls below the line with a flat tip; unchecked columns are hatched.
    gauge = lines[-9:-2]
    f4 = [row[5:8] for row in gauge]
    assert f4[3] == "███" and f4[4] == "███" and f4[5] == "▼▼▼" and f4[0] == "   "
    fs4 = [row[9:12] for row in gauge]
    assert fs4 == ["░░░"] * 7
    assert back


def test_chart_view_of_a_transposing_profile_names_written_notes(make_app):
    engine = fresh_engine()

    async def scenario():
        app = make_app(engine, profile="soprano")
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("v")
            await until(pilot, lambda: isinstance(app.screen, ChartScreen))
            await pilot.pause(0.1)
            text = app.screen.query_one(TuningMap).render().plain
            title = str(app.screen.query_one("#chart-title").render())
            return text, title

    text, title = run(scenario())
    # The soprano recorder sounds C5-D7 and is written an octave lower (common practice).
    names = text.splitlines()[-2].split()
    assert names[0] == "C4" and names[-1] == "D6" and len(names) == 27
    assert "soprano" in title and "0 of 27" in title and "written pitch" in title


def test_unknown_profile_is_refused_in_one_line(engine):
    import pytest

    from bench.errors import SettingsError

    with pytest.raises(SettingsError, match="profile 'kazoo' is unknown"):
        BenchApp(engine, profile="kazoo", remember=False)


def test_blowing_view_shows_the_slope_and_break_of_a_crescendo(make_app):
    engine = fresh_engine()
    slope_cents_per_db = 0.7  # the crescendo below is built with this slope
    rate_db_per_s = 5.0
    start_dbfs = -35.0
    held_hz = hz_at(-400.0)  # F4

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("w")
            await until(pilot, lambda: isinstance(app.screen, BlowingScreen))
            for i in range(300):  # 3 s, -35 to -20 dBFS
                level = start_dbfs + rate_db_per_s * 0.01 * i
                cents = slope_cents_per_db * (level - start_dbfs)
                engine.show(held_hz * 2.0 ** (cents / 1200.0), level_dbfs=level, odd_even_db=8.0)
            jump_level = start_dbfs + rate_db_per_s * 0.01 * 300
            for i in range(30):  # it breaks into the octave above, the fingering held
                engine.show(
                    2 * held_hz, level_dbfs=jump_level + 0.05 * i, register="jumped", jump="overblown",
                    held_f0_hz=held_hz,
                )
            plot = app.screen.query_one(BlowingPlot)
            await until(pilot, lambda: plot.curve is not None and plot.curve.break_level_dbfs is not None)
            await pilot.pause(0.2)
            return plot.curve, plot.render().plain

    curve, text = run(scenario())
    assert curve.note == "F4"
    assert abs(curve.slope_cents_per_db - slope_cents_per_db) < 0.01
    shown = re.search(r"([+-]\d+\.\d\d) \u00b1 [\d.]+ c/dB", text)
    assert shown is not None and abs(float(shown.group(1)) - slope_cents_per_db) <= 0.005
    # The break level is the level 100 ms to 40 ms before the first jumped frame
    # (the workflow's definition): about 0.35 dB under the level where it jumped.
    brk = re.search(r"BROKE \(overblown\) at (-\d+\.\d) dBFS", text)
    assert brk is not None
    assert abs(float(brk.group(1)) - (-20.0 - rate_db_per_s * 0.07)) < 0.2


def test_key_guide_and_command_list_hold_the_workflow_keys(make_app, engine):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("question_mark")
            assert isinstance(app.screen, KeyGuide)
            rows = app.screen.rows
            await pilot.press("escape")
            names = [name for name, _, _ in app.palette_entries()]
            return rows, names

    rows, names = run(scenario())
    by_words = {words: keys for keys, words in rows}
    wanted = {
        "Capture the note sounding now (its last half second)": "g",
        "Automatic capture of settled notes on / off": "G",
        "Type the session label put on the next captures": "e",
        "Tuning chart view: the compass against its targets": "v",
        "Blowing-curve view: slope in c/dB, break level": "w",
        "Back to the live view": "esc",
    }
    for words, key in wanted.items():
        assert words in by_words, words
        assert key in by_words[words].split(" / ")[0].lower() or key in by_words[words], by_words[words]
        assert words in names


def test_chart_view_fits_a_small_terminal(make_app):
    engine = fresh_engine()

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=(80, 24)) as pilot:
            hold(engine, hz_at(-400.0 + 30.0), 1.0)  # F4, 30 cents sharp
            hold(engine, None, 0.2)
            await until(pilot, lambda: len(app.workflow.captures()) == 1)
            await pilot.press("v")
            await until(pilot, lambda: isinstance(app.screen, ChartScreen))
            await pilot.pause(0.2)
            chart_map = app.screen.query_one(TuningMap)
            last = app.screen.query_one("#chart-last")
            return chart_map.render().plain, chart_map.region, last.region

    text, map_region, last_region = run(scenario())
    lines = text.splitlines()
    names = " ".join(lines).split()
    for note in ("F4", "G5", "G#5", "E6", "F6", "G6"):  # both lines of registers are drawn
        assert note in names
    assert map_region.bottom <= 23 and last_region.bottom <= 23  # above the footer
    # two rows either side of the line: F4's 30 c sharp column tops out with its tip
    f4 = [row[5:8] for row in lines[2:7]]
    assert f4 == ["▲▲▲", "███", "███", "   ", "   "]


def test_captures_file_that_cannot_be_written_is_shown_and_capturing_goes_on(make_app, tmp_path):
    engine = fresh_engine()
    logs = tmp_path / "logs"
    (logs / "session-fake.captures.csv").mkdir(parents=True)  # a folder where the file should go

    async def scenario():
        app = make_app(engine, log_dir=logs)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("s")
            hold(engine, hz_at(0.0), 0.8)  # the readings name the new log: the workflow follows
            await until(pilot, lambda: app.workflow.file_error is not None)
            await pilot.pause(0.2)
            await pilot.press("g")
            engine.show(hz_at(0.0))  # the engine's next reading carries the request out
            await until(pilot, lambda: any(c.source == "manual" for c in app.workflow.captures()))
            return app, app.query_one(CaptureLine).render().plain

    app, line = run(scenario())
    assert "captures not saved" in line
    assert any("captures kept in memory only" in m for m in app.errors())


def test_an_overblown_note_is_charted_as_broken_never_as_checked(make_app):
    # A4 held, then overblown to its octave (an open pipe's second mode, Fletcher & Rossing):
    # the capture is filed under the fingered A4 and drawn as crosses, not as a checked A5
    engine = fresh_engine()

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            hold(engine, A4_HZ, 0.8)
            hold(engine, 2 * A4_HZ, 0.5, register="jumped", jump="overblown", held_f0_hz=A4_HZ)
            hold(engine, None, 0.3)
            await until(pilot, lambda: len(app.workflow.captures()) >= 1)
            await pilot.press("v")
            await until(pilot, lambda: isinstance(app.screen, ChartScreen))
            tmap = app.screen.query_one(TuningMap)
            return app.workflow.captures(), tmap.chart, tmap.render().plain

    caps, chart, shown = run(scenario())
    assert [(c.note, c.jump) for c in caps] == [("A4", "overblown")]
    assert chart.entry(69, 1).status == "broken" and chart.entry(81, 2).capture is None
    assert "\u2573" in shown and "ob" in shown
