"""A JACK dummy server for one run: started, waited for, stopped by its process id.

Used by the ``jack_server`` fixture (tests/audio/conftest.py) and by the benchmarks that run
on JACK (benchmarks/bench_engine.py, bench_drone.py, bench_tone_pull.py). Recipe:
/work/shared/AUDIO-TESTING.md (the dummy driver, paced by a timer).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import time
import types
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path


@contextmanager
def dummy_server(directory: Path, prefix: str, sample_rate: int = 48000, period: int = 512,
                 up_within_s: float = 10.0) -> Iterator[types.SimpleNamespace]:  # fmt: skip
    """Run ``jackd -d dummy`` while the block runs: ``.name``, ``.pid``, ``.log`` (its output).

    Raises
    ------
    FileNotFoundError
        jackd is not installed.
    ImportError, OSError
        JACK-Client cannot load libjack.
    RuntimeError
        The server exited, or did not answer within ``up_within_s``.
    """
    jackd = shutil.which("jackd")
    if jackd is None:
        raise FileNotFoundError("jackd is not installed (apt-get install jackd2)")
    import jack

    name = f"{prefix}-{os.getpid()}-{uuid.uuid4().hex[:8]}"
    log = directory / "jackd.log"  # a file, not a pipe: an undrained pipe would stall jackd
    with log.open("wb") as log_file:
        proc = subprocess.Popen([jackd, "-n", name, "-d", "dummy", "-r", str(sample_rate), "-p", str(period)],
                                stdout=log_file, stderr=subprocess.STDOUT)  # fmt: skip
        try:
            deadline = time.monotonic() + up_within_s
            while True:
                if proc.poll() is not None:
                    err = log.read_text(errors="replace")[-400:]
                    raise RuntimeError(f"jackd exited with {proc.returncode}: {err}")
                try:
                    probe = jack.Client("bench-probe", servername=name, no_start_server=True)
                except jack.JackError:
                    if time.monotonic() > deadline:
                        raise RuntimeError(f"jackd did not come up within {up_within_s:g} s") from None
                    time.sleep(0.05)
                    continue
                probe.close()
                break
            yield types.SimpleNamespace(name=name, pid=proc.pid, log=log)
        finally:
            proc.terminate()
            try:
                proc.wait(5)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait(5)
