"""The frame log format: columns, empty pitch cells when unvoiced, torn-line tolerance."""

from __future__ import annotations

import csv

import pytest

from bench.errors import LogError
from bench.reading import make_reading
from bench.framelog import (
    FRAME_LOG_COLUMNS,
    CsvFrameLog,
    new_log_path,
    read_frame_log,
    safe_cell,
)
from bench.tuning import TuningSettings
from dsp.frame import Frame

HARM = (0.0, -4.0, -9.0, -12.0, -15.0, -20.0, -24.0, -30.0)


def _voiced(t: float, f0: float = 441.0) -> Frame:
    return Frame(t, t + 0.05, f0, 0.95, -18.0, False, HARM, 2.5, "steady", None, f0)


def _unvoiced(t: float) -> Frame:
    return Frame(t, t + 0.05, None, 0.05, -70.0, False, None, None, None, None)


def test_header_is_the_documented_column_order(tmp_path):
    # The column list and order are the project's published format (README "Frame log").
    path = tmp_path / "log.csv"
    with CsvFrameLog(path) as log:
        log.write(make_reading(_voiced(0.0), TuningSettings()))
    header = next(csv.reader(path.open(encoding="utf-8", newline="")))
    assert tuple(header[: len(FRAME_LOG_COLUMNS)]) == (
        "time_s", "ready_s", "f0_hz", "clarity", "level_dbfs", "note", "target_hz",
        "cents_raw", "cents", "register", "jump", "odd_even_db",
        "h1_db", "h2_db", "h3_db", "h4_db", "h5_db", "h6_db", "h7_db", "h8_db",
        "temperament", "tonic", "a4_hz", "temp_c", "ref_temp_c",
    )  # fmt: skip


def test_rfc4180_line_ends_and_unvoiced_rows_leave_pitch_empty(tmp_path):
    # RFC 4180 section 2: records end in CRLF.
    path = tmp_path / "log.csv"
    s = TuningSettings()
    with CsvFrameLog(path) as log:
        log.write(make_reading(_voiced(0.0), s))
        log.write(make_reading(_unvoiced(0.01), s))
    raw = path.read_bytes()
    assert raw.count(b"\r\n") == 3
    rows = read_frame_log(path)
    assert rows[0]["note"] == "A4" and rows[0]["register"] == "steady"
    for col in ("f0_hz", "note", "target_hz", "cents_raw", "cents", "register", "h1_db"):
        assert rows[1][col] == ""
    assert rows[1]["a4_hz"] == "440.00"  # settings are on every row, voiced or not


def test_torn_last_line_is_dropped_not_fatal(tmp_path):
    path = tmp_path / "log.csv"
    s = TuningSettings()
    with CsvFrameLog(path) as log:
        for i in range(5):
            log.write(make_reading(_voiced(i * 0.01), s))
    data = path.read_bytes()
    path.write_bytes(data[:-20])  # a writer killed mid-row
    rows = read_frame_log(path)
    assert len(rows) == 4
    assert rows[-1]["time_s"] == "0.030000"


def test_existing_file_is_not_overwritten(tmp_path):
    path = tmp_path / "log.csv"
    path.write_text("keep me")
    with pytest.raises(LogError, match="exists already"):
        CsvFrameLog(path)
    assert path.read_text() == "keep me"


def test_unwritable_folder_gives_one_line(tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("")
    with pytest.raises(LogError, match="cannot write the log") as err:
        CsvFrameLog(blocker / "sub" / "log.csv")
    assert "\n" not in str(err.value)


def test_rows_reach_the_os_within_the_flush_interval(tmp_path):
    now = [0.0]
    path = tmp_path / "log.csv"
    s = TuningSettings()
    log = CsvFrameLog(path, flush_interval_s=1.0, clock=lambda: now[0])
    log.write(make_reading(_voiced(0.0), s))
    now[0] = 1.5
    log.write(make_reading(_voiced(0.01), s))
    # read through a separate handle while the writer is still open
    assert len(read_frame_log(path)) == 2
    log.close()
    log.close()  # closing twice is harmless


@pytest.mark.parametrize("text", ["=1+1", "+cmd", "-2+3", "@SUM(A1)"])
def test_formula_cells_are_neutralised(text):
    # OWASP "CSV Injection": prefix cells starting with = + - @ so spreadsheets show text.
    assert safe_cell(text).startswith("'")


def test_new_log_path_never_collides(tmp_path):
    from datetime import datetime

    now = datetime(2026, 3, 4, 5, 6, 7)
    first = new_log_path(tmp_path, now=now)
    first.write_text("")
    second = new_log_path(tmp_path, now=now)
    assert first.name == "session-20260304-050607.csv"
    assert second != first and not second.exists()
