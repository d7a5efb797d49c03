"""Text a user typed (capture labels) and every text cell of the frame log are safe to open in a
spreadsheet.

OWASP, "CSV Injection" (owasp.org/www-community/attacks/CSV_Injection): a cell that starts with
``=``, ``+``, ``-``, ``@``, tab (0x09) or carriage return (0x0D) may be run as a formula; prefix
such cells with a single quote, and quote every cell that holds the separator or quotes (the
csv module's RFC 4180 quoting does the latter).
"""

from __future__ import annotations

import csv
import dataclasses
import io
import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bench.framelog import (
    EXTRA_COLUMNS,
    FRAME_LOG_COLUMNS,
    CsvFrameLog,
    frame_row,
    read_frame_log,
    safe_cell,
)
from bench.tuning import TuningSettings, map_frequency
from bench.workflow.captures import Capture, capture_row, read_captures, write_captures
from dsp.frame import Frame

OWASP_START = ("=", "+", "-", "@", "\t", "\r")
HOSTILE = [
    "=HYPERLINK(\"http://example.invalid\",\"click\")",
    "=cmd|' /C calc'!A0",
    "+1+1",
    "-2+3",
    "@SUM(A1:A2)",
    "\t=1+1",
    "\r=1+1",
    "=1+1\r\n=2+2",
    "after undercutting hole 3, \"Wren\" #2",
    "",
]
text_cells = st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=40)


def _unsafe(cell: str) -> bool:
    return cell.startswith(OWASP_START)


@given(st.one_of(text_cells, st.sampled_from(HOSTILE)))
@settings(max_examples=500, deadline=None)
def test_safe_cell_never_starts_a_formula_and_only_adds_a_quote(text):
    cell = safe_cell(text)
    assert not _unsafe(cell)
    assert cell == text or cell == "'" + text


def _capture(label: str) -> Capture:
    return Capture(
        index=1, label=label, source="manual", note="A4", midi=69, register=1, mode=None,
        jump="", start_s=1.0, end_s=2.0, frames=180, cents=-3.2, cents_spread=0.8,
        cents_raw=-3.5, f0_hz=439.19, target_hz=440.0, level_dbfs=-21.0,
        level_min_dbfs=-22.0, level_max_dbfs=-20.0, odd_even_db=4.0,
        harmonics_db=(0.0, -8.0, -12.0, -20.0, -25.0, -30.0, -33.0, -40.0),
        register_margin_db=None, break_level_dbfs=None, temperament="equal", tonic="C",
        a4_hz=440.0, temp_c=20.0, ref_temp_c=20.0, rh_percent=None,
    )  # fmt: skip


def _cells_as_a_spreadsheet_sees_them(path) -> list[list[str]]:
    with open(path, encoding="utf-8", newline="") as f:
        return list(csv.reader(f))


@given(st.one_of(text_cells, st.sampled_from(HOSTILE)))
@settings(max_examples=300, deadline=None)
def test_capture_labels_are_safe_in_the_row(label):
    row = capture_row(_capture(label))
    assert not any(_unsafe(cell) for cell in row if not _is_number(cell))


def _is_number(cell: str) -> bool:
    try:
        return math.isfinite(float(cell)) or cell in ("inf", "-inf")
    except ValueError:
        return False


@pytest.mark.parametrize("label", HOSTILE)
def test_hostile_capture_labels_on_disk_and_back(tmp_path, label):
    path = write_captures(tmp_path / "take.captures.csv", [_capture(label)])
    rows = _cells_as_a_spreadsheet_sees_them(path)
    assert len(rows) == 2  # header + one capture, whatever the label held (quoted newlines)
    assert not any(_unsafe(cell) for cell in rows[1] if not _is_number(cell)), rows[1]
    assert rows[1][1] in (label, "'" + label)  # exactly what was typed, quoted when needed
    assert read_captures(path)[0].label == label  # the quote is taken off again


@given(text_cells)
@settings(max_examples=200, deadline=None)
def test_any_capture_label_round_trips(tmp_path_factory, label):
    path = write_captures(tmp_path_factory.mktemp("cap") / "t.captures.csv", [_capture(label)])
    assert read_captures(path)[0].label == label


def test_a_label_that_starts_with_a_quote_round_trips(tmp_path):
    path = write_captures(tmp_path / "t.captures.csv", [_capture("'=x")])
    assert read_captures(path)[0].label == "'=x"


@pytest.mark.parametrize("label", ["\r", "\r=1+1", "line one\r\nline two"])
def test_a_label_with_a_carriage_return_round_trips(tmp_path, label):
    path = write_captures(tmp_path / "t.captures.csv", [_capture(label)])
    assert _cells_as_a_spreadsheet_sees_them(path)[1][1] in (label, "'" + label)  # on disk: right
    assert read_captures(path)[0].label == label


def _frame(f0_hz: float | None) -> Frame:
    return Frame(
        time_s=1.0, ready_s=1.05, f0_hz=f0_hz, clarity=0.9, level_dbfs=-20.0, clipped=False,
        harmonics_db=(0.0, -6.0, -12.0, -18.0, -24.0, -30.0, -36.0, -42.0) if f0_hz else None,
        odd_even_db=1.0 if f0_hz else None, register="steady" if f0_hz else None, jump=None,
        held_f0_hz=f0_hz,
    )  # fmt: skip


@pytest.mark.parametrize("locked_note", [None, "A4", "=1+1", "-A4", "@x"])
@pytest.mark.parametrize("temperament", ["equal", "meantone4", "werckmeister3"])
def test_every_text_cell_of_the_frame_log_is_safe(tmp_path, locked_note, temperament):
    s = TuningSettings(temperament=temperament, tonic="F", a4_hz=415.0, temp_c=-5.0, ref_temp_c=24.0)
    path = tmp_path / "take.csv"
    with CsvFrameLog(path) as log:
        for f0 in (None, 207.0, 415.0, 3000.0):
            frame = _frame(f0)
            mapping = map_frequency(f0, s) if f0 else None
            log.write(frame, mapping, s, locked_note)
    rows = _cells_as_a_spreadsheet_sees_them(path)
    for row in rows[1:]:
        for cell in row:
            assert _is_number(cell) or not _unsafe(cell), (cell, row)
    assert len(read_frame_log(path)) == 4


def test_negative_numbers_stay_numbers():
    # Cents below the note are numbers, not text: a spreadsheet must read them as such, so
    # they are not quoted (OWASP's rule is for text cells).
    s = TuningSettings()
    row = frame_row(_frame(430.0), map_frequency(430.0, s), s)
    cents = row[8]
    assert cents.startswith("-") and float(cents) < 0


def test_frame_log_quotes_separators_and_quotes():
    s = dataclasses.replace(TuningSettings())
    buf = io.StringIO()
    csv.writer(buf).writerow(frame_row(_frame(440.0), map_frequency(440.0, s), s, 'A4 "held", soft'))
    back = next(csv.reader(io.StringIO(buf.getvalue())))
    columns = (*FRAME_LOG_COLUMNS, *EXTRA_COLUMNS)  # columns may be added at the end
    assert back[columns.index("locked_note")] == 'A4 "held", soft'
