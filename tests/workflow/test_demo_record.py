"""The demo as a maker's record: each family member plays its own instrument, and the demo's
crescendo breaks, so the blowing view has a slope and a break level and captures a margin.

Outside checks: 12-TET on A4 = 440 Hz (ISO 16:1975), the synth's own controls as the truth
(level linear in dB over the note, pitch rising ``cents_per_db`` per dB), and the fact of the
trade that blowing harder sharpens a duct flute and finally breaks it into the octave
(*common practice*).
"""

from __future__ import annotations

import math

import pytest

from bench.reading import make_reading
from bench.sources.demo import DEMO_SCALE, DemoSource, demo_events, render_demo_loop
from bench.tuning import TuningSettings
from bench.workflow.blowing import find_blowing_curves
from bench.workflow.live import LiveWorkflow
from bench.workflow.profiles import get_profile


@pytest.mark.parametrize("name", ["soprano", "alto", "tenor", "bass"])
def test_each_profile_plays_its_own_instrument(name):
    from bench.model.demo import demo_notes
    from bench.sources.demo import demo_transpose

    prof = get_profile(name)
    events = demo_events(profile=name)
    lowest_hz = 440.0 * 2 ** ((prof.lowest_midi - 69) / 12)  # ISO 16 / 12-TET
    # its lowest note, every hole closed, within a few cents of the profile's lowest note
    assert 1200 * math.log2(events[0].f0_hz / lowest_hz) == pytest.approx(0.0, abs=3.0)
    if name in ("alto", "soprano"):  # its own built-in geometry, through the model
        geometry = f"wren-{name}"
        first = demo_notes(geometry=geometry)[0]
        assert first.holes == "x" * len(first.holes) and events[0].f0_hz == pytest.approx(first.freq_hz, rel=1e-12)
    else:  # no geometry of its own: the alto's model pitches moved to its compass
        alto = demo_events()
        ratio = 2 ** (demo_transpose(name) / 12)
        assert [e.f0_hz for e in events] == pytest.approx([e.f0_hz * ratio for e in alto], rel=1e-12)
    assert name in DemoSource(48000, profile=name).description


@pytest.fixture(scope="module")
def demo_session():
    from dsp.analyser import StreamingAnalyser

    audio = render_demo_loop(48000)
    settings = TuningSettings()
    readings = [make_reading(f, settings) for f in StreamingAnalyser(48000).process(audio)]
    wf = LiveWorkflow(profile="alto")
    for r in readings:
        wf.push(r)
    wf.finish()
    return readings, wf


def test_the_demo_crescendo_gives_a_slope_and_a_break_above_the_playing_level(demo_session):
    readings, wf = demo_session
    curves = find_blowing_curves(readings)
    c5 = [c for c in curves if c.note == "C5"]
    assert len(c5) == 1
    curve = c5[0]
    # synth truth: 0.5 c/dB, level -26 dBFS rising 12 dB over 3 s, weakening from 2.265 s
    assert curve.slope_cents_per_db == pytest.approx(0.5, abs=0.05)
    assert curve.break_level_dbfs == pytest.approx(-26.0 + 4.0 * 2.2, abs=1.0)
    assert wf.last_break() is not None and wf.last_break().note == "C5"
    caps = [c for c in wf.captures() if c.note == "C5"]
    plain, broken = [c for c in caps if not c.jump], [c for c in caps if c.jump]
    assert len(plain) == 1 and len(broken) == 1 and broken[0].jump == "overblown"
    # margins: dB above each capture's level, both positive (the note broke above them)
    assert plain[0].register_margin_db == pytest.approx(curve.break_level_dbfs - (-20.0), abs=0.5)
    assert broken[0].register_margin_db is not None and broken[0].register_margin_db > plain[0].register_margin_db
    assert broken[0].level_dbfs < -23.0  # the level the crescendo started at


def test_the_demo_notes_are_captured(demo_session):
    _, wf = demo_session
    assert wf.skips() == []
    played = {n.midi for n in DEMO_SCALE}
    assert {c.midi for c in wf.captures()} == played
