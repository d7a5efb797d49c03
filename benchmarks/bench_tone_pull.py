"""How far the reference tone pulls the instrument's readings, by the tone's level under the instrument.

Starts a JACK dummy server (48 kHz, 512-frame periods) and, for each offset of the instrument
from its target, runs ``bench run --no-ui`` once without a drone and once per level with
``--drone F4`` at that level under the instrument, its output looped into its input
(tests/audio/tone_pull.py says how). Prints the median reading of each run and its pull (with
minus without), in cents. Asserts nothing; a few seconds per run.

    python benchmarks/bench_tone_pull.py --offsets 5 15 --levels 6 10 15 20 25 30
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests" / "audio"))
sys.path.insert(0, str(ROOT))


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--offsets", type=float, nargs="+", default=[5.0, 15.0], help="cents sharp of the target")
    ap.add_argument("--levels", type=float, nargs="+", default=[6.0, 10.0, 15.0, 20.0, 25.0, 30.0],
                    help="dB the tone sounds under the instrument (RMS)")  # fmt: skip
    ap.add_argument("--seconds", type=float, default=5.0)
    args = ap.parse_args()
    jackd = shutil.which("jackd")
    if jackd is None:
        print("jackd is not installed (apt-get install jackd2)")
        return 1
    from jack_dummy import dummy_server
    from tone_pull import measure

    with tempfile.TemporaryDirectory() as tmp_name:
        tmp = Path(tmp_name)
        os.environ.update(BENCH_CONFIG_DIR=str(tmp), BENCH_LOG_DIR=str(tmp))  # no stored clock, no saved settings
        with dummy_server(tmp, "bench-pull") as server:
            print(f"{'offset c':>8} {'under dB':>8} {'reading c':>10} {'pull c':>8} {'rows':>5} {'dropped':>7}")
            for offset in args.offsets:
                base = measure(server.name, tmp, offset, None, args.seconds)
                print(f"{offset:8.1f} {'none':>8} {base['cents']:10.3f} {'':>8} {base['rows']:5d} {base['dropped']:7d}")
                for under in args.levels:
                    got = measure(server.name, tmp, offset, under, args.seconds)
                    pull = got["cents"] - base["cents"]
                    print(f"{offset:8.1f} {under:8.1f} {got['cents']:10.3f} {pull:8.3f} {got['rows']:5d} {got['dropped']:7d}",
                          flush=True)  # fmt: skip
    return 0


if __name__ == "__main__":
    sys.exit(main())
