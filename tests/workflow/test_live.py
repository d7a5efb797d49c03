"""The live workflow fed reading by reading, as the engine feeds its consumers."""

from __future__ import annotations

import dataclasses
import threading

import pytest

from bench.reading import make_reading
from bench.tuning import TuningSettings
from bench.workflow.captures import captures_from_readings, read_captures
from bench.workflow.live import LiveWorkflow
from dsp.synth import NoteEvent

from .sessions import render_events, scale_events

OFFSETS = {65: 1.0, 67: -4.0, 69: 6.0}


@pytest.fixture(scope="module")
def readings():
    from dsp.analyser import StreamingAnalyser

    events = scale_events(list(OFFSETS), OFFSETS) + [
        NoteEvent(349.2282, 3.0, level_dbfs=-30.0, crescendo_db=12.0, cents_per_db=0.5,
                  jump_at_s=2.4, jump_kind="overblown")
    ]
    r = render_events(events, seed=4)
    s = TuningSettings()
    out = []
    for f in StreamingAnalyser(48000).process(r.audio):
        out.append(make_reading(f, s))
    return r, out


def test_live_captures_go_to_the_file_beside_the_log(tmp_path, readings):
    r, rs = readings
    log = tmp_path / "session-20260301-100000.csv"
    told = []
    with LiveWorkflow(profile="alto", log_path=log, label="as made", on_capture=told.append) as wf:
        for reading in rs:
            wf.push(reading)
    side = tmp_path / "session-20260301-100000.captures.csv"
    assert wf.captures_path == side
    saved = read_captures(side)
    first = {}
    for c in saved:
        first.setdefault(c.midi, c)  # the scale's own capture of each note, not a later one
    assert [c.midi for c in saved][:3] == list(OFFSETS)
    for m, off in OFFSETS.items():
        assert first[m].cents == pytest.approx(off, abs=0.5)
        assert first[m].label == "as made"
    # the F4 break of the crescendo gives the earlier F4 its margin (an update, same index)
    assert first[65].register_margin_db is not None
    assert first[65].register_margin_db == pytest.approx(-30.0 + 12.0 * 2.4 / 3.0 - (-20.0), abs=0.6)
    assert {c.index for c in told} == {c.index for c in saved}
    # the crescendo itself is kept under the fingered F4, marked as broken (issue: a broken
    # note is never a plain capture of the upper note), its margin above the level it started at
    cresc = saved[-1]
    assert (cresc.note, cresc.jump, cresc.mode) == ("F4", "overblown", 2)
    assert cresc.level_dbfs < -26.0 and cresc.register_margin_db is not None
    assert cresc.register_margin_db == pytest.approx(cresc.break_level_dbfs - cresc.level_dbfs)
    assert cresc.register_margin_db > 5.0
    # the break seen live
    brk = wf.last_break()
    assert brk is not None and brk.note == "F4" and brk.jump_kind == "overblown"
    assert brk.slope_cents_per_db == pytest.approx(0.5, abs=0.03)
    chart = wf.chart()
    assert {e.midi for e in chart.checked()} >= set(OFFSETS)


def test_resumed_session_continues_numbering(tmp_path, readings):
    _, rs = readings
    log = tmp_path / "s.csv"
    with LiveWorkflow(log_path=log) as wf:
        for reading in rs:
            wf.push(reading)
    n = len(wf.captures())
    with LiveWorkflow(log_path=log, label="after undercutting hole 3") as wf2:
        for reading in rs[:400]:
            wf2.push(reading)
        cap = wf2.capture_now()
    new = wf2.captures()[n:]
    assert new and new[0].index == n + 1 and new[0].label == "after undercutting hole 3"
    assert cap is not None and cap is new[-1] and cap.source == "manual"
    total = len(wf2.captures())
    assert [c.index for c in read_captures(tmp_path / "s.captures.csv")] == list(range(1, total + 1))


