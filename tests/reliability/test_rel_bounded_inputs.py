"""Item 4 of the reliability issue: every input is read within a size limit, only from a regular
file, and a command within its timeout; the process stays small whatever it is given.

Reproduction (before): ``bench notes --temperament /dev/zero`` grew to 23.5 GB; ``--profile``,
``--temp-source`` and ``bench chart`` on /dev/zero ended in ``MemoryError``; a FIFO given to
``--temperament``, ``--profile``, ``--temp-source`` or ``--input`` hung forever;
``--temp-source "cmd:yes 20"`` reached 7 GB; a command that hung left its children running.

Outside references: Linux ``null(4)`` (/dev/zero yields zero bytes for ever, a character
device); POSIX ``open(2)`` (``O_NONBLOCK`` on a FIFO open for reading returns at once) and
``mkfifo(3)``; POSIX ``setsid(2)``/``kill(2)`` with a negative pid (the whole process group);
``getrusage(2)`` ``ru_maxrss`` (kilobytes on Linux) for the resident-memory bound the issue sets
(300 MB).
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from bench.cli import main

pytestmark = pytest.mark.timeout(120)
ROOT = Path(__file__).resolve().parents[2]
RSS_LIMIT_KB = 300 * 1024  # the bound: 300 MB resident


def _peak_rss_kb(argv: list[str]) -> tuple[int, int, str]:
    """Exit status, peak resident memory (kB) and stderr of ``bench argv`` in a fresh process.

    An intermediate interpreter runs it, so ``RUSAGE_CHILDREN`` covers that one child only.
    """
    probe = (
        "import resource, subprocess, sys\n"
        f"done = subprocess.run([sys.executable, '-m', 'bench', *{argv!r}], capture_output=True, text=True, timeout=90)\n"
        "print(done.returncode, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)\n"
        "sys.stderr.write(done.stderr)\n"
    )
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, cwd=ROOT, timeout=110, check=True)
    status, rss = out.stdout.split()
    return int(status), int(rss), out.stderr


@pytest.mark.parametrize(
    "argv",
    [
        ["notes", "--temperament", "/dev/zero"],
        ["run", "--input", "demo", "--profile", "/dev/zero"],  # refused before the screen
        ["run", "--no-ui", "--input", "demo", "--temp-source", "/dev/zero"],
        ["chart", "/dev/zero"],
    ],
)
def test_dev_zero_is_refused_in_one_line_within_the_memory_bound(argv):
    status, rss_kb, err = _peak_rss_kb(argv)
    assert status == 2, err
    assert err.startswith("error: ") and err.count("\n") == 1, err
    assert "character device" in err, err
    assert rss_kb < RSS_LIMIT_KB, rss_kb


@pytest.fixture
def fifo(tmp_path):
    path = tmp_path / "pipe.toml"
    os.mkfifo(path)
    return path


@pytest.mark.parametrize(
    "argv",
    [
        ["notes", "--temperament", "{fifo}"],
        ["run", "--input", "demo", "--profile", "{fifo}"],
        ["run", "--no-ui", "--input", "demo", "--temp-source", "{fifo}"],
        ["run", "--no-ui", "--input", "{fifo}"],
        ["chart", "{fifo}"],
    ],
)
def test_a_fifo_is_refused_instead_of_hanging(argv, fifo, capsys):
    # Without the fix each of these blocks in open(2) until the test's timeout fails it.
    assert main([a.format(fifo=fifo) for a in argv]) == 2
    err = capsys.readouterr().err
    assert "named pipe (FIFO)" in err and err.count("\n") == 1, err


def test_a_command_printing_for_ever_is_cut_at_the_cap():
    from bench.airtemp import READ_LIMIT_BYTES, AirTemperatureSource
    from bench.errors import SettingsError

    source = AirTemperatureSource("cmd:yes 20", timeout_s=3.0)
    with pytest.raises(SettingsError, match=f"printed more than {READ_LIMIT_BYTES} bytes"):
        source.read_temp_c()


def _alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as f:
            return f.read().split(") ")[1][0] != "Z"  # a zombie is already dead (proc(5))
    except (FileNotFoundError, IndexError):
        return False


def test_a_hanging_command_is_killed_with_its_children(tmp_path):
    from bench.airtemp import AirTemperatureSource
    from bench.errors import SettingsError

    pids = tmp_path / "pids"
    script = f"sleep 60 & echo $! > {pids}; sleep 60"
    source = AirTemperatureSource(f"cmd:sh -c '{script}'", timeout_s=0.5)
    for _ in range(3):  # every retry must clean up after itself
        with pytest.raises(SettingsError, match="was stopped"):
            source.read_temp_c()
        child = int(pids.read_text().strip())
        for _ in range(100):  # reaping by init may take a moment
            if not _alive(child):
                break
            time.sleep(0.02)
        assert not _alive(child), f"child {child} of the timed-out command still runs"


def test_a_file_larger_than_the_limit_is_refused(tmp_path):
    from bench.errors import SettingsError
    from bench.tuning import load_temperament

    big = tmp_path / "big.toml"
    big.write_text("# " + "x" * 200_000 + "\n", encoding="utf-8")
    with pytest.raises(SettingsError, match="more than the 100000"):
        load_temperament(big)


def test_a_captures_file_that_is_a_device_is_refused_not_read_forever():
    # `bench model fit wren-alto /dev/zero` read /dev/zero until memory ran out
    from bench.cli import main

    assert main(["model", "fit", "wren-alto", "/dev/zero"]) == 2
