"""What the screen shows for synthetic readings: note and cents, flat/sharp, register states,
harmonic bars, the key guide, the held view, and the layout at 80 x 24."""

from __future__ import annotations

import asyncio
from pathlib import Path

import pytest
from textual.binding import Binding

from bench.tuning import TuningSettings
from bench.ui.app import BenchApp
from bench.ui.deviation import DeviationScale
from bench.ui.glyphs import render_big
from bench.ui.harmonics import HarmonicBars
from bench.ui.help_screen import KeyGuide
from bench.ui.panels import DetailLine, SessionBar
from bench.ui.readout import CentsFace, NoteFace
from bench.ui.register import RegisterBanner
from bench.ui.trail import PitchTrail
from conftest import until
from ui_fakes import FakeEngine

SIZE = (100, 30)


def run(coro):
    return asyncio.run(coro)


def at_cents(freq_hz: float, cents: float) -> float:
    """``freq_hz`` moved by ``cents`` (1200 cents to the octave: definition of the cent)."""
    return freq_hz * 2 ** (cents / 1200)


A4_HZ = 440.0  # ISO 16:1975
F4_HZ = 349.2282  # 440 * 2**(-4/12), REFERENCES.md section 1


@pytest.mark.parametrize(
    ("cents", "side", "figure"),
    [(+12.4, "sharp", "+12"), (-20.0, "flat", "-20"), (+3.0, "centred", "+3"), (-0.2, "centred", "0")],
)
def test_cents_figure_side_and_scale(engine, make_app, cents, side, figure):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            engine.show(at_cents(A4_HZ, cents))
            await pilot.pause(0.15)
            face = app.query_one(CentsFace)
            assert face.has_class(f"-{side}")
            # the glyphs drawn are those of the rounded figure
            tall = face.content_size.height // 5
            assert face.render().plain.replace(" ", "") == _ink_of(figure, face, tall)
            assert app.query_one(NoteFace).note == "A4"
            scale = app.query_one(DeviationScale).render().plain.splitlines()
            words = scale[0]
            if side == "sharp":
                assert "SHARP" in words and "ON TARGET" not in words
                assert scale[1].rindex("\u2588") > len(scale[1]) // 2  # marker right of centre
            elif side == "flat":
                assert scale[1].index("\u2588") < len(scale[1]) // 2
            else:
                assert "ON TARGET" in words
            detail = app.query_one(DetailLine).render().plain
            assert "target 440.00 Hz" in detail

    run(scenario())


def _ink_of(figure: str, face, tall: int) -> str:
    """The non-space characters block glyphs of ``figure`` put on screen, row by row."""
    width = face.content_size.width
    for scale in range(2 * tall, 0, -1):
        lines = render_big(figure, scale)
        if len(lines[0]) <= width or scale == 1:
            break
    return "\n".join(line.replace(" ", "") for line in lines for _ in range(tall))


def test_raw_key_swaps_big_figure_to_raw_cents(make_app):
    # Tuned at 20 degC, played at 26 degC: about +17.5 c from the air alone (REFERENCES.md 3).
    engine = FakeEngine(TuningSettings(temp_c=26.0, ref_temp_c=20.0))

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            engine.show(at_cents(F4_HZ, 17.5))  # raw +17.5 c, corrected about 0
            await pilot.pause(0.15)
            face = app.query_one(CentsFace)
            assert abs(face.cents) < 0.5 and face.has_class("-centred")
            assert "raw +17.5 c" in app.query_one(DetailLine).render().plain
            await pilot.press("x")
            await pilot.pause(0.1)
            assert face.cents in (17.0, 18.0) and face.has_class("-sharp")  # whole cents shown
            assert "air-corrected +0.0 c" in app.query_one(DetailLine).render().plain
            assert "RAW" in str(app.query_one("#cents-caption").render())

    run(scenario())


