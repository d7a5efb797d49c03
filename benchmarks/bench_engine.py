"""Live-engine figures: DSP-thread CPU, dropped blocks, sound-to-reading latency.

Runs the whole live chain (source -> analyser -> tuning -> frame log -> published reading)
in real time for a given duration and prints figures; asserts nothing.

    python benchmarks/bench_engine.py                   # demo instrument, 60 s
    python benchmarks/bench_engine.py --minutes 10      # the full target run
    python benchmarks/bench_engine.py --source jack     # through PortAudio on a JACK dummy server

Figures, each a ratio against a reference measured in the same run:

* CPU: engine-thread CPU time (``time.thread_time`` inside the thread) over wall time, as
  percent of one core; and over the CPU the analyser alone needs for the same audio
  processed offline (the engine's overhead: mapping, log rows, publishing, pacing).
* Sound-to-reading latency (demo source): for every reading, the wall time it was published
  minus the wall time the instant it describes was "played" (the paced source's start plus
  the reading's input time plus the blocks dropped before it) -- frame-centre delay, block
  buffering, waiting for the CPU and processing together.
  With ``--source jack``: the JACK cycle carrying the first sample to the first voiced
  reading, plus the engine's own per-frame figure.
* Dropped blocks over blocks read.
"""

from __future__ import annotations

import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests" / "audio"))  # jack_dummy: the JACK dummy server the tests use
sys.path.insert(0, str(ROOT))

import numpy as np


def _pct(values: list[float], q: float) -> float:
    return float(np.percentile(values, q)) if values else float("nan")


def analyser_alone_cpu_per_audio_s(audio: np.ndarray, sample_rate: int, block_size: int) -> float:
    """CPU seconds the analyser alone takes per second of audio, offline, same blocks."""
    from dsp.analyser import StreamingAnalyser

    an = StreamingAnalyser(sample_rate)
    t0 = time.thread_time()
    for i in range(0, len(audio), block_size):
        an.process(audio[i : i + block_size])
    return (time.thread_time() - t0) / (len(audio) / sample_rate)


def run_demo(duration_s: float, block_size: int, sample_rate: int, workflow: bool = False) -> dict:
    from bench.engine import Engine, ReadingCallback
    from bench.heldnotes import HeldNoteCollector
    from bench.sources.demo import DemoSource
    from bench.tuning import TuningSettings
    from bench.workflow.live import LiveWorkflow

    source = DemoSource(sample_rate, block_size=block_size)
    published: list[tuple[float, float]] = []
    lock = threading.Lock()
    block_s = block_size / sample_rate

    def on_reading(r) -> None:
        # input time leaves out blocks the source dropped; they were "played" all the same
        with lock:
            published.append((time.monotonic(), r.stream_time_s + r.dropped_blocks * block_s))

    with tempfile.TemporaryDirectory() as tmp:
        log = Path(tmp) / "bench.csv"
        consumers = [ReadingCallback(on_reading)]
        if workflow:  # what the screen and an unattended run attach: captures, blowing curve, held notes
            consumers += [LiveWorkflow(profile="alto"), HeldNoteCollector()]
        engine = Engine(source, TuningSettings(), log_path=log, consumers=consumers)
        engine.start()
        t0_s = source._pacer._t0_s
        time.sleep(duration_s)
        engine.stop()
        stats = engine.stats
        log_bytes = log.stat().st_size
    latencies = [wall - (t0_s + t) for wall, t in published]
    alone = analyser_alone_cpu_per_audio_s(source._rendered(), sample_rate, block_size)
    audio_s = published[-1][1] if published else 0.0
    return {
        "source": stats.source,
        "wall_s": stats.wall_s,
        "audio_s": audio_s,
        "cpu_s": stats.cpu_s,
        "frames": stats.frames,
        "blocks": stats.blocks,
        "dropped_blocks": stats.dropped_blocks,
        "log_rows": stats.log_rows,
        "log_bytes": log_bytes,
        "latency_median_s": _pct(latencies, 50),
        "latency_p95_s": _pct(latencies, 95),
        "latency_p99_s": _pct(latencies, 99),
        "latency_max_s": max(latencies) if latencies else float("nan"),
        "alone_cpu_per_audio_s": alone,
    }


