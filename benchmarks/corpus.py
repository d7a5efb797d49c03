"""Synthetic benchmark corpora of duct-flute renderings with exact truth.

Two corpora live here. Every rendering is made by ``dsp.synth`` from a seeded generator, so a
run is repeatable bit for bit.

1. The analyser's own categories (:func:`build_corpus`, used by ``bench_analyser.py``). The
analyser was tuned on these; they say little about sound it has not met. Pitch ranges in Hz,
sounding:

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

2. The field scenes (:func:`field_scene`, used by ``bench_field.py``): an honest measuring
stick with every parameter drawn at random from wide ranges, one scene per (type, seed). Each
scene is 4-10 s at 44.1 or 48 kHz. Fingered notes lie in recorder range, sounding about
260-2400 Hz (some scenes go down to 175 Hz, a bass recorder's compass). Unless a type says
otherwise, every scene carries breath noise (-40..-25 dB re the tone) and a white noise floor
with an SNR drawn from 10-60 dB against the tone (``snr_db`` of ``dsp.synth.render``).

=============  ==================================================================================
rise-break     the breath rises into an overblow: level +3..+14 dB over 0-300 ms while the
               partials the new mode lacks fade by 10-25 dB (no fade when the rise takes 0 ms),
               then the octave (2/3 of the changes) or the twelfth; a further 0..+3 dB at the change
vents          vented octaves (and a few twelfths) with a level change of -3..+2 dB
cracked        cracked attacks: the note speaks its octave or twelfth for its first 40-60 ms,
               then falls to its fundamental (register event "cracked")
slurs          slurred steps (no gap) of 1-12 semitones up and down: no register change to report
room-ends      note ends and rests of 0.3-1.5 s in rooms with T60 0-1 s, direct-to-reverberant
               ratio 0-12 dB: the release and the tail are outside the note
handling       no note: thumps, clicks and toneless breath over a room noise floor (never voiced)
vibrato        vibrato 0-30 c at 4-6 Hz with a tremolo of 0-2 dB and a level change of -10..+10 dB
noisy-room     SNR 10-14 dB, direct-to-reverberant ratio 3-7 dB, T60 0.3-1 s; some changes
hum            mains hum 50 or 60 Hz with harmonics 10-30 dB under the tone, notes from 175 Hz,
               rests in between
=============  ==================================================================================

Seeds: :data:`TUNING_SEEDS` (1000-1099) and :data:`HELDOUT_SEEDS` (90000-90099). No constant
anywhere in bench is ever fitted on the held-out seeds; the README quotes held-out figures
only.
"""

from __future__ import annotations

import sys
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from dsp.synth import (
    NoiseEvent,
    NoteEvent,
    RegisterEvent,
    Rendering,
    Score,
    Truth,
    plan,
    render,
)

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
            jump = {"jump_at_s": 0.45, "jump_kind": "overblown"}
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


# --- field scenes: the honest measuring stick ------------------------------------------------

# No constant anywhere in bench is ever fitted on HELDOUT_SEEDS: tune on TUNING_SEEDS only.
# The README quotes held-out figures only (the lead runs them once and quotes them).
TUNING_SEEDS = range(1000, 1100)
HELDOUT_SEEDS = range(90000, 90100)

SCENE_TYPES = (
    "rise-break", "vents", "cracked", "slurs", "room-ends", "handling", "vibrato", "noisy-room", "hum",
)
FIELD_RANGE_HZ = (150.0, 3000.0)  # the range a player gives a reference tracker (recorder consort)
_SILENT_DBFS = -150.0  # notes below this carry a timeline only (see _rest)


