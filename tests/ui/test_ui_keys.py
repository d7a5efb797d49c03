"""Keys and typed values change the engine's settings, the screen shows them, bad values are
refused in one line and the app keeps running."""

from __future__ import annotations

import asyncio
import math

from textual.widgets import Input

from bench.errors import DeviceError
from bench.tuning import TuningSettings
from bench.tuning.standards import PITCH_STANDARDS
from bench.tuning.temperaments import TEMPERAMENT_IDS, get_temperament
from bench.ui.app import BenchApp, EventRelay, run_app
from bench.ui.dialogs import ValueDialog
from bench.ui.panels import SessionBar, SettingsPanel
from conftest import until
from ui_fakes import FakeEngine, FakeEvent

SIZE = (100, 30)


def run(coro):
    return asyncio.run(coro)


def panel_text(app) -> str:
    return app.query_one(SettingsPanel).render().plain


def test_temperament_keys_step_through_the_model_list(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            assert engine.settings.temperament == TEMPERAMENT_IDS[0]
            await pilot.press("t")
            assert engine.settings.temperament == TEMPERAMENT_IDS[1]
            await pilot.press("t")
            assert engine.settings.temperament == TEMPERAMENT_IDS[2]
            await pilot.pause()
            assert get_temperament(TEMPERAMENT_IDS[2]).name in panel_text(app)
            await pilot.press("T", "T", "T")  # back past the first wraps to the last
            assert engine.settings.temperament == TEMPERAMENT_IDS[-1]

    run(scenario())


def test_tonic_keys_move_by_semitones_and_spelling_follows_flats(engine, make_app):
    # Pitch-class order C, C#/Db, D ... and sharp/flat spellings: common practice.
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("k")
            assert engine.settings.tonic == "C#"
            await pilot.press("k", "k")
            assert engine.settings.tonic == "D#"
            await pilot.press("f")
            assert engine.settings.flats and engine.settings.tonic == "Eb"
            await pilot.press("K", "K", "K", "K")
            assert engine.settings.tonic == "B"
            await pilot.pause()
            assert "tonic  B" in panel_text(app)

    run(scenario())


def test_a4_keys_step_by_tenth_and_whole_hertz(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("right")
            assert engine.settings.a4_hz == 440.1
            await pilot.press("right_square_bracket", "right_square_bracket")
            assert engine.settings.a4_hz == 440.3
            await pilot.press("shift+right")
            assert engine.settings.a4_hz == 441.3
            await pilot.press("left_curly_bracket", "left_curly_bracket", "left")
            assert engine.settings.a4_hz == 439.2
            await pilot.pause()
            assert "439.2 Hz" in panel_text(app)

    run(scenario())


def test_pitch_standard_keys_walk_the_presets(engine, make_app):
    values = sorted(std.a4_hz for std in PITCH_STANDARDS)
    after_440 = [v for v in values if v > 440.0]

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("p")
            assert engine.settings.a4_hz == after_440[0]
            await pilot.press("P", "P")
            assert engine.settings.a4_hz == max(v for v in values if v < 440.0)
            await pilot.pause()
            # ISO 16 gives 440 Hz; 415 Hz is the usual baroque pitch (common practice)
            while engine.settings.a4_hz != 415.0:
                await pilot.press("P")
            await pilot.pause()
            assert "415.0 Hz  baroque" in panel_text(app)

    run(scenario())


def test_air_and_reference_temperature_keys_and_the_correction_shown(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            for _ in range(12):
                await pilot.press("up")
            await pilot.press("shift+down", "minus")
            assert engine.settings.temp_c == 26.0
            assert engine.settings.ref_temp_c == 19.0
            await pilot.press("plus", "shift+up")
            assert engine.settings.ref_temp_c == 20.0
            await pilot.pause()
            text = panel_text(app)
            assert "26.0\u00b0C tuned 20.0\u00b0C" in text
            # Tuned at 20 degC, played at 26 degC: the instrument reads about 17.5 c sharp
            # (REFERENCES.md section 3, from the square-root law and Cramer 1993); the
            # correction taken out is therefore about -17.5 c.
            assert "-17.5 c for the air" in text

    run(scenario())


def test_typed_a4_out_of_range_is_refused_and_the_old_value_kept(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("a")
            await pilot.pause()
            assert isinstance(app.screen, ValueDialog)
            app.screen.query_one(Input).value = ""
            await pilot.press(*"520", "enter")
            await pilot.pause()
            assert engine.settings.a4_hz == 440.0
            assert len(app.errors()) == 1 and "520" in app.errors()[0]
            assert "\n" not in app.errors()[0]
            assert not isinstance(app.screen, ValueDialog)
            # still running: the next key works
            await pilot.press("right")
            assert engine.settings.a4_hz == 440.1

    run(scenario())


def test_typed_a4_accepts_a_standard_name(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("a")
            await pilot.pause()
            app.screen.query_one(Input).value = "baroque"
            await pilot.press("enter")
            await pilot.pause()
            assert engine.settings.a4_hz == 415.0
            assert app.errors() == []

    run(scenario())


def test_typed_temperatures_validated(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            app.apply_typed_air("23.5 \u00b0C")
            assert engine.settings.temp_c == 23.5
            app.apply_typed_air("warm")
            app.apply_typed_ref("90")
            assert engine.settings.temp_c == 23.5 and engine.settings.ref_temp_c == 20.0
            errors = app.errors()
            assert len(errors) == 2 and "'warm'" in errors[0] and "90" in errors[1]
            await pilot.press("c")
            await pilot.pause()
            app.screen.query_one(Input).value = "18"
            await pilot.press("enter")
            await pilot.press("r")
            await pilot.pause()
            app.screen.query_one(Input).value = "21"
            await pilot.press("enter")
            await pilot.pause()
            assert (engine.settings.temp_c, engine.settings.ref_temp_c) == (18.0, 21.0)

    run(scenario())


def test_escape_leaves_a_typed_value_unchanged(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("a")
            await pilot.pause()
            app.screen.query_one(Input).value = "415"
            await pilot.press("escape")
            await pilot.pause()
            assert engine.settings.a4_hz == 440.0 and app.errors() == []

    run(scenario())


def test_lock_to_sounding_note_typed_note_and_release(engine, make_app):
    # MIDI numbering: A4 = 69, C4 = 60, so F4 = 65 and Bb5 = 82 (MIDI 1.0 specification).
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("l")  # nothing sounding yet
            assert engine.locked_midi is None and len(app.errors()) == 1
            engine.show(349.23)  # F4 at A4 = 440 Hz
            await pilot.pause(0.1)
            await pilot.press("l")
            assert engine.locked_midi == 65
            await pilot.pause()
            assert "LOCKED F4" in panel_text(app)
            await pilot.press("n")
            await pilot.pause()
            app.screen.query_one(Input).value = "Bb5"
            await pilot.press("enter")
            await pilot.pause()
            assert engine.locked_midi == 82
            app.apply_typed_lock("H9")
            assert engine.locked_midi == 82 and "'H9'" in app.errors()[-1]
            await pilot.press("u")
            assert engine.locked_midi is None
            await pilot.pause()
            assert "nearest note" in panel_text(app)

    run(scenario())


def test_log_key_starts_and_stops_a_log_in_the_chosen_folder(engine, make_app, tmp_path):
    async def scenario():
        app = make_app(engine, log_dir=tmp_path / "chosen")
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("s")
            assert engine.log_path is not None and engine.log_path.parent == tmp_path / "chosen"
            await pilot.press("s")
            assert engine.log_path is None

    run(scenario())


def test_settings_are_remembered(engine, make_app, tmp_path):
    from bench.config import load_saved_settings

    async def scenario():
        app = make_app(engine, settings_path=tmp_path / "remembered.toml")
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("t", "right")

    run(scenario())
    saved = load_saved_settings(tmp_path / "remembered.toml")
    assert saved is not None
    assert saved.temperament == TEMPERAMENT_IDS[1] and saved.a4_hz == 440.1


def test_remember_off_writes_nothing(engine, make_app, tmp_path):
    async def scenario():
        app = make_app(engine, settings_path=tmp_path / "none.toml", remember=False)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("t")

    run(scenario())
    assert not (tmp_path / "none.toml").exists()


def test_command_list_entries_run_the_same_actions(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            entries = {name: callback for name, callback, _ in app.palette_entries()}
            assert "Next temperament" in entries
            for std in PITCH_STANDARDS:
                assert f"Pitch standard: {std.name}" in entries
            await entries["Pitch standard: baroque 415"]()
            assert engine.settings.a4_hz == 415.0
            await entries[f"Temperament: {get_temperament('werckmeister3').name}"]()
            assert engine.settings.temperament == "werckmeister3"
            await entries["Tonic: G"]()
            assert engine.settings.tonic == "G"
            # through the palette itself: open it, search, choose
            await pilot.press("ctrl+p")
            await pilot.pause()
            await pilot.press(*"next temperament")
            await pilot.pause(0.5)
            await pilot.press("enter")
            await pilot.pause(0.3)
            ids = TEMPERAMENT_IDS
            assert engine.settings.temperament == ids[(ids.index("werckmeister3") + 1) % len(ids)]

    run(scenario())


def test_ctrl_c_and_q_quit_and_stop_the_engine(make_app):
    for key in ("q", "ctrl+c"):
        engine = FakeEngine()

        async def scenario():
            app = make_app(engine)
            async with app.run_test(size=SIZE) as pilot:
                assert engine.started
                await pilot.press(key)
                await pilot.pause()
            return app

        run(scenario())
        assert engine.stopped, key


def test_engine_start_failure_closes_the_screen_and_is_raised(tmp_path):
    engine = FakeEngine()
    engine.start_error = DeviceError("input device 7 not found; list them with 'bench devices'")

    async def scenario():
        app = BenchApp(engine, log_dir=tmp_path, remember=False)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.pause()
        return app

    app = run(scenario())
    assert app.start_error is engine.start_error
    assert app.return_code == 2


def test_events_from_another_thread_become_notifications(make_app):
    import threading

    relay = EventRelay()
    engine = FakeEngine(on_event=relay)
    relay(FakeEvent("log_started", "logging to early.csv"))  # before the app listens

    async def scenario():
        app = make_app(engine, events=relay)
        async with app.run_test(size=SIZE) as pilot:
            thread = threading.Thread(target=relay, args=(FakeEvent("device_lost", "microphone unplugged"),))
            thread.start()
            thread.join()
            await pilot.pause(0.2)
            assert ("microphone unplugged", "error") in app.notes
            engine.state = "device_lost"
            await until(pilot, lambda: "microphone unplugged" in app.query_one(SessionBar).render().plain)
            assert ("logging to early.csv", "information") in app.notes

    run(scenario())


def test_engine_with_settable_on_event_is_connected_and_released(make_app):
    engine = FakeEngine()

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            assert engine.on_event == app.engine_event
            engine.on_event(FakeEvent("source_ended", "demo: end of input"))
            await pilot.pause(0.1)
            assert ("demo: end of input", "warning") in app.notes

    run(scenario())
    assert engine.on_event is None


def test_settings_changed_elsewhere_are_shown(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            engine.update_settings(temp_c=24.0)  # e.g. a temperature sensor
            await until(pilot, lambda: "24.0\u00b0C" in panel_text(app))

    run(scenario())


def test_run_app_with_a_factory_connects_events(tmp_path, monkeypatch):
    made = {}

    def factory(on_event):
        made["engine"] = FakeEngine(on_event=on_event)
        return made["engine"]

    def fake_run(self):
        assert self.events is not None and made["engine"].on_event is self.events
        return 0

    monkeypatch.setattr(BenchApp, "run", fake_run)
    assert run_app(factory, log_dir=tmp_path, remember=False) == 0
    assert made["engine"].stopped


def test_a4_step_beyond_the_range_is_refused(make_app):
    engine = FakeEngine(TuningSettings(a4_hz=499.5))

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.press("shift+right")
            assert engine.settings.a4_hz == 499.5
            assert app.errors() and "500" in app.errors()[0]

    run(scenario())
    assert math.isclose(engine.settings.a4_hz, 499.5)
