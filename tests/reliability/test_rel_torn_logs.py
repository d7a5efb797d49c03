"""A frame log cut at any byte (a killed writer, a half-copied file, a full disk) still reads:
the rows that were completely on disk come back, in order, and nothing else."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from bench.errors import LogError
from bench.framelog import (
    EXTRA_COLUMNS,
    FRAME_LOG_COLUMNS,
    CsvFrameLog,
    frame_row,
    read_frame_log,
)
from bench.tuning import TuningSettings, map_frequency
from dsp.frame import Frame

N_ROWS = 40


def _frame(i: int) -> Frame:
    f0 = None if i % 7 == 3 else 440.0 * 2 ** ((i % 12) / 12)
    return Frame(
        time_s=i * 0.005333, ready_s=i * 0.005333 + 0.04, f0_hz=f0, clarity=0.9, level_dbfs=-20.0 - i % 5,
        clipped=i % 11 == 0, harmonics_db=(0.0, -6.0, -12.0, -18.0, -24.0, -30.0, -36.0, -42.0) if f0 else None,
        odd_even_db=1.5 if f0 else None, register="steady" if f0 else None, jump=None, held_f0_hz=f0,
    )  # fmt: skip


@pytest.fixture(scope="module")
def full_log(tmp_path_factory):
    path = tmp_path_factory.mktemp("log") / "take.csv"
    s = TuningSettings(temperament="meantone4", tonic="F", a4_hz=415.0)
    with CsvFrameLog(path) as log:
        for i in range(N_ROWS):
            frame = _frame(i)
            log.write(frame, map_frequency(frame.f0_hz, s) if frame.f0_hz else None, s, "A4" if i > 20 else None)
    data = path.read_bytes()
    rows = read_frame_log(path)
    assert len(rows) == N_ROWS
    line_ends = [i + 1 for i in range(len(data)) if data[i : i + 1] == b"\n"]
    return data, rows, line_ends


@given(cut=st.integers(min_value=0, max_value=10**6))
@settings(max_examples=300, deadline=None)
def test_a_log_cut_at_any_byte_gives_back_the_complete_rows(full_log, tmp_path_factory, cut):
    data, rows, line_ends = full_log
    cut = cut % (len(data) + 1)
    path = tmp_path_factory.mktemp("cut") / "take.csv"
    path.write_bytes(data[:cut])
    complete = sum(1 for end in line_ends[1:] if end <= cut)  # rows whose line end is on disk
    if cut < line_ends[0]:
        with pytest.raises(LogError, match="not a frame log"):
            read_frame_log(path)  # not even the header: one line, no traceback
        return
    got = read_frame_log(path)
    assert got == rows[:complete]


@pytest.mark.parametrize("tail", [b"\x00" * 4096, b"0.5,0.5,44", "é".encode()[:1], b"\r"])
def test_junk_after_the_last_row_is_dropped(full_log, tmp_path, tail):
    # Zero-filled blocks are what a file system can leave after a power cut; the others are
    # torn writes (inside a number, inside a UTF-8 character, between CR and LF).
    data, rows, _ = full_log
    path = tmp_path / "take.csv"
    path.write_bytes(data + tail)
    assert read_frame_log(path) == rows


def test_a_log_that_is_not_utf8_or_not_csv_gives_one_line(tmp_path):
    path = tmp_path / "take.csv"
    path.write_bytes(",".join(["time_s"]).encode() + b"\xff\xfe\n")
    with pytest.raises(LogError, match="take.csv"):
        read_frame_log(path)
    path.write_bytes(b"PK\x03\x04 a spreadsheet saved over the log\n")
    with pytest.raises(LogError, match="not a frame log"):
        read_frame_log(path)


def test_a_cell_with_a_quoted_line_end_reads_back_exactly(tmp_path):
    s = TuningSettings()
    row = frame_row(_frame(1), map_frequency(440.0, s), s)
    row[(*FRAME_LOG_COLUMNS, *EXTRA_COLUMNS).index("locked_note")] = "line one\r\nline two\rthree"  # quoted by the csv writer
    path = tmp_path / "take.csv"
    with CsvFrameLog(path) as log:
        log.write_row(row)
    assert read_frame_log(path)[0]["locked_note"] == "line one\r\nline two\rthree"