def run_jack(duration_s: float, block_size: int, sample_rate: int) -> dict:
    import soundfile as sf

    from bench.sources.demo import render_demo_loop

    jackd = shutil.which("jackd")
    if jackd is None:
        raise SystemExit("jackd is not installed (apt-get install jackd2)")
    from jack_dummy import dummy_server

    with tempfile.TemporaryDirectory() as tmp:
        wav = Path(tmp) / "demo.wav"
        loop = render_demo_loop(sample_rate)
        sf.write(wav, loop, sample_rate, subtype="FLOAT")
        with dummy_server(Path(tmp), "bench-bench", sample_rate, block_size) as server:
            env = dict(os.environ, JACK_DEFAULT_SERVER=server.name, PYTHONPATH=str(ROOT))
            done = subprocess.run(
                [sys.executable, str(ROOT / "tests" / "audio" / "live_case.py"), "jack", "--device", "system",
                 "--wav", str(wav), "--loop", str(duration_s), "--seconds", "5", "--no-readings",
                 "--log", str(Path(tmp) / "bench.csv"), "--block", str(block_size)],
                env=env, capture_output=True, text=True, check=False, timeout=duration_s + 120,
            )  # fmt: skip
        xruns = (Path(tmp) / "jackd.log").read_text(errors="replace").count("XRun")
        if done.returncode != 0:
            raise SystemExit(f"live_case.py failed:\n{done.stderr[-2000:]}")
        res = json.loads(done.stdout)
        alone = analyser_alone_cpu_per_audio_s(loop, sample_rate, block_size)
    return {
        "source": res["description"],
        "wall_s": res["wall_s"],
        "audio_s": res["input_seconds"],
        "cpu_s": res["cpu_s"],
        "frames": res["frames"],
        "blocks": res["blocks"],
        "dropped_blocks": res["dropped_blocks"],
        "overflows": res["overflows"],
        "full_drops": res["full_drops"],
        "server_xruns": xruns,
        "log_rows": res["log_rows"],
        "first_voiced_latency_s": res.get("first_voiced_latency_s"),
        "engine_latency_s": res["engine_latency_s"],
        "engine_max_latency_s": res["engine_max_latency_s"],
        "alone_cpu_per_audio_s": alone,
    }


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--source", choices=["demo", "jack"], default="demo")
    ap.add_argument("--workflow", action="store_true",
                    help="demo: attach the session workflow and held notes as consumers, as the screen does")
    ap.add_argument("--seconds", type=float, default=60.0)
    ap.add_argument("--minutes", type=float, default=None, help="run length in minutes (overrides --seconds)")
    ap.add_argument("--block", type=int, default=512)
    ap.add_argument("--rate", type=int, default=48000)
    args = ap.parse_args()
    duration_s = args.minutes * 60 if args.minutes else args.seconds
    print(f"bench_engine: {args.source} source, {duration_s:.0f} s at {args.rate} Hz, block {args.block}", flush=True)
    r = run_demo(duration_s, args.block, args.rate, args.workflow) if args.source == "demo" else run_jack(duration_s, args.block, args.rate)
    cpu_ratio = r["cpu_s"] / r["wall_s"]
    per_audio = r["cpu_s"] / max(r["audio_s"], 1e-9)
    print(f"  source             {r['source']}")
    print(f"  ran                {r['wall_s']:.1f} s wall, {r['audio_s']:.1f} s of input, {r['frames']} frames, {r['blocks']} blocks")
    print(f"  engine-thread CPU  {r['cpu_s']:.2f} s = {100 * cpu_ratio:.1f} % of one core (wall-time reference)")
    print(f"  vs analyser alone  {per_audio:.4f} / {r['alone_cpu_per_audio_s']:.4f} CPU s per audio s = "
          f"{per_audio / r['alone_cpu_per_audio_s']:.2f} x (engine overhead over offline analysis)")  # fmt: skip
    print(f"  dropped blocks     {r['dropped_blocks']} of {r['blocks']} = {100 * r['dropped_blocks'] / max(r['blocks'], 1):.3f} %")
    if "overflows" in r:
        print(f"                     driver overflows {r['overflows']}, ring full {r['full_drops']}, JACK server xruns {r['server_xruns']}")
    print(f"  log rows           {r['log_rows']} ({r['log_rows'] / max(r['frames'], 1):.3f} per frame)")
    if "latency_median_s" in r:
        print(
            f"  sound-to-reading   median {1000 * r['latency_median_s']:.1f} ms, p95 {1000 * r['latency_p95_s']:.1f} ms, "
            f"p99 {1000 * r['latency_p99_s']:.1f} ms, max {1000 * r['latency_max_s']:.1f} ms"
        )
    else:
        first = r["first_voiced_latency_s"]
        print(f"  sound-to-reading   first note {1000 * first:.1f} ms (JACK cycle to first voiced reading)" if first else "  sound-to-reading   n/a")
        print(f"  engine latency     last {1000 * (r['engine_latency_s'] or float('nan')):.1f} ms, max {1000 * r['engine_max_latency_s']:.1f} ms (frame instant to publish)")
    load1, _, _ = os.getloadavg()
    print(f"  machine            {os.cpu_count()} cores, load average {load1:.2f} at the end")
    return 0


if __name__ == "__main__":
    sys.exit(main())
