"""The screen on the real engine and the demo instrument: keys pressed during a logged session
show up in the log's settings columns, in order."""

from __future__ import annotations

import asyncio

from bench.engine import Engine
from bench.framelog import read_frame_log
from bench.sources.demo import DemoSource
from bench.tuning import TuningSettings
from bench.tuning.temperaments import TEMPERAMENT_IDS
from bench.ui.app import EventRelay
from bench.ui.readout import NoteFace


async def _until(pilot, condition, timeout_s: float = 20.0) -> None:
    """Let the app run until ``condition()`` holds (the demo plays in real time)."""
    waited = 0.0
    while not condition():
        await pilot.pause(0.05)
        waited += 0.05
        assert waited < timeout_s, "the engine produced nothing in time"


def test_keys_during_a_logged_demo_session_reach_the_log(make_app, tmp_path):
    relay = EventRelay()
    engine = Engine(DemoSource(48000), TuningSettings(), on_event=relay)
    log_dir = tmp_path / "logs"

    async def scenario():
        app = make_app(engine, events=relay, log_dir=log_dir)
        async with app.run_test(size=(100, 30)) as pilot:
            await _until(pilot, lambda: app.query_one(NoteFace).note is not None)
            await pilot.press("s")
            path = engine.log_path
            assert path is not None and path.parent == log_dir

            def rows_so_far() -> int:
                return engine.stats.log_rows

            start = rows_so_far()
            await _until(pilot, lambda: rows_so_far() > start + 20)
            await pilot.press("t")
            mark = rows_so_far()
            await _until(pilot, lambda: rows_so_far() > mark + 20)
            await pilot.press("right", "shift+right")
            mark = rows_so_far()
            await _until(pilot, lambda: rows_so_far() > mark + 20)
            await pilot.press("s")
            assert engine.log_path is None
            return path

    path = asyncio.run(scenario())
    assert engine.stats.state == "stopped"  # stopped on unmount
    rows = read_frame_log(path)
    assert len(rows) > 60
    temperaments = [r["temperament"] for r in rows]
    a4s = [float(r["a4_hz"]) for r in rows]
    assert temperaments[0] == TEMPERAMENT_IDS[0] and temperaments[-1] == TEMPERAMENT_IDS[1]
    first_new = temperaments.index(TEMPERAMENT_IDS[1])
    assert set(temperaments[first_new:]) == {TEMPERAMENT_IDS[1]}  # the change stays
    assert a4s[0] == 440.0 and a4s[-1] == 441.1
    assert a4s == sorted(a4s)  # 440 -> 440.1 -> 441.1, never back
    assert set(a4s) <= {440.0, 440.1, 441.1}
    # the A4 change comes after the temperament change
    assert a4s.index(441.1) > first_new


def test_captures_of_the_demo_reach_the_chart_and_the_captures_file(make_app, tmp_path):
    from bench.ui.workflow_screens import ChartScreen
    from bench.ui.tuning_map import TuningMap
    from bench.workflow.captures import read_captures

    relay = EventRelay()
    engine = Engine(DemoSource(48000), TuningSettings(), on_event=relay)

    async def scenario():
        app = make_app(engine, events=relay, log_dir=tmp_path / "logs")
        async with app.run_test(size=(120, 36)) as pilot:
            await pilot.press("s")
            log_path = engine.log_path
            await _until(pilot, lambda: app.query_one(NoteFace).note is not None)
            await _until(pilot, lambda: any(c.source == "auto" for c in app.workflow.captures()))
            await _until(pilot, lambda: app.reading is not None and app.reading.mapping is not None)
            await pilot.press("g")
            await _until(pilot, lambda: any(c.source == "manual" for c in app.workflow.captures()))
            await pilot.press("v")
            await _until(pilot, lambda: isinstance(app.screen, ChartScreen))
            chart = app.screen.query_one(TuningMap).chart
            return log_path, app.workflow.captures(), chart

    log_path, caps, chart = asyncio.run(scenario())
    on_file = read_captures(log_path.with_name(log_path.stem + ".captures.csv"))
    assert {c.index for c in caps} <= {c.index for c in on_file}  # every capture was written
    assert {c.source for c in on_file} == {"auto", "manual"}
    checked = {(e.midi, e.register) for e in chart.entries if e.capture is not None}
    # every capture on file is the latest of its note somewhere on the chart, or an earlier one
    assert checked and checked <= {(c.midi, c.register) for c in on_file}
    # the demo instrument is tuned by its maker to within a few cents (its own scenario),
    # so the captures sit near their targets; the check is that the numbers reach the file intact
    by_index = {c.index: c for c in on_file}
    for cap in caps:
        assert abs(by_index[cap.index].cents - cap.cents) < 0.01