@dataclass(frozen=True)
class SceneTruth:
    """What a field scene holds, by construction.

    Attributes
    ----------
    scene_type, seed : what made it
    score : the synth's score (notes, register events, noises)
    fmin_hz, fmax_hz : range given to reference trackers
    never_voiced : no audible note at all (handling noise, toneless breath, silence)
    params : the drawn parameters, for the record
    """

    scene_type: str
    seed: int
    score: Score
    fmin_hz: float
    fmax_hz: float
    never_voiced: bool
    params: dict

    @property
    def events(self) -> tuple[RegisterEvent, ...]:
        """Register events (time_s, kind "overblown" | "vented" | "cracked", modes before/after)."""
        return self.score.events

    def voiced_spans(self) -> list[tuple[float, float]]:
        """(start, end) of each audible note's voiced part: attack and release left out, s."""
        return [(a + ev.attack_s, b - ev.release_s) for a, b, ev in self.score.notes if ev.level_dbfs > _SILENT_DBFS]

    def frames(self, times_s: np.ndarray) -> Truth:
        """Exact per-frame state (f0, voiced, mode ...) at ``times_s``; the release, the
        reverberant tail, silence and noise are unvoiced."""
        tr = self.score.truth(times_s)
        silent = np.zeros(np.shape(times_s), dtype=bool)
        t = np.asarray(times_s)
        for a, b, ev in self.score.notes:
            if ev.level_dbfs <= _SILENT_DBFS:
                silent |= (t >= a) & (t < b)
        if not silent.any():
            return tr
        nan = np.where(silent, np.nan, 0.0)
        return Truth(
            times_s=tr.times_s, sounding_f0_hz=tr.sounding_f0_hz + nan, held_f0_hz=tr.held_f0_hz + nan,
            voiced=tr.voiced & ~silent, mode=np.where(silent, 0, tr.mode), jump=np.where(silent, "", tr.jump),
            register=np.where(silent, "", tr.register), level_dbfs=np.where(silent, -np.inf, tr.level_dbfs),
            settled=tr.settled & ~silent,
        )


def _u(rng: np.random.Generator, lo: float, hi: float) -> float:
    return float(rng.uniform(lo, hi))


def _log_u(rng: np.random.Generator, lo: float, hi: float) -> float:
    return float(np.exp(rng.uniform(np.log(lo), np.log(hi))))


def _player(rng: np.random.Generator) -> dict:
    """Per-note playing: level, breath pitch slope, onset overshoot, wander, a little vibrato."""
    return {
        "level_dbfs": _u(rng, -34.0, -16.0),
        "cents_per_db": _u(rng, 0.3, 1.2),
        "onset_cents": _u(rng, 0.0, 30.0),
        "onset_decay_s": _u(rng, 0.02, 0.08),
        "wander_cents": _u(rng, 0.0, 2.0),
        "wander_hz": _u(rng, 0.3, 1.0),
        "wander_phase": _u(rng, 0.0, 6.28),
        "vibrato_cents": float(rng.choice([0.0, 0.0, _u(rng, 3.0, 10.0)])),
        "vibrato_hz": _u(rng, 4.0, 6.0),
        "chiff": bool(rng.random() < 0.7),
    }


def _lead_in(rng: np.random.Generator) -> list[NoteEvent]:
    return _rest(_u(rng, 0.2, 0.5))


def _scene_rise_break(rng: np.random.Generator) -> tuple[list[NoteEvent], dict]:
    events = _lead_in(rng)
    for _ in range(int(rng.integers(3, 5))):
        mode = 2 if rng.random() < 2 / 3 else 3
        dur = _u(rng, 1.6, 2.2)
        events.append(NoteEvent(
            _log_u(rng, 260.0, 1200.0 if mode == 2 else 800.0), dur, jump_at_s=_u(rng, 0.7, dur - 0.5),
            jump_kind="overblown", jump_mode=mode, rise_s=_u(rng, 0.0, 0.3), rise_db=_u(rng, 3.0, 14.0),
            weaken_db=-_u(rng, 10.0, 25.0), jump_level_db=_u(rng, 0.0, 3.0), gap_s=_u(rng, 0.15, 0.5),
            **{**_player(rng), "level_dbfs": _u(rng, -40.0, -26.0)},  # room for the rise
        ))
    return events, {}