@pytest.mark.parametrize(
    ("register", "jump", "look", "words"),
    [
        ("steady", None, "steady", "REGISTER SETTLED"),
        ("weakening", None, "weakening", "WEAKENING"),
        ("jumped", "overblown", "overblown", "OVERBLOWN"),
        ("jumped", "vented", "vented", "VENTED"),
    ],
)
def test_register_banner_states(engine, make_app, register, jump, look, words):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            engine.show(F4_HZ, register=register, jump=jump)
            await pilot.pause(0.15)
            banner = app.query_one(RegisterBanner)
            assert banner.look == look
            assert banner.has_class(f"-{look}")
            others = {"steady", "weakening", "overblown", "vented"} - {look}
            assert not any(banner.has_class(f"-{o}") for o in others)
            text = banner.render().plain
            assert words in text
            for other_words in {"REGISTER SETTLED", "WEAKENING", "OVERBLOWN", "VENTED"} - {words}:
                assert other_words not in text

    run(scenario())


def test_overblown_and_vented_banners_differ_in_pattern(engine, make_app):
    patterns = {}
    for jump in ("overblown", "vented"):

        async def scenario():
            app = make_app(engine)
            async with app.run_test(size=SIZE) as pilot:
                engine.show(F4_HZ, register="jumped", jump=jump)
                await pilot.pause(0.15)
                return app.query_one(RegisterBanner).render().plain.splitlines()[0]

        patterns[jump] = set(run(scenario()).replace(" ", ""))
    assert patterns["overblown"] and patterns["vented"]
    assert patterns["overblown"].isdisjoint(patterns["vented"])


