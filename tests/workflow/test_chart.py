"""The tuning chart: which capture counts, unchecked notes, text, CSV and pictures."""

from __future__ import annotations

import csv
import dataclasses
import shutil
import subprocess
import sys
import xml.etree.ElementTree as ET

import pytest

from bench.cli import main
from bench.framelog import CsvFrameLog
from bench.workflow.captures import captures_from_readings
from bench.workflow.chart import (
    SUMMARY_COLUMNS,
    build_chart,
    format_text_chart,
    plot_chart,
    write_summary_csv,
)
from bench.workflow.profiles import get_profile

from .sessions import render_events, scale_events, truth_rows

ALTO = get_profile("alto")
PLAYED = {65: 0.0, 66: -12.0, 67: 3.0, 72: 8.0, 81: -4.0}  # F4 F#4 G4 C5 A5 (A5: register 2)


def write_log(path, readings):
    """A frame log as bench writes it (bench.framelog.CsvFrameLog)."""
    with CsvFrameLog(path) as log:
        for reading in readings:
            log.write(reading)
    return path


@pytest.fixture(scope="module")
def rows():
    # synth truth rows (exact pitch), second-register notes rendered in mode 2
    events = scale_events(list(PLAYED), PLAYED, second_register_from=ALTO.register_starts[1])
    return truth_rows(render_events(events))


@pytest.fixture(scope="module")
def caps(rows):
    return captures_from_readings(rows, profile=ALTO)


def test_chart_has_every_note_and_marks_unchecked(caps):
    chart = build_chart(caps, ALTO)
    assert len(chart.entries) == 27  # REFERENCES §5: alto F4-G6
    checked = {(e.midi, e.register) for e in chart.checked()}
    assert checked == {(65, 1), (66, 1), (67, 1), (72, 1), (81, 2)}
    assert len(chart.unchecked()) == 22
    for e in chart.checked():
        assert e.capture.cents == pytest.approx(PLAYED[e.midi], abs=0.05)


def test_latest_capture_wins_and_extra_notes_are_kept(caps):
    later = dataclasses.replace(caps[0], index=99, cents=-6.0)
    below = dataclasses.replace(caps[0], index=100, midi=64, note="E4")  # below the alto's compass
    chart = build_chart([*caps, later, below], ALTO)
    assert chart.entry(65, 1).capture.cents == -6.0
    e4 = chart.entry(64, 1)
    assert e4 is not None and e4.status == "extra"
    only = build_chart([*caps, dataclasses.replace(later, label="pass 2")], ALTO, label="pass 2")
    assert [e.midi for e in only.checked()] == [65]


def test_text_chart(caps):
    text = format_text_chart(build_chart(caps, ALTO))
    lines = text.splitlines()
    assert sum("not yet checked" in line for line in lines) == 22
    assert lines[-1] == "5 of 27 notes checked; 2 outside ±5 c: F#4 R1, C5 R1"
    c5 = next(line for line in lines if line.startswith("C5 "))
    gauge = c5[-51:]
    assert gauge.index("o") == 25 + 8  # one character per cent, target in the middle
    assert gauge[25] == "|"
    far = format_text_chart(build_chart([dataclasses.replace(caps[0], cents=40.0)], ALTO))
    assert next(line for line in far.splitlines() if line.startswith("F4 ")).endswith(">")


def test_text_chart_shows_written_notes_for_a_transposing_instrument():
    soprano = get_profile("soprano")
    text = format_text_chart(build_chart([], soprano))
    assert "writ" in text and any(line.startswith("C5    C4") for line in text.splitlines())


def test_summary_csv_is_spreadsheet_safe(tmp_path, caps):
    # OWASP "CSV Injection": a label starting with = must not reach a spreadsheet as a formula
    hostile = [dataclasses.replace(c, label="=cmd|'/c calc'!A1") for c in caps]
    path = write_summary_csv(build_chart(hostile, ALTO), tmp_path / "summary.csv")
    with open(path, encoding="utf-8", newline="") as f:
        table = list(csv.DictReader(f))
    assert list(table[0]) == list(SUMMARY_COLUMNS)
    assert len(table) == 27
    c5 = next(r for r in table if r["note"] == "C5")
    assert (c5["status"], float(c5["cents"]), c5["register"]) == ("checked", pytest.approx(8.0, abs=0.05), "1")
    assert c5["label"] == "'=cmd|'/c calc'!A1"
    assert sum(r["status"] == "unchecked" for r in table) == 22


