"""How well captures describe real playing: figures over randomised synthetic sessions.

Each scene is a phrase of the synthetic duct flute (``dsp.synth``) with randomised playing:
onset overshoot 10-60 c decaying with a time constant of 20-120 ms, breath wander 0.5-2 c,
vibrato 0-15 c on some notes, note lengths 0.3-3 s, a few notes overblown (after a crescendo)
or vented, rooms with T60 up to 0.8 s and a room noise floor. The scene runs through the
streaming analyser and the capture detector as ``bench analyze`` does (analyser frames ->
``make_reading`` -> ``CaptureDetector``). The truth is the synth's own: each note is rendered
at a known offset from 12-TET, around which overshoot, wander and vibrato move.

Printed, separately for the TUNING seeds (constants were tuned on these) and the HELD-OUT
seeds (never looked at while tuning):

* share of notes held >= 0.8 s that gave a capture (targets >= 98 %);
* median and 95th percentile of |capture cents - true steady pitch| over captured notes
  that did not break (targets <= 0.3 c and <= 1 c). The true steady pitch is the median of
  the synth's exact pitch (``Rendering.truth``) from the end of the onset overshoot (three
  time constants) to the release: a slow breath wander does not average out over a short
  note, so the figure against the note's nominal offset is printed too;
* overblown or vented notes charted as plain notes, and captures filed under another note
  (target 0);
* why held notes >= 0.8 s were not captured.

    python benchmarks/bench_captures.py            # ~1-2 minutes
    python benchmarks/bench_captures.py --quick    # fewer scenes

Prints figures; asserts nothing.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from dataclasses import dataclass, replace
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import numpy as np

from bench.reading import make_reading
from bench.tuning import TuningSettings
from bench.workflow.captures import Capture, CaptureDetector
from dsp.analyser import StreamingAnalyser
from dsp.synth import NoteEvent, render

SAMPLE_RATE = 48000
TUNING_SEEDS = tuple(range(100, 116))
HELD_OUT_SEEDS = tuple(range(9000, 9016))
HELD_S = 0.8


@dataclass(frozen=True)
class PlayedNote:
    start_s: float
    end_s: float
    midi: int
    offset_cents: float
    jump: str  # "" | "overblown" | "vented"
    jump_at_s: float | None  # absolute time of the change
    steady_from_s: float  # absolute time the onset overshoot is down to 5 % (3 time constants)
    steady_cents: float = math.nan  # median of the synth's true pitch over the steady part


def equal_hz(midi: int) -> float:
    """12-TET on A4 = 440 Hz (ISO 16:1975)."""
    return float(440.0 * 2.0 ** ((midi - 69) / 12.0))


def scene(seed: int, n_notes: int) -> tuple[list[NoteEvent], list[PlayedNote], dict[str, float]]:
    """A randomised phrase and what was played."""
    rng = np.random.default_rng(seed)
    events: list[NoteEvent] = []
    played: list[PlayedNote] = []
    t = 0.0
    prev = -1
    for _ in range(n_notes):
        midi = int(rng.integers(65, 80))  # alto F4..F#5, first register
        while midi == prev:  # a repeated note with a short gap would be one held note in a room
            midi = int(rng.integers(65, 80))
        prev = midi
        offset = float(rng.uniform(-20.0, 20.0))
        dur = float(rng.uniform(0.3, 3.0))
        gap = float(rng.uniform(0.15, 0.5))
        kind = ""
        jump_at = None
        crescendo = 0.0
        jump_level = None
        r = rng.uniform()
        if dur >= 1.2 and r < 0.15:
            kind, crescendo = "overblown", float(rng.uniform(6.0, 12.0))
            jump_at = float(rng.uniform(0.65, 0.8)) * dur
        elif dur >= 1.2 and r < 0.25:
            kind, jump_level = "vented", 0.0
            jump_at = float(rng.uniform(0.6, 0.8)) * dur
        vib = float(rng.uniform(0.0, 15.0)) if rng.uniform() < 0.3 else 0.0
        ev = NoteEvent(
            equal_hz(midi) * 2.0 ** (offset / 1200.0),
            dur,
            level_dbfs=float(rng.uniform(-30.0, -16.0)),
            gap_s=gap,
            onset_cents=float(rng.uniform(10.0, 60.0)),
            onset_decay_s=float(rng.uniform(0.02, 0.12)) / 3.0,  # decayed (to 5 %) over 20-120 ms
            wander_cents=float(rng.uniform(0.5, 2.0)),
            wander_hz=float(rng.uniform(0.3, 1.0)),
            wander_phase=float(rng.uniform(0.0, 2 * math.pi)),
            vibrato_cents=vib,
            vibrato_hz=float(rng.uniform(4.5, 6.0)),
            crescendo_db=crescendo,
            cents_per_db=0.0,  # the truth stays the note's offset (no level-dependent pitch)
            jump_at_s=jump_at,
            jump_kind=kind or None,  # type: ignore[arg-type]
            jump_level_db=jump_level,
            weaken_s=0.1 if kind == "overblown" else 0.0,
        )
        events.append(ev)
        played.append(PlayedNote(t, t + dur, midi, offset, kind, None if jump_at is None else t + jump_at,
                                 t + max(ev.attack_s, 3.0 * ev.onset_decay_s)))
        t += dur + gap
    room = {
        "reverb_s": float(rng.choice([0.0, rng.uniform(0.2, 0.8)])),
        "room_noise_dbfs": float(rng.uniform(-65.0, -50.0)),
    }
    return events, played, room


def run_scene(seed: int, n_notes: int) -> tuple[list[PlayedNote], list[Capture], list[str]]:
    events, played, room = scene(seed, n_notes)
    r = render(events, SAMPLE_RATE, seed=seed, reverb_s=room["reverb_s"], room_noise_dbfs=room["room_noise_dbfs"])
    for i, (p, ev) in enumerate(zip(played, events, strict=True)):
        end = p.jump_at_s - 0.05 if p.jump_at_s is not None else p.end_s - ev.release_s
        times = np.arange(p.steady_from_s, end, 0.002)
        cents = 1200.0 * np.log2(r.truth(times).held_f0_hz / equal_hz(p.midi))
        played[i] = replace(p, steady_cents=float(np.nanmedian(cents)))
    settings = TuningSettings()
    det = CaptureDetector()
    for f in StreamingAnalyser(SAMPLE_RATE).process(r.audio):
        det.push(make_reading(f, settings))
    det.finish()
    return played, list(det.captures), [str(s) for s in det.skips]


@dataclass
class Tally:
    held: int = 0
    captured: int = 0
    errors: list[float] | None = None
    errors_nominal: list[float] | None = None
    misfiled: int = 0
    broken_notes: int = 0
    broken_marked: int = 0
    broken_other_kind: int = 0
    false_breaks: int = 0
    skips: list[str] | None = None

    def __post_init__(self) -> None:
        self.errors = []
        self.errors_nominal = []
        self.skips = []


def score(played: list[PlayedNote], caps: list[Capture], skips: list[str], tally: Tally) -> None:
    assert tally.errors is not None and tally.skips is not None
    for cap in caps:
        # the note whose time holds the capture's middle
        mid = 0.5 * (cap.start_s + cap.end_s)
        note = next((p for p in played if p.start_s - 0.1 <= mid <= p.end_s + 0.1), None)
        if note is None or cap.midi != note.midi:
            tally.misfiled += 1  # filed under a note that was not fingered there
            continue
        if note.jump and not cap.jump:
            tally.misfiled += 1  # a note that broke charted as a plain note
    for p in played:
        mine = [c for c in caps if p.start_s - 0.1 <= 0.5 * (c.start_s + c.end_s) <= p.end_s + 0.1
                and c.midi == p.midi]
        if p.jump:
            tally.broken_notes += 1
            tally.broken_marked += sum(1 for c in mine if c.jump == p.jump)
            tally.broken_other_kind += sum(1 for c in mine if c.jump and c.jump != p.jump)
        else:
            tally.false_breaks += sum(1 for c in mine if c.jump)
            mine = [c for c in mine if not c.jump]  # a note that did not break, marked broken: no measurement
        if p.end_s - p.start_s < HELD_S:
            continue
        tally.held += 1
        if mine:
            tally.captured += 1
            for c in mine:
                if not c.jump and math.isfinite(c.cents):
                    tally.errors.append(abs(c.cents - p.steady_cents))
                    assert tally.errors_nominal is not None
                    tally.errors_nominal.append(abs(c.cents - p.offset_cents))
        else:
            near = [s for s in skips if (t := _skip_time(s)) is not None and abs(t - p.start_s) < 0.3]
            tally.skips.append(near[0] if near else f"note at {p.start_s:.2f} s: no capture (reported broken?)")


def _skip_time(text: str) -> float | None:
    try:
        return float(text.split(" at ", 1)[1].split(" s", 1)[0])
    except (IndexError, ValueError):
        return None


def report(name: str, seeds: tuple[int, ...], n_notes: int) -> None:
    tally = Tally()
    t0 = time.perf_counter()
    for seed in seeds:
        played, caps, skips = run_scene(seed, n_notes)
        score(played, caps, skips, tally)
    assert tally.errors is not None and tally.skips is not None
    err = np.array(tally.errors)
    share = 100.0 * tally.captured / tally.held if tally.held else math.nan
    print(f"{name} seeds {seeds[0]}..{seeds[-1]} ({len(seeds)} scenes, {time.perf_counter() - t0:.0f} s)")
    print(f"  notes held >= {HELD_S} s captured: {tally.captured} of {tally.held} = {share:.1f} %   (target >= 98 %)")
    if err.size:
        print(f"  |capture - true steady pitch|: median {np.median(err):.2f} c, p95 {np.percentile(err, 95):.2f} c, "
              f"max {err.max():.2f} c over {err.size} captures   (targets <= 0.3 c, <= 1 c)")
        nom = np.array(tally.errors_nominal)
        print(f"  |capture - note's nominal offset| (the wander's mean over a short note included): median "
              f"{np.median(nom):.2f} c, p95 {np.percentile(nom, 95):.2f} c, max {nom.max():.2f} c")
    print(f"  misfiled (a broken note charted plain, or under another note): {tally.misfiled}   (target 0)")
    print(f"  notes that broke: {tally.broken_notes}, captured under the fingered note with their jump: "
          f"{tally.broken_marked}, with the other jump kind: {tally.broken_other_kind}")
    print(f"  notes that did not break but were captured as broken (the analyser saw a jump): {tally.false_breaks}"
          " (counted as not captured)")
    for s in tally.skips:
        print(f"    not captured: {s}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="4 scenes per set instead of 16")
    ap.add_argument("--notes", type=int, default=10, help="notes per scene (default 10)")
    args = ap.parse_args()
    n = 4 if args.quick else len(TUNING_SEEDS)
    report("TUNING", TUNING_SEEDS[:n], args.notes)
    report("HELD-OUT", HELD_OUT_SEEDS[:n], args.notes)


if __name__ == "__main__":
    main()
