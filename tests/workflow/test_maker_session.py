"""A maker's session end to end: two passes over the alto's compass with one note adjusted in
between, rendered by dsp.synth, analysed by ``bench analyze``, then ``bench chart`` and
``bench compare`` -- exactly that note must move."""

from __future__ import annotations

import csv
import dataclasses

import pytest
import soundfile as sf

from bench.cli import main
from bench.workflow.profiles import get_profile
from dsp.synth import NoteEvent

from .sessions import SAMPLE_RATE, render_events, scale_events

ALTO = get_profile("alto")
ADJUSTED = 72  # C5: "after undercutting hole 3" it plays 8 c higher
# Invented voicing of the "Wren" alto (Hollin Lane Flute Works): a few cents here and there
VOICING = {m: ((m * 7) % 11 - 5) * 0.8 for m in ALTO.notes()}


def _events(offsets):
    events = scale_events(ALTO.notes(), offsets, duration_s=0.9,
                          second_register_from=ALTO.register_starts[1])
    return [dataclasses.replace(e, vibrato_cents=0.8, vibrato_hz=4.5) for e in events]


@pytest.fixture(scope="module")
def logs(tmp_path_factory):
    folder = tmp_path_factory.mktemp("wren")
    crescendo = NoteEvent(349.2282, 4.0, level_dbfs=-32.0, crescendo_db=16.0, cents_per_db=0.7,
                          jump_at_s=3.0, jump_kind="overblown")
    passes = {
        "before": render_events([*_events(VOICING), crescendo], seed=21),
        "after": render_events(_events({**VOICING, ADJUSTED: VOICING[ADJUSTED] + 8.0}), seed=22),
    }
    out = {}
    for name, r in passes.items():
        wav = folder / f"wren-{name}.wav"
        sf.write(wav, r.audio, SAMPLE_RATE, subtype="FLOAT")
        log = folder / f"wren-{name}.csv"
        assert main(["analyze", str(wav), "--csv", str(log)]) == 0
        out[name] = log
    return folder, out


def test_chart_of_the_first_pass(logs, capsys):
    folder, log = logs
    capsys.readouterr()
    summary = folder / "summary.csv"
    assert main(["chart", str(log["before"]), "--out", str(folder / "chart.png"), "--summary", str(summary)]) == 0
    out = capsys.readouterr().out
    assert "27 of 27 notes checked" in out
    # the crescendo: synth slope 0.7 c/dB, broke near -32 + 16 x 3/4 = -20 dBFS
    line = next(x for x in out.splitlines() if x.startswith("blowing curve F4"))
    assert "broke (overblown)" in line
    with open(summary, encoding="utf-8", newline="") as f:
        table = {(r["note"], r["register"]): r for r in csv.DictReader(f)}
    for m in ALTO.notes():
        from bench.tuning.notes import note_name

        row = table[(note_name(m), str(ALTO.register_of(m)))]
        assert float(row["cents"]) == pytest.approx(VOICING[m], abs=0.5)


def test_comparison_shows_exactly_the_adjusted_note(logs, capsys):
    folder, log = logs
    capsys.readouterr()
    assert main(["compare", str(log["before"]), str(log["after"]), "--out", str(folder / "changes.png"),
                 "--csv", str(folder / "changes.csv")]) == 0
    out = capsys.readouterr().out
    last = next(x for x in out.splitlines() if "notes in both sessions" in x)
    assert last.startswith("27 notes in both sessions; 1 moved: C5 R1 +")
    moved = float(last.rsplit("+", 1)[1].split()[0])
    assert moved == pytest.approx(8.0, abs=0.5)
    with open(folder / "changes.csv", encoding="utf-8", newline="") as f:
        rows = list(csv.DictReader(f))
    assert [r["note"] for r in rows if r["moved"] == "1"] == ["C5"]
