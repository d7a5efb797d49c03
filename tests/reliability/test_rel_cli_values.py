"""Bad command-line values: exit status 2 and one line that names the value and says what to do.

Run through ``bench.cli.main`` with capsys, and a couple through a real ``bench`` process.
"""

from __future__ import annotations

import subprocess
import sys

import pytest

from bench.cli import main

STEADY = "test_audio/steady_a4_48k.wav"

# (arguments, text the one line must hold: the value given, and a hint of the fix)
BAD_VALUES = [
    (["run", "--no-ui", "--input", "demo", "--a4", "1000"], ["1000", "300-500"]),
    (["run", "--no-ui", "--input", "demo", "--a4", "-440"], ["-440", "300-500"]),
    (["run", "--no-ui", "--input", "demo", "--a4", "nan"], ["nan", "300-500"]),
    (["run", "--no-ui", "--input", "demo", "--a4", "abc"], ["abc", "preset"]),
    (["run", "--no-ui", "--input", "demo", "--a4", "1e400"], ["300-500"]),
    (["run", "--no-ui", "--input", "demo", "--temp", "400"], ["400", "-10 to 45"]),
    (["run", "--no-ui", "--input", "demo", "--temp=-inf"], ["-inf", "give"]),
    (["run", "--no-ui", "--input", "demo", "--temp", "warm"], ["warm", "give"]),
    (["run", "--no-ui", "--input", "demo", "--ref-temp", "99"], ["99", "-10 to 45"]),
    (["run", "--no-ui", "--input", "demo", "--rh", "150"], ["150", "0-100"]),
    (["run", "--no-ui", "--input", "demo", "--tonic", "H"], ["'H'", "use C"]),
    (["run", "--no-ui", "--input", "demo", "--tonic", "=1+1"], ["=1+1", "use C"]),
    (["run", "--no-ui", "--input", "demo", "--temperament", "nosuch"], ["nosuch", "use one of"]),
    (["run", "--no-ui", "--input", "demo", "--temperament", "missing.toml"], ["missing.toml", "give"]),
    (["run", "--no-ui", "--input", "demo", "--duration", "-5"], ["-5", "above 0"]),
    (["run", "--no-ui", "--input", "demo", "--duration", "soon"], ["soon", "give"]),
    (["run", "--input", "demo", "--duration", "5"], ["--duration", "--no-ui"]),
    (["run", "--no-ui", "--input", "demo", "--block", "3"], ["3", "16-16384"]),
    (["run", "--no-ui", "--input", "demo", "--rate", "1000000"], ["1000000", "16000-96000"]),
    (["run", "--no-ui", "--input", "demo", "--log-rate", "0"], ["0", "above 0"]),
    (["run", "--no-ui", "--input", "nosuch.wav"], ["nosuch.wav"]),
    (["run", "--no-ui", "--input", "test_audio/bad/not_audio.wav"], ["not_audio.wav"]),
    (["run", "--no-ui", "--input", "test_audio/bad/empty.wav"], ["empty.wav"]),
    (["run", "--no-ui", "--input", STEADY, "--device", "2"], ["--device", "mic"]),
    (["run", "--no-ui", "--device", "nosuchdevice", "--duration", "1"], ["device"]),
    (["analyze", "--lock", "X9", STEADY], ["X9", "e.g. C4"]),
    (["analyze", "--lock", "C99", STEADY], ["C99", "C-1 to G9"]),
    (["analyze", "--a4", "200", STEADY], ["200", "300-500"]),
    (["notes", "--a4", "0"], ["0", "300-500"]),
    (["run", "--bogus"], ["--bogus"]),
]


@pytest.fixture(autouse=True)
def _at_repo_root(monkeypatch, request):
    monkeypatch.chdir(request.config.rootpath)


@pytest.mark.parametrize("argv,must_hold", BAD_VALUES, ids=[" ".join(a[-2:]) for a, _ in BAD_VALUES])
def test_bad_value_exits_2_with_one_line(argv, must_hold, capsys):
    try:
        status = main(argv)
    except SystemExit as exc:  # argparse's own errors leave through parser.exit
        status = exc.code
    out, err = capsys.readouterr()
    assert status == 2, (status, err)
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert lines[0].startswith("error: "), err
    for text in must_hold:
        assert text in lines[0], (text, lines[0])
    assert "Traceback" not in out + err


def test_log_dir_that_is_a_file_is_refused(tmp_path, capsys):
    afile = tmp_path / "notes.txt"
    afile.write_text("not a folder")
    assert main(["run", "--no-ui", "--input", "demo", "--log-dir", str(afile)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: ") and str(afile) in err and "give a folder" in err


def test_existing_log_file_is_never_overwritten(tmp_path, capsys):
    take = tmp_path / "take.csv"
    take.write_bytes(b"yesterday's take\r\n")
    assert main(["run", "--no-ui", "--input", STEADY, "--log", str(take)]) == 2
    assert "exists already" in capsys.readouterr().err
    assert take.read_bytes() == b"yesterday's take\r\n"  # the old take is intact


@pytest.mark.parametrize(
    "argv",
    [
        ["run", "--device", "nosuchdevice", "--no-ui", "--duration", "1"],
        ["run", "--no-ui", "--input", "demo", "--a4", "1000"],
    ],
)
def test_a_real_process_exits_2_with_one_line(argv):
    r = subprocess.run([sys.executable, "-W", "ignore", "-m", "bench", *argv], capture_output=True, text=True, timeout=120)
    assert r.returncode == 2, r.stderr
    lines = [line for line in r.stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: "), r.stderr


def _tone_file(tmp_path, sample_rate: int):
    import numpy as np
    import soundfile as sf

    path = tmp_path / f"tone_{sample_rate}.wav"
    t = np.arange(sample_rate) / sample_rate
    sf.write(str(path), 0.5 * np.sin(2 * np.pi * 440.0 * t), sample_rate, subtype="PCM_16")
    return path


@pytest.mark.parametrize("how", ["file_8000", "file_192000", "demo_8000", "demo_192000"])
def test_rates_the_analyser_refuses_are_resampled_or_refused_in_one_line(tmp_path, capsys, how):
    kind, rate = how.split("_")
    if kind == "file":
        argv = ["run", "--no-ui", "--input", str(_tone_file(tmp_path, int(rate))), "--log", str(tmp_path / "t.csv")]
    else:
        argv = ["demo", "--no-ui", "--rate", rate, "--duration", "0.5", "--log", str(tmp_path / "t.csv")]
    try:
        status = main(argv)
    except Exception as exc:  # noqa: BLE001 - the defect: anything but a one-line error
        pytest.fail(f"{type(exc).__name__}: {exc}")
    err = capsys.readouterr().err
    assert status in (0, 2), err
    if status == 2:
        assert len([line for line in err.splitlines() if line.startswith("error:")]) == 1