def test_png_and_svg_pictures(tmp_path, caps, rows):
    from bench.workflow.blowing import find_blowing_curves

    chart = build_chart(caps, ALTO)
    png = plot_chart(chart, tmp_path / "chart.png")
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    svg = plot_chart(chart, tmp_path / "chart.svg", blowing=find_blowing_curves(rows))
    root = ET.parse(svg).getroot()
    assert root.tag.endswith("svg")
    if shutil.which("rsvg-convert"):
        out = tmp_path / "chart-from-svg.png"
        subprocess.run(["rsvg-convert", "-o", str(out), str(svg)], check=True)
        assert out.read_bytes()[:4] == b"\x89PNG"


def test_no_matplotlib_at_import():
    code = (
        "import sys, bench.workflow, bench.workflow.captures, bench.workflow.chart, "
        "bench.workflow.compare, bench.workflow.blowing, bench.workflow.session, bench.commands.chart;"
        "print('matplotlib' in sys.modules)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_bench_chart_command(tmp_path, rows, capsys):
    log = write_log(tmp_path / "session-20260301-093000.csv", rows)
    status = main(["chart", str(log), "--out", str(tmp_path / "c.png"), "--summary",
                   str(tmp_path / "s.csv"), "--save-captures"])
    out = capsys.readouterr().out
    assert status == 0
    assert "captures: computed from the frame log (5)" in out
    assert "5 of 27 notes checked" in out
    assert (tmp_path / "c.png").exists() and (tmp_path / "s.csv").exists()
    side = tmp_path / "session-20260301-093000.captures.csv"
    assert side.exists()
    # the second time the captures file beside the log is used
    assert main(["chart", str(log)]) == 0
    assert f"captures: {side} (5)" in capsys.readouterr().out
    # a captures file works on its own too
    assert main(["chart", str(side), "--profile", "alto"]) == 0


@pytest.mark.parametrize(
    ("args", "pattern"),
    [
        (["--out", "chart.pdf"], r"error: --out chart.pdf has suffix '.pdf'; use .png or .svg"),
        (["--profile", "oboe"], r"error: profile 'oboe' is unknown"),
        (["--label", "nope"], r"error: no captures with label 'nope'"),
    ],
)
def test_bench_chart_errors(tmp_path, rows, capsys, args, pattern):
    import re

    log = write_log(tmp_path / "log.csv", rows)
    assert main(["chart", str(log), *args]) == 2
    err = capsys.readouterr().err
    assert re.search(pattern, err), err
    assert err.count("\n") == 1


def test_bench_chart_missing_or_foreign_file(tmp_path, capsys):
    assert main(["chart", str(tmp_path / "none.csv")]) == 2
    assert "error: no such session file" in capsys.readouterr().err
    other = tmp_path / "other.csv"
    other.write_text("a,b\n1,2\n", encoding="utf-8")
    assert main(["chart", str(other)]) == 2
    assert "neither a frame log nor a captures file" in capsys.readouterr().err


def test_bench_chart_flats_spells_every_note_with_flats(tmp_path, capsys):
    # one spelling per chart: with --flats no note is spelt with a sharp (common practice:
    # a chart for an instrument in F is usually read in flats)
    from bench.cli import main

    log = tmp_path / "take.csv"
    assert main(["run", "--no-ui", "--input", "demo", "--duration", "4", "--log", str(log)]) == 0
    capsys.readouterr()
    assert main(["chart", str(log), "--profile", "alto", "--flats"]) == 0
    lines = capsys.readouterr().out.splitlines()
    names = [ln.split()[0] for ln in lines if ln[:1] in "ABCDEFG" and ln.split()[0][-1].isdigit()]
    assert names and not any("#" in n for n in names) and any("b" in n for n in names)
