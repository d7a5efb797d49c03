"""Accuracy, register-change, speed and memory figures of the streaming analyser.

Runs ``dsp.analyser.StreamingAnalyser`` ("ours") side by side with aubio ``yin`` and
``yinfft``, librosa ``pyin`` and Praat (parselmouth) ``to_pitch_ac``/``to_pitch_cc`` on one
synthetic corpus (benchmarks/corpus.py) whose truth is exact. Prints figures; asserts nothing.

    python benchmarks/bench_analyser.py --quick     # short corpus, ~1 minute
    python benchmarks/bench_analyser.py             # full corpus and a 1-hour streaming run

Everything runs pinned to one core with single-threaded numeric libraries, so the speed
ratio compares like with like: the whole analyser against aubio ``yinfft`` alone at the same
frame and hop, both fed hop-sized blocks, best of several runs (time.perf_counter).
"""

from __future__ import annotations

import os

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMEXPR_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

import argparse  # noqa: E402
import gc  # noqa: E402
import resource  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import numpy as np  # noqa: E402

from corpus import CATEGORIES, build_corpus, long_score  # noqa: E402
from methods import analyser_available, run_aubio, runners  # noqa: E402
from metrics import Pool, RegisterScore  # noqa: E402

TARGETS = (
    "targets: steady median <= 0.1 c, p95 <= 2 c, steady-clean median <= 0.01 c; gross+octave <= 0.3 % "
    "in every category;\n         voicing recall >= 99.5 %, false alarms <= 1 %; register: followed "
    "within 25 ms (median, on time_s), jumps R/P >= 0.95,\n         vents >= 0.9, detected within 60 ms; speed >= "
    "aubio yinfft; memory flat over 1 h"
)


def _fmt(x: float, spec: str) -> str:
    if x is None or not np.isfinite(x):
        return "-".rjust(int(spec.split(".")[0]))
    return format(x, spec)


def accuracy(items: list, methods: dict) -> dict:
    """Run every method on every item; print per-category tables; return register scores.

    The register scores are two: the dry jumps, vents and phrases the targets are set on,
    and the jumps in a room (category room-jumps), scored apart.
    """
    reg, room = RegisterScore(), RegisterScore()
    run_times: dict[str, float] = {}
    for name, run in methods.items():
        pools = {c: Pool() for c in CATEGORIES}
        t0 = time.perf_counter()
        for it in items:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                track = run(it.rendering.audio, int(it.rendering.sample_rate), it.fmin_hz, it.fmax_hz)
            pools[it.category].add(it, track)
            if name == "ours":
                (room if it.category == "room-jumps" else reg).add(it, track)
        run_times[name] = time.perf_counter() - t0
        print(f"\n== {name}  ({run_times[name]:.1f} s for the corpus)")
        print(f"{'category':<13}{'frames':>7}{'med|e|c':>10}{'p95|e|c':>10}{'gross%':>8}{'octave%':>8}"
              f"{'RPA':>7}{'Vrec%':>8}{'Vfa%':>7}")
        for c in CATEGORIES:
            s = pools[c].summary()
            print(f"{c:<13}{int(s['frames']):>7}{_fmt(s['median_c'], '10.4f')}{_fmt(s['p95_c'], '10.3f')}"
                  f"{_fmt(s['gross_pct'], '8.2f')}{_fmt(s['octave_pct'], '8.2f')}{_fmt(s['rpa'], '7.3f')}"
                  f"{_fmt(s['v_recall_pct'], '8.2f')}{_fmt(s['v_false_pct'], '7.2f')}")
    return {"register": reg, "room": room}


def print_register(reg: RegisterScore, title: str = "register changes") -> None:
    print(f"\n== ours: {title}")
    d = np.array(reg.follow_delays_s) * 1000
    r = np.array(reg.follow_ready_s) * 1000
    if d.size:
        print(f"sounding pitch followed after the change (time_s of the first frame from which the track stays within "
              f"50 c of the new pitch for 50 ms, less the change): median {np.median(d):.1f} ms, p90 "
              f"{np.percentile(d, 90):.1f} ms, max {d.max():.1f} ms; never followed: {reg.not_followed}")
        print(f"  that frame's ready_s less the change (when a display can first show the new pitch; the window's "
              f"half is in it): median {np.median(r):.1f} ms, max {r.max():.1f} ms")
    for k in ("overblown", "vented"):
        n_true, n_hit, n_det = reg.true_jumps[k], reg.matched[k], reg.detections[k]
        rec = n_hit / n_true if n_true else float("nan")
        prec = n_hit / n_det if n_det else float("nan")
        dl = np.array(reg.detect_delays_s[k]) * 1000
        within = float(np.mean(dl <= 60.0)) if dl.size else float("nan")
        dtxt = f"delay to ready_s median {np.median(dl):.1f} ms, max {dl.max():.1f} ms, <= 60 ms: {within:.2f}" if dl.size else "no delays"
        print(f"{k:<10} true {n_true:3d}  detected {n_det:3d}  matched {n_hit:3d}  recall {rec:.3f}  "
              f"precision {prec:.3f}  {dtxt}")
    if reg.missed:
        print("missed changes: " + ", ".join(f"{k}: {v}" for k, v in sorted(reg.missed.items())))
    if reg.false_by_category:
        print("detections matching no change (wrong kind, or none there), by category: "
              + ", ".join(f"{k}: {v}" for k, v in reg.false_by_category.items()))
    if reg.weakening_true:
        print(f"weakening phase flagged before {reg.weakening_seen}/{reg.weakening_true} changes that had one")


