"""What a drone costs a live run: CPU of the bench process and dropped input, with and without.

Starts a JACK dummy server (48 kHz, 512-frame periods), feeds F4 into ``bench run --no-ui
--input mic`` for ``--seconds`` of input, once without and once with ``--drone A4``, and prints
each run's CPU time (user + system of the bench process, from the operating system) per second
of wall time, the ratio of the two, and the dropped blocks bench reported. Asserts nothing.

    python benchmarks/bench_drone.py --seconds 20
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests" / "audio"))  # jack_dummy: the JACK dummy server the tests use
LIVE_CASE = ROOT / "tests" / "audio" / "live_case.py"


def _run(env: dict[str, str], seconds: float, drone: bool, fed: Path) -> tuple[float, float, str]:
    argv = [sys.executable, "-m", "bench", "run", "--no-ui", "--input", "mic", "--device", "system",
            "--duration", str(seconds)] + (["--drone", "A4"] if drone else [])  # fmt: skip
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    wall0 = time.monotonic()
    run = subprocess.Popen(argv, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    time.sleep(3.0)  # the run's input ports appear; the feeder connects to the inputs it finds
    feeder = subprocess.Popen([sys.executable, str(LIVE_CASE), "feed", str(fed), "0", str(seconds + 10)], env=env,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)  # fmt: skip
    _, err = run.communicate(timeout=seconds + 60)
    wall_s = time.monotonic() - wall0
    feeder.kill()
    feeder.wait()
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu_s = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)  # bench and the feeder
    return cpu_s, wall_s, err.strip().splitlines()[-1] if err.strip() else "?"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=20.0)
    args = ap.parse_args()
    jackd = shutil.which("jackd")
    if jackd is None:
        print("jackd is not installed (apt-get install jackd2)")
        return 1
    import soundfile as sf
    from jack_dummy import dummy_server

    with tempfile.TemporaryDirectory() as tmp:
        fed = Path(tmp) / "f4.wav"
        t = np.arange(48000 * 2) / 48000
        sf.write(fed, (0.3 * np.sin(2 * np.pi * 349.2282 * t)).astype(np.float32), 48000, subtype="FLOAT")
        with dummy_server(Path(tmp), "bench-drone") as server:
            env = dict(os.environ, JACK_DEFAULT_SERVER=server.name, BENCH_CONFIG_DIR=tmp, BENCH_LOG_DIR=tmp,
                       PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))  # fmt: skip
            figures = {}
            for drone in (False, True):
                cpu_s, wall_s, last = _run(env, args.seconds, drone, fed)
                figures[drone] = cpu_s / wall_s
                print(f"{'with' if drone else 'without'} drone: {100 * cpu_s / wall_s:.1f} % of a core "
                      f"({cpu_s:.2f} s CPU in {wall_s:.1f} s, feeder included); bench said: {last}")  # fmt: skip
            print(f"CPU with / without the drone: {figures[True] / figures[False]:.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