def _scene_vents(rng: np.random.Generator) -> tuple[list[NoteEvent], dict]:
    events = _lead_in(rng)
    for _ in range(int(rng.integers(3, 5))):
        mode = 2 if rng.random() < 0.8 else 3
        dur = _u(rng, 1.4, 2.0)
        events.append(NoteEvent(
            _log_u(rng, 260.0, 1200.0 if mode == 2 else 800.0), dur, jump_at_s=_u(rng, 0.6, dur - 0.5),
            jump_kind="vented", jump_mode=mode, jump_level_db=_u(rng, -3.0, 2.0),
            weaken_s=float(rng.choice([0.0, 0.0, _u(rng, 0.05, 0.15)])), gap_s=_u(rng, 0.15, 0.5), **_player(rng),
        ))
    return events, {}


def _scene_cracked(rng: np.random.Generator) -> tuple[list[NoteEvent], dict]:
    events = _lead_in(rng)
    for _ in range(int(rng.integers(4, 7))):
        crack = 2 if rng.random() < 0.7 else 3
        events.append(NoteEvent(
            _log_u(rng, 260.0, 1100.0 if crack == 2 else 750.0), _u(rng, 0.6, 1.2), crack_mode=crack,
            crack_s=_u(rng, 0.04, 0.06), attack_s=_u(rng, 0.012, 0.03), gap_s=_u(rng, 0.15, 0.5), **_player(rng),
        ))
    return events, {}


def _scene_slurs(rng: np.random.Generator) -> tuple[list[NoteEvent], dict]:
    f = _log_u(rng, 350.0, 900.0)
    events = _lead_in(rng)
    steps = []
    for i in range(int(rng.integers(6, 10))):
        if i:
            step = int(rng.integers(1, 13)) * int(rng.choice([-1, 1]))
            if not 260.0 <= f * 2.0 ** (step / 12.0) <= 2000.0:
                step = -step
            f *= 2.0 ** (step / 12.0)
            steps.append(step)
        events.append(NoteEvent(f, _u(rng, 0.35, 0.8), attack_s=0.012, release_s=0.008,
                                **{**_player(rng), "chiff": False, "onset_cents": _u(rng, 0.0, 8.0)}))
    events[-1] = NoteEvent(**{**_asdict(events[-1]), "gap_s": 0.3})
    return events, {"steps_semitones": steps}


def _scene_room_ends(rng: np.random.Generator) -> tuple[list[NoteEvent], dict]:
    events = _lead_in(rng)
    for _ in range(int(rng.integers(4, 6))):
        events.append(NoteEvent(_log_u(rng, 260.0, 2000.0), _u(rng, 0.4, 1.2), release_s=_u(rng, 0.02, 0.08),
                                gap_s=_u(rng, 0.3, 1.5), **_player(rng)))
    t60 = _u(rng, 0.0, 1.0)
    drr = _u(rng, 0.0, 12.0)
    return events, {"reverb_s": t60 if t60 > 0.05 else 0.0, "reverb_wet_db": -drr}


def _scene_handling(rng: np.random.Generator) -> tuple[list[NoteEvent], dict, list[NoiseEvent]]:
    length = _u(rng, 6.0, 8.0)
    noises: list[NoiseEvent] = []
    for _ in range(int(rng.integers(3, 7))):
        noises.append(NoiseEvent("thump", _u(rng, 0.2, length - 0.3), _u(rng, -45.0, -22.0), 0.15))
    for _ in range(int(rng.integers(3, 9))):
        noises.append(NoiseEvent("click", _u(rng, 0.2, length - 0.1), _u(rng, -45.0, -25.0), 0.003))
    for _ in range(int(rng.integers(1, 3))):
        d = _u(rng, 0.4, 1.5)
        noises.append(NoiseEvent("breath", _u(rng, 0.2, length - d), _u(rng, -50.0, -30.0), d))
    opts = {"room_noise_dbfs": _u(rng, -75.0, -55.0)}
    if rng.random() < 0.5:
        opts.update(reverb_s=_u(rng, 0.2, 1.0), reverb_wet_db=-_u(rng, 0.0, 12.0))
    return _rest(length), opts, noises


