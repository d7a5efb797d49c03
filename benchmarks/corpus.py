"""Synthetic benchmark corpus: categories of duct-flute renderings with exact truth.

Every item is made by ``dsp.synth`` from a seeded generator, so a run is repeatable.
Categories (pitch ranges in Hz, sounding):

============  ===============================================================
steady-clean  first-register notes 250-1800 Hz, no breath noise
steady        the same with breath noise (-35 dB) and attack chiff
vibrato       vibrato 10-40 c at 4-7 Hz, pitch rising with a crescendo
low           60-130 Hz
high          2000-4500 Hz
noisy         breath -20 dB, room T60 0.7 s, room noise -55 dBFS; 1 s gaps (0.3 s scored after the tail)
phrases       scales on an alto in F, legato and detached, one overblow
jumps         overblown octave changes (half with a weakening phase)
vents         vented octave changes
silence-hum   digital silence, mains hum 50/60 Hz, room noise: never voiced
room-jumps    overblown and vented octaves and twelfths in a room: T60 0.5-0.7 s, breath -25 dB,
              room noise -55 dBFS (scored apart from the dry jumps and vents)
============  ===============================================================
"""

from __future__ import annotations

import sys
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from dsp.synth import NoteEvent, Rendering, Score, plan, render  # noqa: E402

CATEGORIES = (
    "steady-clean", "steady", "vibrato", "low", "high", "noisy", "phrases", "jumps", "vents", "silence-hum",
    "room-jumps",
)


@dataclass(frozen=True)
class Item:
    """One rendering of a category, with the range a player would give a tuner."""

    category: str
    rendering: Rendering
    fmin_hz: float
    fmax_hz: float
    tail_guard_s: float = 0.0  # after each note end, excluded from voicing (reverberant tail)
    never_voiced: bool = False
    options: dict = field(default_factory=dict)


def _log_uniform(rng: np.random.Generator, lo: float, hi: float, n: int) -> np.ndarray:
    return np.exp(rng.uniform(np.log(lo), np.log(hi), n))


def _steady_notes(rng: np.random.Generator, n: int, lo: float, hi: float, **kw: object) -> list[NoteEvent]:
    f0s = _log_uniform(rng, lo, hi, n)
    levels = rng.uniform(-30.0, -10.0, n)
    return [NoteEvent(float(f), 1.0, level_dbfs=float(l), gap_s=0.15, **kw) for f, l in zip(f0s, levels)]


def _jump_notes(rng: np.random.Generator, n: int, kind: str) -> list[NoteEvent]:
    out = []
    for i, f in enumerate(_log_uniform(rng, 300.0, 1000.0, n)):
        out.append(
            NoteEvent(
                float(f), 1.4, level_dbfs=float(rng.uniform(-28, -14)), jump_at_s=float(rng.uniform(0.55, 0.8)),
                jump_kind=kind,  # type: ignore[arg-type]
                weaken_s=0.2 if i % 2 else 0.0, cents_per_db=float(rng.uniform(0.3, 1.2)),
                vibrato_cents=float(rng.choice([0.0, 8.0])), gap_s=0.2,
            )
        )
    return out


_ALTO_F_SCALE_HZ = (349.228, 391.995, 440.0, 466.164, 523.251, 587.330, 659.255, 698.456)


def _room_jump_notes(rng: np.random.Generator, n: int) -> list[NoteEvent]:
    out = []
    for i, f in enumerate(_log_uniform(rng, 250.0, 1100.0, n)):
        out.append(
            NoteEvent(
                float(f), 0.9, level_dbfs=float(rng.uniform(-26, -16)), jump_at_s=float(rng.uniform(0.4, 0.55)),
                jump_kind=("overblown", "vented")[i % 2], jump_mode=int(rng.choice([2, 2, 3])),  # type: ignore[arg-type]
                weaken_s=float(rng.choice([0.0, 0.1])), vibrato_cents=float(rng.uniform(0, 10)), gap_s=0.15,
            )
        )
    return out


def _phrase(rng: np.random.Generator, n_notes: int) -> list[NoteEvent]:
    out = []
    for i in range(n_notes):
        f = float(rng.choice(_ALTO_F_SCALE_HZ))
        dur = float(rng.uniform(0.25, 0.6))
        gap = float(rng.choice([0.0, 0.03, 0.08]))
        jump = {}
        if i == n_notes // 2:
            dur = 0.9
            jump = dict(jump_at_s=0.45, jump_kind="overblown")
        out.append(NoteEvent(f, dur, level_dbfs=float(rng.uniform(-26, -14)),
                             vibrato_cents=float(rng.choice([0.0, 0.0, 15.0])), gap_s=gap, **jump))  # type: ignore[arg-type]
    out[-1] = NoteEvent(**{**_asdict(out[-1]), "gap_s": 0.2})
    return out


def _asdict(ev: NoteEvent) -> dict:
    return {k: getattr(ev, k) for k in ev.__slots__}  # type: ignore[attr-defined]


