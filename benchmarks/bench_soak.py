"""Load held: a long soak through the engine, and analysis of long recordings. Prints figures;
asserts nothing.

1. Soak: the demo instrument, not paced (as fast as the engine takes it), through the real
   engine -- streaming analyser, tuning, a frame log row per frame -- for ``--minutes`` of
   input (default 60). Per slice of input (default 5 minutes): CPU seconds per second of audio
   (the real-time load; its ratio to the first slice says whether it stays steady), dropped
   blocks, RSS and tracemalloc memory. At the end: memory growth after the first slice, and
   frames produced against rows in the log (rows lost).
2. Long recordings: 1, 10 and 60 minutes of synthetic audio (the demo loop, tiled) and an hour
   of silence, each written to a temporary FLAC and analysed by ``bench.analyze.analyse_file``
   with a frame log, each in a fresh process so that peak RSS (ru_maxrss) and the tracemalloc
   peak belong to that file alone. Flat figures mean the analysis streams.

    python benchmarks/bench_soak.py --minutes 5 --analysis-minutes 1 2   # a few minutes
    python benchmarks/bench_soak.py                                    # full run (~15 min CPU)
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
import tracemalloc
import warnings
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import numpy as np  # noqa: E402


def rss_mib(field: str = "VmRSS") -> float:
    """Resident set size now (``VmRSS``) or its peak (``VmHWM``), MiB, from /proc.

    Not ru_maxrss: Linux keeps that across execve, so a child started from a big parent
    would report the parent's peak.
    """
    try:
        for line in Path("/proc/self/status").read_text().splitlines():
            if line.startswith(field + ":"):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def soak(minutes: float, slice_minutes: float, folder: Path) -> None:
    from bench.engine import Engine
    from bench.framelog import iter_frame_log
    from bench.sources.demo import DemoSource
    from bench.tuning import TuningSettings

    target_s = minutes * 60.0
    slice_s = min(slice_minutes * 60.0, target_s)
    log_path = folder / "soak.csv"
    source = DemoSource(48000, realtime=False)
    print(f"soak: {minutes:g} min of the demo instrument through the engine, not paced; "
          f"log {log_path}; slices of {slice_s / 60:g} min")
    events: list = []
    engine = Engine(source, TuningSettings(), log_path=log_path, on_event=events.append)
    n_slices = int(np.ceil(target_s / slice_s - 1e-9))
    # tracemalloc slows the engine about fourfold, so it runs over the last two slices only:
    # traced memory at the end of the last minus at the end of the one before is the growth
    # over one slice, counting only what was allocated since tracing began (the 60 s reading
    # history is wholly replaced within a slice of 5 minutes).
    traced_slices = {n_slices - 1, n_slices} if n_slices >= 3 else set()
    wall0 = time.perf_counter()
    engine.start()
    print(f"{'slice':>5} {'input min':>9} {'CPU s/s audio':>13} {'vs slice 1':>10} {'dropped':>7} "
          f"{'RSS MiB':>8} {'traced MiB':>12} {'wall s':>7}")
    print("      (traced: tracemalloc, memory allocated since the start of the second-last slice and "
          "still held; those two slices run slower for it: marked *)")
    rows: list[tuple[float, float, float]] = []
    retained: list[float] = []
    last_t, last_cpu, k = 0.0, 0.0, 0
    try:
        while engine.running:
            time.sleep(0.2)
            latest = engine.latest()
            t = latest.stream_time_s if latest is not None else 0.0
            if t >= min((k + 1) * slice_s, target_s):
                stats = engine.stats
                cpu_per_s = (stats.cpu_s - last_cpu) / max(t - last_t, 1e-9)
                rss = rss_mib()
                k += 1
                kept = ""
                if tracemalloc.is_tracing():
                    traced, _ = tracemalloc.get_traced_memory()
                    retained.append(traced / 2**20)
                    kept = f"{traced / 2**20:12.2f}"
                rows.append((t, cpu_per_s, rss))
                mark = "*" if k in traced_slices else " "
                print(f"{k:5d}{mark}{t / 60:9.2f} {cpu_per_s:13.4f} {cpu_per_s / rows[0][1]:10.2f} "
                      f"{stats.dropped_blocks:7d} {rss:8.1f} {kept:>12} "
                      f"{time.perf_counter() - wall0:7.1f}", flush=True)
                last_t, last_cpu = t, stats.cpu_s
                if t >= target_s:
                    break
                if k + 1 in traced_slices and not tracemalloc.is_tracing():
                    tracemalloc.start()
    finally:
        engine.stop()
        if tracemalloc.is_tracing():
            tracemalloc.stop()
    stats = engine.stats
    wall_s = time.perf_counter() - wall0
    rows_on_disk = sum(1 for _ in iter_frame_log(log_path))
    print(f"  {stats.frames} frames, {stats.log_rows} rows written, {rows_on_disk} rows on disk "
          f"-> rows lost: {stats.frames - rows_on_disk}; dropped blocks: {stats.dropped_blocks}; "
          f"source errors: {stats.source_errors}; state: {stats.state}")
    untraced = [r[1] for i, r in enumerate(rows, start=1) if i not in traced_slices]
    if len(untraced) >= 2:
        print(f"  CPU per second of audio (untraced slices): first {untraced[0]:.4f}, last "
              f"{untraced[-1]:.4f}, max/min {max(untraced) / min(untraced):.2f}; real-time factor "
              f"{1 / np.mean(untraced):.1f}x on one core")
    if len(rows) >= 3:
        print(f"  RSS growth after slice 1: {rows[-1][2] - rows[0][2]:+.1f} MiB "
              f"({rows[0][2]:.1f} -> {rows[-1][2]:.1f} MiB; slice 2 -> last: "
              f"{rows[-1][2] - rows[1][2]:+.1f} MiB)")
    if len(retained) == 2:
        print(f"  tracemalloc growth over the last slice: {retained[1] - retained[0]:+.2f} MiB "
              f"({retained[0]:.2f} -> {retained[1]:.2f} MiB held of what was allocated since tracing began)")
    print(f"  input {last_t / 60:.1f} min in {wall_s:.0f} s wall "
          f"({last_t / max(wall_s, 1e-9):.1f}x real time); events: "
          f"{sorted({e.kind for e in events})}")
    log_path.unlink(missing_ok=True)


def write_long_flac(path: Path, minutes: float, kind: str) -> None:
    """``minutes`` of the demo loop tiled (``tones``) or of digital silence, 48 kHz 16-bit FLAC."""
    import soundfile as sf

    sample_rate = 48000
    total = int(minutes * 60 * sample_rate)
    if kind == "tones":
        from bench.sources.demo import render_demo_loop

        loop = render_demo_loop(sample_rate)
    else:
        loop = np.zeros(sample_rate * 10, dtype=np.float32)
    with sf.SoundFile(str(path), "w", sample_rate, 1, subtype="PCM_16", format="FLAC") as f:
        done = 0
        while done < total:
            n = min(len(loop), total - done)
            f.write(loop[:n])
            done += n


def analyse_child(path: str, csv_path: str) -> None:
    """Child process: analyse one file, print JSON with peak RSS and tracemalloc peak."""
    from bench.analyze import analyse_file
    from bench.tuning import TuningSettings

    warnings.simplefilter("ignore")
    rss_before = rss_mib("VmHWM")
    tracemalloc.start()
    t0 = time.process_time()
    result = analyse_file(path, TuningSettings(), csv_path=Path(csv_path))
    cpu_s = time.process_time() - t0
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    print(json.dumps({
        "duration_s": result.duration_s, "frames": result.frames, "notes": len(result.notes),
        "cpu_s": cpu_s, "peak_rss_mib": rss_mib("VmHWM"),
        "rss_before_mib": rss_before, "traced_peak_mib": peak / 2**20,
        "warnings": list(result.warnings),
    }))


def long_recordings(items: list[tuple[str, float]], folder: Path) -> None:
    print("\nlong recordings: analyse_file with a frame log, one fresh process per file")
    print("  (CPU under tracemalloc, so slower than untraced; peak RSS from VmHWM of the child)")
    print(f"{'audio':>8} {'minutes':>7} {'frames':>8} {'notes':>6} {'CPU s/s audio':>13} "
          f"{'peak RSS MiB':>12} {'traced peak MiB':>15} {'file MiB':>8}")
    first = None
    for kind, minutes in items:
        path = folder / f"{kind}-{minutes:g}min.flac"
        write_long_flac(path, minutes, kind)
        csv_path = folder / "long.csv"
        r = subprocess.run(
            [sys.executable, __file__, "--_analyse", str(path), str(csv_path)],
            capture_output=True, text=True, check=True,
        )
        d = json.loads(r.stdout.strip().splitlines()[-1])
        first = first or d
        print(f"{kind:>8} {minutes:7g} {d['frames']:8d} {d['notes']:6d} "
              f"{d['cpu_s'] / d['duration_s']:13.4f} {d['peak_rss_mib']:12.1f} "
              f"{d['traced_peak_mib']:15.2f} {path.stat().st_size / 2**20:8.1f}", flush=True)
        if d["warnings"]:
            print(f"{'':>8} warnings: {d['warnings']}")
        path.unlink()
        csv_path.unlink(missing_ok=True)
    if first:
        print(f"  (peak RSS of the first file {first['peak_rss_mib']:.1f} MiB is the reference; "
              "a streaming analysis keeps later rows within a few MiB of it)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--minutes", type=float, default=60.0, help="input minutes of the soak (default 60)")
    ap.add_argument("--slice-minutes", type=float, default=5.0, help="report slice, input minutes (default 5)")
    ap.add_argument("--analysis-minutes", type=float, nargs="*", default=[1.0, 10.0, 60.0],
                    help="lengths of the synthetic recordings to analyse (default 1 10 60)")
    ap.add_argument("--silence-minutes", type=float, default=60.0,
                    help="length of the silent recording to analyse (default 60; 0 skips it)")
    ap.add_argument("--skip", nargs="*", default=[], choices=["soak", "long"])
    ap.add_argument("--_analyse", nargs=2, metavar=("FILE", "CSV"), help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args._analyse:
        analyse_child(*args._analyse)
        return
    warnings.simplefilter("ignore")
    print(f"bench_soak on {os.cpu_count()} cores, Python {sys.version.split()[0]}, "
          f"load average {os.getloadavg()[0]:.1f} at start")
    with tempfile.TemporaryDirectory(prefix="bench-soak-") as tmp:
        folder = Path(tmp)
        if "soak" not in args.skip:
            soak(args.minutes, args.slice_minutes, folder)
        if "long" not in args.skip:
            items = [("tones", m) for m in args.analysis_minutes]
            if args.silence_minutes > 0:
                items.append(("silence", args.silence_minutes))
            long_recordings(items, folder)
    print(f"load average {os.getloadavg()[0]:.1f} at the end")


if __name__ == "__main__":
    main()