def _scene_vibrato(rng: np.random.Generator) -> tuple[list[NoteEvent], dict]:
    events = _lead_in(rng)
    for _ in range(int(rng.integers(3, 5))):
        p = _player(rng)
        p.update(vibrato_cents=_u(rng, 0.0, 30.0), vibrato_hz=_u(rng, 4.0, 6.0))
        events.append(NoteEvent(_log_u(rng, 260.0, 2000.0), _u(rng, 1.5, 2.5), crescendo_db=_u(rng, -10.0, 10.0),
                                tremolo_db=_u(rng, 0.0, 2.0), gap_s=_u(rng, 0.15, 0.5), **p))
    return events, {}


def _scene_noisy_room(rng: np.random.Generator) -> tuple[list[NoteEvent], dict]:
    events = _lead_in(rng)
    for _ in range(int(rng.integers(4, 6))):
        dur = _u(rng, 0.8, 1.6)
        jump: dict = {}
        if rng.random() < 1 / 3:
            kind = str(rng.choice(["overblown", "vented"]))
            jump = {"jump_at_s": _u(rng, 0.45, dur - 0.3), "jump_kind": kind,
                    "jump_level_db": _u(rng, 3.0, 6.0) if kind == "overblown" else _u(rng, -3.0, 2.0)}
        f_hi = 1100.0 if jump else 2000.0
        events.append(NoteEvent(_log_u(rng, 260.0, f_hi), dur, gap_s=_u(rng, 0.2, 0.8), **jump, **_player(rng)))
    opts = {"snr_db": _u(rng, 10.0, 14.0), "reverb_s": _u(rng, 0.3, 1.0), "reverb_wet_db": -_u(rng, 3.0, 7.0)}
    return events, opts


def _scene_hum(rng: np.random.Generator) -> tuple[list[NoteEvent], dict]:
    events = _lead_in(rng)
    for _ in range(int(rng.integers(4, 6))):
        events.append(NoteEvent(_log_u(rng, 175.0, 1200.0), _u(rng, 0.6, 1.4), gap_s=_u(rng, 0.3, 1.0),
                                **_player(rng)))
    levels = [ev.level_dbfs for ev in events[1:]]
    tone = 10.0 * np.log10(np.mean(10.0 ** (np.array(levels) / 10.0)))
    return events, {"hum_hz": float(rng.choice([50.0, 60.0])), "hum_dbfs": float(tone - _u(rng, 10.0, 30.0))}


def field_scene(scene_type: str, seed: int) -> tuple[Rendering, SceneTruth]:
    """One randomized scene of ``scene_type`` (see the module docstring) for ``seed``.

    Returns
    -------
    (Rendering, SceneTruth)
        The audio (float32, 44.1 or 48 kHz) and what it holds by construction.

    Raises
    ------
    ValueError
        For an unknown scene type.
    """
    builders = {
        "rise-break": _scene_rise_break, "vents": _scene_vents, "cracked": _scene_cracked, "slurs": _scene_slurs,
        "room-ends": _scene_room_ends, "handling": _scene_handling, "vibrato": _scene_vibrato,
        "noisy-room": _scene_noisy_room, "hum": _scene_hum,
    }
    if scene_type not in builders:
        raise ValueError(f"scene type {scene_type!r} is not one of {', '.join(SCENE_TYPES)}")
    rng = np.random.default_rng([seed, SCENE_TYPES.index(scene_type)])
    sample_rate = int(rng.choice([44100, 48000]))
    built = builders[scene_type](rng)
    events, opts = built[0], dict(built[1])
    noises = built[2] if len(built) > 2 else []
    never = scene_type == "handling"
    params = {k: v for k, v in opts.items() if k != "steps_semitones"}
    steps = opts.pop("steps_semitones", None)
    if steps is not None:
        params["steps_semitones"] = steps
    opts.setdefault("breath_noise_db", _u(rng, -40.0, -25.0))
    if not never:
        opts.setdefault("snr_db", _u(rng, 10.0, 60.0))
    params.update(sample_rate=sample_rate, breath_noise_db=opts["breath_noise_db"], snr_db=opts.get("snr_db"))
    r = render(events, sample_rate, noises=noises, seed=int(rng.integers(1 << 30)), **opts)
    lo, hi = FIELD_RANGE_HZ
    if scene_type == "hum":
        lo = 120.0
    return r, SceneTruth(scene_type, seed, r.score, lo, hi, never, params)
