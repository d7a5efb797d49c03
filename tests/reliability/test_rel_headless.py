"""Items 8, 9 and 10 of the reliability issue: an unattended run says what it does, fails with
a status a script can test, and uses the right words.

Reproduction (before):
* ``bench run --no-ui`` logged with the settings last chosen on the screen and printed neither
  them nor where they came from (a log came out in Pythagorean on D-flat at A4 = 392 Hz);
  ``--label`` was refused with ``--no-ui``;
* ``--no-ui --input mic`` with no device fell back to the demo and exited 0; an unwritable log
  folder ran with no log and exited 0;
* a FIFO or /dev/zero was "the file is empty (0 bytes)", a permission error "not readable as
  audio (system error)"; an empty folder in a batch was skipped silently; after a full disk the
  summary counted rows the file did not hold; SIGHUP did not close the log like SIGTERM; error
  lines echoed a 100 KB bad value in full.

Outside references: the shell reports a process ended by signal N as 128 + N (POSIX XCU 2.8.2;
SIGHUP = 1, SIGTERM = 15 on Linux, signal(7)); ``setrlimit(2)`` RLIMIT_FSIZE makes a write past
the limit fail with EFBIG once SIGXFSZ is ignored -- the same failure path as a full disk
(ENOSPC) for the writer; RFC 4180 (each record ends with CRLF). A4 = 392 Hz is the low baroque
pitch (*common practice*).
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
import tomllib
from pathlib import Path

import pytest

from bench.cli import main
from bench.config import settings_path
from bench.framelog import read_frame_log

pytestmark = pytest.mark.timeout(120)
ROOT = Path(__file__).resolve().parents[2]


def _saved(text: str) -> Path:
    path = settings_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


# -- item 8: the settings in force, where they came from, the label -------------------------


def test_headless_run_says_every_setting_and_its_origin(tmp_path, capsys):
    settings_file = _saved('[tuning]\na4_hz = 392.0\ntemperament = "pythagorean"\ntonic = "Db"\n')
    log = tmp_path / "pass.csv"
    status = main(["run", "--no-ui", "--input", "demo", "--duration", "0.5", "--log", str(log),
                   "--tonic", "F", "--label", "after undercutting hole 3"])
    assert status == 0
    err = capsys.readouterr().err
    line = next(x for x in err.splitlines() if x.startswith("settings: "))
    assert f"A4 = 392.00 Hz [settings file {settings_file}]" in line
    assert f"temperament pythagorean [settings file {settings_file}]" in line
    assert "tonic F [command line]" in line
    assert "air 20 °C [default]" in line and "in tune at 20 °C [default]" in line
    assert "label 'after undercutting hole 3'" in line
    record = tomllib.loads((tmp_path / "pass.run.toml").read_text(encoding="utf-8"))
    assert record["run"]["label"] == "after undercutting hole 3"
    assert record["settings"]["a4_hz"] == 392.0 and record["settings"]["tonic"] == "F"
    assert record["settings_from"]["tonic"] == "command line"
    assert record["settings_from"]["a4_hz"] == f"settings file {settings_file}"
    assert record["settings_from"]["ref_temp_c"] == "default"
    rows = read_frame_log(log)  # every row carries the settings in force too
    assert rows and {r["a4_hz"] for r in rows} == {"392.00"} and {r["tonic"] for r in rows} == {"F"}


# -- item 9: exit statuses --------------------------------------------------------------------


def test_no_microphone_unattended_is_status_3_and_no_log(monkeypatch, capsys):
    from bench.sources import mic

    monkeypatch.setattr(mic, "list_input_devices", list)
    assert main(["run", "--no-ui", "--input", "mic", "--duration", "0.5"]) == 3
    err = capsys.readouterr().err
    assert err.startswith("error: no audio input device found") and err.count("\n") == 1
    assert not list(Path(os.environ["BENCH_LOG_DIR"]).glob("*.csv"))


def test_a_log_folder_that_cannot_be_made_is_status_4(tmp_path, capsys):
    blocker = tmp_path / "a-file"
    blocker.write_text("x", encoding="utf-8")
    assert main(["run", "--no-ui", "--input", "demo", "--duration", "0.5", "--log-dir", str(blocker / "logs")]) == 4
    err = capsys.readouterr().err
    assert err.startswith("error: cannot create the log folder") and err.count("\n") == 1


def _limit_file_size(limit_bytes: int):  # runs in the child before exec
    def prepare() -> None:
        import resource

        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # a write past the limit fails (EFBIG)
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit_bytes, limit_bytes))

    return prepare


def test_a_log_stopped_by_a_full_disk_counts_the_rows_on_disk_and_is_status_4(tmp_path):
    log = tmp_path / "full.csv"
    done = subprocess.run(
        [sys.executable, "-m", "bench", "run", "--no-ui", "--input", "demo", "--duration", "3", "--log", str(log)],
        capture_output=True, text=True, cwd=ROOT, timeout=90, preexec_fn=_limit_file_size(40_000), check=False,
    )
    assert done.returncode == 4, done.stderr
    assert "log error" in done.stderr or "write" in done.stderr
    with open(log, "rb") as f:
        on_disk = f.read().count(b"\n") - 1  # complete rows less the header
    assert on_disk > 0
    assert f"({on_disk} rows; stopped by a write error)" in done.stderr, (on_disk, done.stderr)


# -- item 10: the right words, SIGHUP, long values -------------------------------------------


@pytest.mark.parametrize("kind", ["fifo", "device"])
def test_a_pipe_or_device_given_to_analyze_is_named_as_such(tmp_path, capsys, kind):
    if kind == "fifo":
        path = tmp_path / "take.wav"
        os.mkfifo(path)
        words = "named pipe (FIFO)"
    else:
        path = Path("/dev/zero")
        words = "character device"
    assert main(["analyze", str(path)]) == 1
    err = capsys.readouterr().err
    assert words in err and "empty" not in err


def test_a_permission_error_is_called_one(tmp_path, capsys, monkeypatch):
    # Root reads any file, so the refusal of open(2) (EACCES) is simulated for this one path.
    import soundfile as sf

    path = tmp_path / "locked.wav"
    sf.write(str(path), [0.0] * 4800, 48000)
    real_open = os.open

    def deny(p, *a, **k):
        if os.fspath(p) == str(path):
            raise PermissionError(13, "Permission denied", str(p))
        return real_open(p, *a, **k)

    monkeypatch.setattr(os, "open", deny)
    assert main(["analyze", str(path)]) == 1
    err = capsys.readouterr().err
    assert "permission denied" in err and "system error" not in err


def test_an_empty_folder_in_a_batch_is_reported(tmp_path, capsys):
    import soundfile as sf

    take = tmp_path / "take.wav"
    sf.write(str(take), [0.0] * 4800, 48000)
    empty = tmp_path / "empty"
    empty.mkdir()
    main(["analyze", str(take), str(empty)])
    assert f"no audio files in the folder {empty}" in capsys.readouterr().err


def test_sighup_closes_the_log_like_sigterm(tmp_path):
    log = tmp_path / "hup.csv"
    proc = subprocess.Popen(
        [sys.executable, "-m", "bench", "run", "--no-ui", "--input", "demo", "--log", str(log)],
        stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, cwd=ROOT,
    )
    assert proc.stderr is not None
    for line in proc.stderr:  # wait until it listens
        if line.startswith("listening to"):
            break
    time.sleep(1.0)
    proc.send_signal(signal.SIGHUP)
    rest = proc.stderr.read()
    assert proc.wait(timeout=30) == 128 + signal.SIGHUP, rest
    assert "hung up; the log is complete" in rest
    assert log.read_bytes().endswith(b"\r\n")  # RFC 4180 record end: the last row is whole
    assert read_frame_log(log)


def test_an_error_line_does_not_echo_a_huge_value(capsys):
    huge = "9" * 50_000 + "x" * 50_000
    assert main(["notes", "--temp", huge]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and len(err) < 500 and "100000 characters" in err


def test_an_argparse_error_does_not_echo_a_huge_value(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["notes", "--unknown-" + "y" * 100_000])
    assert stop.value.code == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and len(err) < 600