def _rest(seconds: float) -> list[NoteEvent]:
    """A timeline with no audible note (a -200 dBFS blip carries it)."""
    return [NoteEvent(440.0, 0.01, level_dbfs=-200.0, attack_s=0.005, release_s=0.005, chiff=False,
                      gap_s=seconds - 0.01)]


def build_corpus(quick: bool, sample_rate: int = 48000, seed: int = 1) -> list[Item]:
    """All items, category by category; ``quick`` makes a short corpus (~50 s of audio)."""
    rng = np.random.default_rng(seed)
    n = 3 if quick else 20
    rest_s = 1.5 if quick else 3.0
    items: list[Item] = []

    def add(cat: str, events: list[NoteEvent], fmin: float, fmax: float, **opts: object) -> None:
        tail = float(opts.pop("_tail_guard_s", 0.0))  # type: ignore[arg-type]
        never = bool(opts.pop("_never_voiced", False))
        r = render(events, sample_rate, seed=int(rng.integers(1 << 30)), **opts)  # type: ignore[arg-type]
        items.append(Item(cat, r, fmin, fmax, tail, never, dict(opts)))

    add("steady-clean", _steady_notes(rng, n, 250, 1800, chiff=False), 200, 2500, breath_noise_db=-np.inf)
    add("steady", _steady_notes(rng, n, 250, 1800), 200, 2500)
    vib = [
        NoteEvent(float(f), 1.5, level_dbfs=-22.0, vibrato_cents=float(rng.uniform(10, 40)),
                  vibrato_hz=float(rng.uniform(4, 7)), cents_per_db=float(rng.uniform(0.5, 1.5)),
                  crescendo_db=float(rng.uniform(-6, 6)), gap_s=0.15)
        for f in _log_uniform(rng, 300, 1500, n)
    ]
    add("vibrato", vib, 250, 2200)
    add("low", [NoteEvent(float(f), 1.2, level_dbfs=-18.0, gap_s=0.15) for f in _log_uniform(rng, 60, 130, n)], 50, 400)
    add("high", [NoteEvent(float(f), 1.0, level_dbfs=-24.0, gap_s=0.15) for f in _log_uniform(rng, 2000, 4500, n)],
        1500, 6000)
    add("noisy", [NoteEvent(float(f), 1.2, level_dbfs=-22.0, gap_s=1.0) for f in _log_uniform(rng, 300, 1500, n)],
        250, 2200, breath_noise_db=-20.0, reverb_s=0.7, room_noise_dbfs=-55.0, _tail_guard_s=0.7)
    for _ in range(1 if quick else 5):
        add("phrases", _phrase(rng, 8 if quick else 10), 300, 1500)
    add("jumps", _jump_notes(rng, n + 2, "overblown"), 250, 2200)
    add("vents", _jump_notes(rng, n + 2, "vented"), 250, 2200)
    add("silence-hum", _rest(rest_s), 50, 2500, breath_noise_db=-np.inf, _never_voiced=True)
    for hum_hz, hum_dbfs in ((50.0, -45.0), (60.0, -35.0)):
        add("silence-hum", _rest(rest_s), 50, 2500, hum_hz=hum_hz, hum_dbfs=hum_dbfs, room_noise_dbfs=-70.0,
            breath_noise_db=-np.inf, _never_voiced=True)
    add("silence-hum", _rest(rest_s), 50, 2500, room_noise_dbfs=-45.0, breath_noise_db=-np.inf, _never_voiced=True)
    # last, so that the items above stay as they were
    for _ in range(1 if quick else 3):
        t60 = float(rng.uniform(0.5, 0.7))
        # the tail fills the gaps: they are left out of the voicing score (tail guard)
        add("room-jumps", _room_jump_notes(rng, n // 2 + 2), 200, 3500, reverb_s=t60,
            breath_noise_db=-25.0, room_noise_dbfs=-55.0, _tail_guard_s=t60)
    return items


def long_score(duration_s: float, sample_rate: int = 48000, seed: int = 2) -> Score:
    """A varied note list lasting about ``duration_s`` (for streaming memory runs)."""
    rng = np.random.default_rng(seed)
    events: list[NoteEvent] = []
    total = 0.0
    while total < duration_s:
        if rng.random() < 0.15:
            ev = _jump_notes(rng, 1, str(rng.choice(["overblown", "vented"])))[0]
        else:
            ev = NoteEvent(float(rng.choice(_ALTO_F_SCALE_HZ)), float(rng.uniform(0.3, 2.0)),
                           level_dbfs=float(rng.uniform(-30, -12)), vibrato_cents=float(rng.choice([0.0, 12.0])),
                           gap_s=float(rng.choice([0.0, 0.1, 0.5])))
        events.append(ev)
        total += ev.duration_s + ev.gap_s
    return plan(events, sample_rate)


def iter_items(items: list[Item], category: str) -> Iterator[Item]:
    """Items of one category."""
    return (it for it in items if it.category == category)