def speed(items: list, quick: bool) -> None:
    """Whole analyser vs aubio yinfft alone, same frame/hop, one core, best of N."""
    sr = 48000
    audio = np.concatenate([it.rendering.audio for it in items
                            if it.category in ("steady", "vibrato", "phrases", "jumps")
                            and it.rendering.sample_rate == sr])
    audio = audio[: int((8 if quick else 60) * sr)]
    repeats = 3 if quick else 5
    print(f"\n== speed on {audio.size / sr:.1f} s of 48 kHz audio, one core, best of {repeats}")
    if analyser_available():
        from dsp.analyser import StreamingAnalyser

        an = StreamingAnalyser(sr)
        frame, hop = int(an.frame_size), int(an.hop_size)
    else:
        frame, hop = 2048, 480
    print(f"frame {frame}, hop {hop} samples (ours' own); aubio yinfft at the same buffer and hop, fed hop-sized blocks")

    def t_aubio() -> float:
        t0 = time.perf_counter()
        run_aubio("yinfft", audio, sr, 50, 5000, buf_size=frame, hop_size=hop)
        return time.perf_counter() - t0

    ta = min(t_aubio() for _ in range(repeats))
    print(f"aubio yinfft: {ta:.3f} s  ({audio.size / sr / ta:.0f} x real time)")
    if analyser_available():
        from dsp.analyser import StreamingAnalyser

        x = np.ascontiguousarray(audio, dtype=np.float32)

        def t_ours(block: int) -> float:
            a = StreamingAnalyser(sr)
            t0 = time.perf_counter()
            for i in range(0, x.size, block):
                a.process(x[i : i + block])
            return time.perf_counter() - t0

        blocks = (
            (hop, "hop-sized blocks, as aubio"),
            (960, "960-sample blocks, as the live engine batches them (20 ms)"),
            (4096, "4096-sample blocks, as from a sound card"),
        )
        for block, label in blocks:
            to = min(t_ours(block) for _ in range(repeats))
            print(f"ours (whole analyser), {label}: {to:.3f} s  ({audio.size / sr / to:.1f} x real time); "
                  f"ratio aubio_time / ours_time = {ta / to:.3f}  (>= 1: at least as fast as yinfft alone)")


def _rss_mib() -> float:
    with open("/proc/self/statm") as fh:
        pages = int(fh.read().split()[1])
    return pages * os.sysconf("SC_PAGE_SIZE") / 2**20


def memory(minutes: float) -> None:
    """Stream ``minutes`` of synth audio through ours in 4096-sample blocks; print RSS growth."""
    from dsp.analyser import StreamingAnalyser
    from dsp.synth import render_blocks

    sr = 48000
    score = long_score(minutes * 60.0, sr)
    an = StreamingAnalyser(sr)
    print(f"\n== memory: {score.duration_s / 60:.1f} min streamed in 4096-sample blocks "
          f"(rendered chunk by chunk, never held; frames dropped after counting)")
    n = 0
    frames = 0
    checkpoints = sorted({round(float(m), 2) for m in (min(1.0, minutes / 6), *np.linspace(minutes / 6, minutes, 6))})
    marks = []
    t0 = time.perf_counter()
    next_mark = 0
    for block in render_blocks(score, sr, 4096, seed=5, max_harmonics=8):
        frames += len(an.process(block))
        n += block.size
        while next_mark < len(checkpoints) and n / sr / 60 >= checkpoints[next_mark]:
            gc.collect()
            marks.append((n / sr / 60, _rss_mib()))
            print(f"  at {marks[-1][0]:6.1f} min: RSS {marks[-1][1]:8.1f} MiB  ({time.perf_counter() - t0:.0f} s)",
                  flush=True)
            next_mark += 1
    elapsed = time.perf_counter() - t0
    if len(marks) >= 2:
        print(f"RSS growth from {marks[0][0]:.1f} min to the end: {marks[-1][1] - marks[0][1]:+.1f} MiB; "
              f"ru_maxrss {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MiB; "
              f"{frames} frames; {elapsed:.0f} s wall (synth + analyser)")


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="short corpus, pyin on the first 1.5 s of each item, 1-minute memory run")
    ap.add_argument("--no-pyin", action="store_true", help="leave librosa pyin out (slow)")
    ap.add_argument("--memory-minutes", type=float, default=None, help="length of the streaming run (default 60)")
    ap.add_argument("--skip", nargs="*", default=[], choices=["accuracy", "speed", "memory"])
    args = ap.parse_args()
    if hasattr(os, "sched_setaffinity"):
        os.sched_setaffinity(0, {sorted(os.sched_getaffinity(0))[0]})
    print("bench analyser benchmark", "(quick)" if args.quick else "(full)")
    print(TARGETS)
    items = build_corpus(args.quick)
    dur = sum(it.rendering.audio.size / it.rendering.sample_rate for it in items)
    print(f"corpus: {len(items)} renderings, {dur:.0f} s of audio, 48 kHz, categories: {', '.join(CATEGORIES)}")
    if not analyser_available():
        print("dsp.analyser.StreamingAnalyser not available yet: reference methods only")
    if "accuracy" not in args.skip:
        res = accuracy(items, runners(include_pyin=not args.no_pyin, pyin_max_s=1.5 if args.quick else None))
        if analyser_available():
            print_register(res["register"])
            print_register(res["room"], "register changes in a room (room-jumps; not pooled with the above)")
    if "speed" not in args.skip:
        speed(items, args.quick)
    if "memory" not in args.skip and analyser_available():
        memory(args.memory_minutes or (1.0 if args.quick else 60.0))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
