"""One record, three paths: an unattended run of a recording, ``bench analyze`` of the same
recording and ``bench chart --save-captures`` of the frame log give the same captures.

The recording is synthesised (dsp.synth) with notes at known offsets from 12-TET on
A4 = 440 Hz (ISO 16:1975; the cent as defined by Ellis, 1200 per octave), one of them
overblown: the outside check is that truth. The three paths must agree with each other to
0.01 c (the frame log keeps cents to 3 decimals).
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from bench.cli import main
from bench.workflow.captures import captures_path_for, read_captures

OFFSETS = {65: 3.0, 67: -6.0, 69: 0.0, 72: 9.0}  # F4 G4 A4 C5, cents from 12-TET


def _recording(path: Path) -> Path:
    import soundfile as sf

    from dsp.synth import NoteEvent, render

    events = [NoteEvent(440.0 * 2 ** ((m - 69 + c / 100) / 12), 1.3, gap_s=0.3) for m, c in OFFSETS.items()]
    # D5, in tune, overblown after a second
    events.append(NoteEvent(440.0 * 2 ** ((74 - 69) / 12), 1.5, jump_at_s=1.0, jump_kind="overblown", gap_s=0.3))
    r = render(events, 48000, seed=11)
    sf.write(path, r.audio, 48000, subtype="PCM_24")
    return path


def _key(caps):  # type: ignore[no-untyped-def]
    return [(c.note, c.register, c.mode, c.jump, c.source) for c in caps]


def test_headless_run_analyze_and_chart_give_the_same_captures(tmp_path, capsys):
    PHRASE = _recording(tmp_path / "scale.wav")
    run_log = tmp_path / "run" / "take.csv"
    ana_log = tmp_path / "ana" / "take.csv"
    assert main(["run", "--no-ui", "--input", str(PHRASE), "--log", str(run_log), "--profile", "alto"]) == 0
    assert main(["analyze", str(PHRASE), "--csv", str(ana_log)]) == 0
    # the chart path: the frame log alone, its captures computed from it and saved beside it
    chart_log = tmp_path / "chart" / "take.csv"
    chart_log.parent.mkdir()
    shutil.copy(run_log, chart_log)
    assert main(["chart", str(chart_log), "--profile", "alto", "--save-captures"]) == 0
    capsys.readouterr()

    from_run = read_captures(captures_path_for(run_log))
    from_analyze = read_captures(captures_path_for(ana_log))
    from_chart = read_captures(captures_path_for(chart_log))
    assert from_run, "the unattended run wrote no captures beside its log"
    assert _key(from_run) == _key(from_analyze) == _key(from_chart)
    for a, b, c in zip(from_run, from_analyze, from_chart, strict=True):
        assert a.cents == pytest.approx(b.cents, abs=0.01)
        assert a.cents == pytest.approx(c.cents, abs=0.01)
        assert a.frames == b.frames == c.frames
    plain = [c for c in from_run if not c.jump]
    assert {c.midi for c in plain} == set(OFFSETS)
    # the overblown D5 is kept under the fingered D5 (one capture, marked with its jump and
    # the mode it sounded), its cents from the steady second before the break
    broken = [c for c in from_run if c.jump]
    assert [(c.midi, c.jump, c.mode) for c in broken] == [(74, "overblown", 2)]
    assert broken[0].cents == pytest.approx(0.0, abs=0.5)
    for cap in plain:
        assert cap.cents == pytest.approx(OFFSETS.get(cap.midi, 0.0), abs=0.5)
