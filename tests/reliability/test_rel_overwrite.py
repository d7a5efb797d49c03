"""Item 1 of the reliability issue: ``bench analyze --csv/--csv-dir`` never destroys a file the
user did not ask to replace.

Reproduction (before): ``bench analyze rec.wav --csv rec.wav`` replaced the recording with a
CSV header and exited 0; an existing CSV or a symbolic link (and the file it points to) was
silently overwritten.

Outside references: POSIX ``rename(2)`` replaces the directory entry atomically (a link named
as the destination is itself replaced, its target is untouched); POSIX ``open(2)`` with
``O_CREAT | O_EXCL`` fails on any existing name, a dangling link included. The test tone is
A4 = 440 Hz (ISO 16:1975, the standard pitch).
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from bench.cli import main
from bench.framelog import read_frame_log

A4_HZ = 440.0  # ISO 16:1975
RATE_HZ = 48000


def _recording(folder: Path, name: str = "rec.wav") -> Path:
    t = np.arange(int(0.6 * RATE_HZ)) / RATE_HZ
    path = folder / name
    sf.write(str(path), 0.5 * np.sin(2 * math.pi * A4_HZ * t), RATE_HZ, subtype="PCM_16")
    return path


def _one_error_line(err: str) -> None:
    assert err.startswith("error: ") and err.count("\n") == 1, err


def test_csv_naming_the_recording_is_refused_and_the_recording_kept(tmp_path, capsys):
    rec = _recording(tmp_path)
    before = rec.read_bytes()
    assert main(["analyze", str(rec), "--csv", str(rec)]) == 2
    _one_error_line(capsys.readouterr().err)
    assert rec.read_bytes() == before


def test_csv_naming_the_recording_is_refused_even_with_overwrite(tmp_path, capsys):
    rec = _recording(tmp_path)
    before = rec.read_bytes()
    assert main(["analyze", str(rec), "--csv", str(rec), "--overwrite"]) == 2
    assert "is the input" in capsys.readouterr().err
    assert rec.read_bytes() == before


def test_a_link_to_the_recording_is_the_recording(tmp_path, capsys):
    rec = _recording(tmp_path)
    before = rec.read_bytes()
    link = tmp_path / "out.csv"
    link.symlink_to(rec)
    assert main(["analyze", str(rec), "--csv", str(link), "--overwrite"]) == 2
    assert "is the input" in capsys.readouterr().err
    assert rec.read_bytes() == before and link.is_symlink()


def test_an_existing_csv_is_refused_without_overwrite_and_replaced_with_it(tmp_path, capsys):
    rec = _recording(tmp_path)
    out = tmp_path / "mine.csv"
    out.write_text("my own notes\n", encoding="utf-8")
    assert main(["analyze", str(rec), "--csv", str(out)]) == 2
    err = capsys.readouterr().err
    _one_error_line(err)
    assert "exists already" in err and "--overwrite" in err
    assert out.read_text(encoding="utf-8") == "my own notes\n"
    assert main(["analyze", str(rec), "--csv", str(out), "--overwrite"]) == 0
    rows = read_frame_log(out)
    voiced = [float(r["f0_hz"]) for r in rows if r["f0_hz"]]
    assert voiced and abs(1200 * math.log2(np.median(voiced) / A4_HZ)) < 5  # the tone written


def test_a_link_is_never_written_through(tmp_path, capsys):
    rec = _recording(tmp_path)
    precious = tmp_path / "precious.txt"
    precious.write_text("keep me\n", encoding="utf-8")
    link = tmp_path / "log.csv"
    link.symlink_to(precious)
    assert main(["analyze", str(rec), "--csv", str(link)]) == 2
    assert "symbolic link" in capsys.readouterr().err
    assert precious.read_text(encoding="utf-8") == "keep me\n" and link.is_symlink()
    # Asked to overwrite: the link itself is replaced (rename(2)), its target is untouched.
    assert main(["analyze", str(rec), "--csv", str(link), "--overwrite"]) == 0
    assert precious.read_text(encoding="utf-8") == "keep me\n"
    assert not link.is_symlink() and read_frame_log(link)


def test_a_dangling_link_is_refused(tmp_path, capsys):
    rec = _recording(tmp_path)
    link = tmp_path / "log.csv"
    link.symlink_to(tmp_path / "nowhere" / "x.csv")
    assert main(["analyze", str(rec), "--csv", str(link)]) == 2
    assert not (tmp_path / "nowhere").exists()


def test_csv_dir_refuses_an_existing_csv_before_analysing_anything(tmp_path, capsys):
    a = _recording(tmp_path, "a.wav")
    b = _recording(tmp_path, "b.wav")
    out = tmp_path / "out"
    out.mkdir()
    (out / "b.csv").write_text("older work\n", encoding="utf-8")
    assert main(["analyze", str(a), str(b), "--csv-dir", str(out)]) == 2
    _one_error_line(capsys.readouterr().err)
    assert (out / "b.csv").read_text(encoding="utf-8") == "older work\n"
    assert not (out / "a.csv").exists()  # refused before the first file was analysed


def test_a_replaced_csv_leaves_no_temporary_file(tmp_path, capsys):
    rec = _recording(tmp_path)
    out = tmp_path / "take.csv"
    out.write_text("x\n", encoding="utf-8")
    assert main(["analyze", str(rec), "--csv", str(out), "--overwrite"]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["rec.wav", "take.captures.csv", "take.csv"]  # captures beside it


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="POSIX named pipes")
def test_an_output_that_is_a_pipe_is_refused_even_with_overwrite(tmp_path, capsys):
    rec = _recording(tmp_path)
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    assert main(["analyze", str(rec), "--csv", str(fifo), "--overwrite"]) == 2
    assert "named pipe" in capsys.readouterr().err


def _frame_log(tmp_path: Path, capsys) -> Path:
    rec = _recording(tmp_path)
    log = tmp_path / "session.csv"
    assert main(["analyze", str(rec), "--csv", str(log)]) == 0
    capsys.readouterr()
    return log


@pytest.mark.parametrize("option", ["--summary", "--out"])
def test_chart_outputs_follow_the_same_rules(tmp_path, capsys, option):
    log = _frame_log(tmp_path, capsys)
    before = log.read_bytes()
    suffix = ".csv" if option == "--summary" else ".png"
    assert main(["chart", str(log), option, str(log.with_suffix(suffix)) if suffix == ".csv" else str(log)]) == 2
    assert log.read_bytes() == before  # the session itself is never an output
    mine = tmp_path / f"mine{suffix}"
    mine.write_bytes(b"my own work\n")
    assert main(["chart", str(log), option, str(mine)]) == 2
    err = capsys.readouterr().err
    assert "exists already" in err and mine.read_bytes() == b"my own work\n"


def test_compare_csv_that_is_an_input_is_refused(tmp_path, capsys):
    log = _frame_log(tmp_path, capsys)
    before = log.read_bytes()
    assert main(["compare", str(log), str(log), "--csv", str(log), "--overwrite"]) == 2
    assert "is the input" in capsys.readouterr().err
    assert log.read_bytes() == before