def test_harmonic_bars_odd_solid_even_hatched(engine, make_app):
    levels = (0.0, -10.0, -20.0, -30.0, -39.0, -39.0, -39.0, -39.0)

    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            engine.show(F4_HZ, harmonics_db=levels, odd_even_db=4.2)
            await pilot.pause(0.15)
            bars = app.query_one(HarmonicBars)
            lines = bars.render().plain.splitlines()
            body = lines[:-2]
            width = max(2, (bars.content_size.width - 12) // 8)
            columns = [4 + 1 + i * (width + 1) for i in range(8)]
            heights = [sum(line[c] != " " for line in body) for c in columns]
            # bars fall with level; odd ones solid, even ones hatched
            assert heights[0] == len(body) and heights[0] > heights[1] > heights[2] > heights[3] > 0
            assert all(line[columns[0]] in " \u2588" for line in body)
            assert all(line[columns[1]] in " \u2592" for line in body)
            assert "1o" in lines[-2] and "2e" in lines[-2]
            assert "odd/even +4.2 dB" in lines[-1]

    run(scenario())


def test_analysis_load_is_cpu_seconds_per_wall_second_over_the_last_seconds(engine, make_app, monkeypatch):
    import bench.ui.app as app_module

    clock = [100.0]
    monkeypatch.setattr(app_module.time, "monotonic", lambda: clock[0])
    app = make_app(engine)
    assert app._analysis_load_pct(None) is None  # an engine that does not count
    assert app._analysis_load_pct(2.0) is None  # one sample: no rate yet
    clock[0] += 1.0
    assert app._analysis_load_pct(2.05) == pytest.approx(5.0)
    clock[0] += 1.0
    assert app._analysis_load_pct(2.10) == pytest.approx(5.0)
    # a burst: 0.5 s of CPU in the last second; the first sample has left the 3 s span
    for _ in range(2):
        clock[0] += 1.0
        app._analysis_load_pct(2.10)
    clock[0] += 1.0
    assert app._analysis_load_pct(2.60) == pytest.approx(100.0 * 0.5 / 3.0)


def test_analysis_load_on_the_session_line(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            await pilot.pause(0.8)
            engine.cpu_s = 10.0  # ten CPU seconds in under a second of wall time: overloaded
            await pilot.pause(0.4)
            bar = app.query_one(SessionBar)
            text = bar.render().plain
            assert "dsp " in text
            assert bar.analysis_load_pct is not None and bar.analysis_load_pct >= 80.0

    run(scenario())


def test_level_clipping_dropped_and_log_on_the_session_line(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            engine.dropped_blocks = 3
            await pilot.press("s")
            engine.show(F4_HZ, level_dbfs=-0.4, clipped=True)
            await pilot.pause(0.4)
            text = app.query_one(SessionBar).render().plain
            assert "-0.4 dBFS" in text and "CLIPPING" in text
            assert "dropped 3" in text
            assert "REC" in text and "session-fake.csv" in text
            assert "source fake" in text and text.startswith("running")
            # the vital items come first and fit the line; a long log path gives its name
            width = app.query_one(SessionBar).content_size.width
            assert text.index("session-fake.csv") + len("session-fake.csv") <= width

    run(scenario())


def test_hold_keeps_the_view_still(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            engine.show(F4_HZ)
            await pilot.pause(0.15)
            await pilot.press("space")
            engine.show(at_cents(A4_HZ, 30))
            await pilot.pause(0.2)
            assert app.query_one(NoteFace).note == "F4"
            assert "HELD" in app.query_one(SessionBar).render().plain
            await pilot.press("space")
            await pilot.pause(0.15)
            assert app.query_one(NoteFace).note == "A4"

    run(scenario())


def test_silence_keeps_the_last_note_dimmed(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            engine.show(F4_HZ)
            await pilot.pause(0.15)
            engine.show(None)
            await pilot.pause(0.15)
            note = app.query_one(NoteFace)
            assert note.note == "F4" and note.has_class("-stale")
            assert app.query_one(DeviationScale).cents is None

    run(scenario())


def test_trail_plots_recent_cents(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=SIZE) as pilot:
            for _ in range(100):
                engine.show(at_cents(A4_HZ, 20))  # steady +20 c: dots in the upper half
            trail = app.query_one(PitchTrail)
            await until(pilot, lambda: len(trail.points) == 100)  # the trail refreshes at 10 Hz
            lines = trail.render().plain.splitlines()[:-1]
            dotted = [i for i, line in enumerate(lines) if any(0x2800 < ord(ch) <= 0x28FF for ch in line)]
            assert dotted and max(dotted) < len(lines) // 2

    run(scenario())


def test_key_guide_lists_every_binding(engine, make_app):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=(100, 50)) as pilot:
            await pilot.press("question_mark")
            await pilot.pause(0.2)
            guide = app.screen
            assert isinstance(guide, KeyGuide)
            shown = "\n".join(str(row.render()) for row in guide.query(".key-row"))
            for binding in Binding.make_bindings(BenchApp.BINDINGS):
                assert (binding.tooltip or binding.description) in shown
                assert app.get_key_display(binding) in shown
            assert "ctrl+p".replace("ctrl+", "^") in shown or "ctrl+p" in shown
            await pilot.press("escape")
            await pilot.pause()
            assert not isinstance(app.screen, KeyGuide)

    run(scenario())


@pytest.mark.parametrize("size", [(80, 24), (120, 36), (160, 48)])
def test_layout_fits_the_terminal(engine, make_app, size):
    async def scenario():
        app = make_app(engine)
        async with app.run_test(size=size) as pilot:
            engine.show(at_cents(F4_HZ, -8), register="jumped", jump="vented")
            await pilot.pause(0.3)
            width, height = size
            for widget_type in (SessionBar, NoteFace, CentsFace, DeviationScale, DetailLine, RegisterBanner):
                region = app.query_one(widget_type).region
                assert region.height >= 1 and region.bottom <= height and region.right <= width
            for panel in ("#harmonics", "#trail", "#tuning"):
                region = app.query_one(panel).region
                assert region.height >= 7 and region.bottom <= height - 1
            # the tuning panel shows all six lines at the smallest size
            tuning = app.query_one("#tuning")
            assert tuning.content_size.height >= 6
            note = app.query_one(NoteFace).render().plain
            assert "\u2588" in note  # the big glyphs were drawn
            shot = Path(f"/tmp/bench-ui-{width}x{height}.svg")
            app.save_screenshot(str(shot))
            assert shot.stat().st_size > 0

    run(scenario())


def test_flat_sharp_and_centred_figures_have_different_colours(engine, make_app):
    async def scenario():
        app = make_app(engine)
        colours = {}
        async with app.run_test(size=SIZE) as pilot:
            for cents in (+20.0, -20.0, 0.0):
                engine.show(at_cents(A4_HZ, cents))
                await pilot.pause(0.2)
                face = app.query_one(CentsFace)
                inked = [seg for y in range(5) for seg in face.render_line(y) if seg.text.strip()]
                colours[cents] = {seg.style.color for seg in inked}
        assert all(len(c) == 1 for c in colours.values())
        assert len({next(iter(c)) for c in colours.values()}) == 3

    run(scenario())