def test_auto_off_and_capture_key(readings):
    _, rs = readings
    wf = LiveWorkflow(auto=False)
    got = []
    for i, reading in enumerate(rs):
        got += wf.push(reading)
        if i == 150:  # 0.75 s into the first note (F4, +1 c)
            key = wf.capture_now()
    assert got == [c for c in got if c.source == "manual"]  # updates of the manual one only
    assert key is not None and key.note == "F4" and key.cents == pytest.approx(1.0, abs=0.5)


def test_live_equals_offline(readings):
    _, rs = readings
    wf = LiveWorkflow(profile="alto")
    for reading in rs:
        wf.push(reading)
    wf.finish()
    from bench.workflow.profiles import get_profile

    assert wf.captures() == captures_from_readings(rs, profile=get_profile("alto"))


def test_reading_from_another_thread_while_feeding(readings):
    _, rs = readings
    wf = LiveWorkflow()
    errors = []

    def feed():
        try:
            for reading in rs:
                wf.push(reading)
        except Exception as exc:  # noqa: BLE001
            errors.append(exc)

    t = threading.Thread(target=feed)
    t.start()
    while t.is_alive():
        wf.chart()
        wf.blowing_curve()
    t.join()
    assert errors == []
    assert len(wf.captures()) >= 3


def test_file_failure_keeps_capturing(tmp_path, readings):
    _, rs = readings
    wf = LiveWorkflow(log_path=tmp_path / "s.csv")
    wf._file.close()  # the disk went away: writing now fails with LogError
    for reading in rs:
        wf.push(reading)
    assert wf.file_error is not None and "closed" in wf.file_error
    assert len(wf.captures()) >= 3


def test_the_workflow_follows_the_log_its_readings_name(tmp_path, readings):
    # as an engine consumer, take() follows the session log each reading names: a log started
    # mid-session gets the captures from then on, beside it
    _, rs = readings
    wf, ref = LiveWorkflow(), LiveWorkflow()
    log = tmp_path / "session-20260301-110000.csv"
    half = len(rs) // 4  # within the second note
    for k, reading in enumerate(rs):
        ref.push(reading)
        wf.take(reading if k < half else dataclasses.replace(reading, log_path=str(log)))
    wf.close()
    ref.close()  # the last held note is captured when it ends
    assert wf.captures() == ref.captures()
    beside = read_captures(tmp_path / "session-20260301-110000.captures.csv")
    later = {c.index for c in wf.captures() if c.start_s >= rs[half].time_s}
    assert later and later <= {c.index for c in beside}  # (earlier ones only when a margin updated them)


def test_a_requested_capture_is_taken_by_the_feeding_thread(readings):
    _, rs = readings
    taken, refused = [], []
    wf = LiveWorkflow(auto=False, on_capture=taken.append, on_refusal=refused.append)
    silent = next(r for r in rs if not r.voiced)
    wf.request_capture()  # nothing sounding yet: refused in one line
    wf.take(silent)
    assert taken == [] and len(refused) == 1 and "nothing is sounding" in refused[0]
    voiced = [r for r in rs if r.voiced]
    for reading in voiced[:120]:
        wf.take(reading)
    wf.request_capture()
    wf.take(voiced[120])
    assert len(taken) == 1 and taken[0].source == "manual" and taken[0].note == voiced[120].note


def test_new_log_file_mid_session(tmp_path, readings):
    _, rs = readings
    wf = LiveWorkflow(log_path=tmp_path / "a.csv")
    half = len(rs) // 4  # within the second note
    for reading in rs[:half]:
        wf.push(reading)
    n_first = len(wf.captures())
    wf.set_log_path(tmp_path / "b.csv")
    for reading in rs[half:]:
        wf.push(reading)
    wf.close()
    a = read_captures(tmp_path / "a.captures.csv")
    b = read_captures(tmp_path / "b.captures.csv")
    total = len(wf.captures())
    assert total > n_first
    assert [c.index for c in wf.captures()] == list(range(1, total + 1))
    assert {c.index for c in a} == set(range(1, n_first + 1))
    assert {c.index for c in b} >= set(range(n_first + 1, total + 1))  # new ones go beside b
