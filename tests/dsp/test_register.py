"""Register monitor on the synthetic duct flute (dsp.synth), whose truth is exact.

Physics checked (Fletcher & Rossing, *The Physics of Musical Instruments*, 1998, open pipe):
the overblown or vented octave keeps only the multiples of 2 f0 of the fingered note, the
twelfth only the multiples of 3 f0. "Overblown" = the level rose at the change (blowing
harder; common practice, the synth steps +8 dB in 30 ms); "vented" = the level kept.
Targets: each jump reported within 60 ms of the change (by ready_s), with its kind; no jump
reported on steady notes.
"""

from __future__ import annotations

import numpy as np
import pytest

from bench.engine import EVENT_GAP_S
from dsp.analyser import StreamingAnalyser
from dsp.register import RegisterMonitor, summarise_row
from dsp.synth import NoteEvent, render

SR = 48000


def _onsets(frames):
    """(ready_s, jump kind) of each frame where 'jumped' begins.

    Unvoiced frames are passed over when the last voiced one is under EVENT_GAP_S back, as
    the live screen's event list counts jumps: a frame lost inside a tone is no new jump.
    """
    out = []
    prev, last_voiced_s = None, -np.inf
    for f in frames:
        if f.f0_hz is None:
            continue
        if f.time_s - last_voiced_s > EVENT_GAP_S:
            prev = None
        if f.register == "jumped" and prev != "jumped":
            out.append((f.ready_s, f.jump))
        prev, last_voiced_s = f.register, f.time_s
    return out


def _score(jumps, onsets, window_s=0.06):
    hits, kinds, used = 0, 0, set()
    for t, kind, _ in jumps:
        cand = [k for k, (r, _) in enumerate(onsets) if t - 0.05 <= r <= t + window_s and k not in used]
        if cand:
            used.add(cand[0])
            hits += 1
            kinds += onsets[cand[0]][1] == kind
    return hits, kinds, len(onsets) - len(used)


@pytest.fixture(scope="module")
def jump_set():
    rng = np.random.default_rng(5)
    notes = []
    for i in range(12):
        f = float(rng.choice([293.66, 349.23, 392.0, 440.0, 523.25, 587.33, 698.46]))
        kind = ["overblown", "vented"][i % 2]
        notes.append(
            NoteEvent(
                f, 0.8, jump_at_s=float(rng.uniform(0.35, 0.55)), jump_kind=kind,
                weaken_s=float(rng.choice([0.0, 0.1])), vibrato_cents=float(rng.uniform(0, 8)), gap_s=0.12,
            )
        )
    return render(notes, SR, seed=9)


def test_jumps_found_with_their_kind_within_60_ms(jump_set):
    frames = StreamingAnalyser(SR).process(jump_set.audio)
    hits, kinds, false = _score(jump_set.jumps, _onsets(frames))
    n = len(jump_set.jumps)
    assert hits / n >= 0.95  # recall
    assert kinds / n >= 0.9  # kind right (vented vs overblown)
    assert hits / (hits + false) >= 0.95  # precision


def test_sounding_pitch_is_the_octave_once_jumped(jump_set):
    frames = StreamingAnalyser(SR).process(jump_set.audio)
    times = np.array([f.time_s for f in frames])
    truth = jump_set.truth(times)
    after = truth.settled & (truth.mode == 2)
    f0 = np.array([np.nan if f.f0_hz is None else f.f0_hz for f in frames])
    err = np.abs(1200 * np.log2(f0[after] / truth.sounding_f0_hz[after]))
    assert after.sum() > 100
    assert np.median(err) < 0.5
    held = np.array([np.nan if f.held_f0_hz is None else f.held_f0_hz for f in frames])
    assert np.median(np.abs(1200 * np.log2(held[after] / truth.held_f0_hz[after]))) < 1.0


def test_no_jump_on_steady_notes():
    notes = [
        NoteEvent(349.23, 0.8, vibrato_cents=12, gap_s=0.1),
        NoteEvent(392.0, 0.8, crescendo_db=6.0, cents_per_db=2.0, gap_s=0.1),
        NoteEvent(440.0, 0.8, h1_offset_db=-15.0, gap_s=0.1),  # fundamental under the 2nd harmonic
        NoteEvent(880.0, 0.8, gap_s=0.1),  # a new note an octave up, after silence
        NoteEvent(523.25, 0.8),
    ]
    r = render(notes, SR, seed=3)
    frames = StreamingAnalyser(SR).process(r.audio)
    assert _onsets(frames) == []
    voiced = [f for f in frames if f.f0_hz is not None]
    assert sum(f.register == "weakening" for f in voiced) <= 0.02 * len(voiced)


def test_weakening_comes_before_the_jump():
    r = render([NoteEvent(440.0, 1.2, jump_at_s=0.8, jump_kind="vented", weaken_s=0.3)], SR, seed=1)
    frames = StreamingAnalyser(SR).process(r.audio)
    t_jump = r.jumps[0][0]
    states = [(f.ready_s, f.register) for f in frames if f.register is not None]
    weak = [t for t, s in states if s == "weakening"]
    assert weak and t_jump - 0.35 < weak[0] < t_jump
    first_jump = next(t for t, s in states if s == "jumped")
    assert weak[0] < first_jump <= t_jump + 0.06


def test_twelfth_is_a_jump_too():
    r = render([NoteEvent(261.63, 1.0, jump_at_s=0.5, jump_kind="overblown", jump_mode=3)], SR, seed=2)
    frames = StreamingAnalyser(SR).process(r.audio)
    hits, kinds, false = _score(r.jumps, _onsets(frames))
    assert (hits, kinds, false) == (1, 1, 0)
    late = [f for f in frames if f.ready_s > r.jumps[0][0] + 0.15 and f.f0_hz is not None and f.ready_s < 0.9]
    assert late and all(abs(f.f0_hz / (3 * f.held_f0_hz) - 1) < 0.01 for f in late)


def test_lock_judges_against_the_target():
    # a note that starts in the octave register: unlocked it is just a new note; locked to
    # the fingered note an octave below, it is a jumped register
    r = render([NoteEvent(440.0, 0.8, mode=2)], SR, seed=4)
    an = StreamingAnalyser(SR)
    free = [f for f in an.process(r.audio) if f.f0_hz is not None]
    assert all(f.register == "steady" for f in free)
    an.reset()
    an.lock(440.0)
    locked = [f for f in an.process(r.audio) if f.f0_hz is not None]
    steady_part = locked[len(locked) // 4 :]
    assert all(f.register == "jumped" and f.held_f0_hz == 440.0 for f in steady_part)
    an.lock(None)


def _evidence(partials, f0_hz):
    """The monitor's evidence for a reading ``f0_hz`` of a spectrum {Hz: power}: powers at
    k f0 / m (k = 1..8, m = 1..3), a floor of 1e-9 where no partial sits."""
    powers = np.full((3, 8), 1e-9)
    for m in range(1, 4):
        for k in range(1, 9):
            powers[m - 1, k - 1] += sum(p for f, p in partials.items() if abs(f - k * f0_hz / m) < 1.0)
    out = np.empty((3, 4))
    summarise_row(powers, out)
    return out.tolist()


def test_monitor_alone_on_hand_made_evidence():
    mon = RegisterMonitor(0.005)
    first = [1.0, 0.1, 0.05, 0.02, 0.01, 0.005, 0.002, 0.001]  # all harmonics of 440 Hz
    ev_first = _evidence({440.0 * j: p for j, p in enumerate(first, 1)}, 440.0)
    # the octave: only the even harmonics of 440 Hz sound, louder
    ev_oct = _evidence({880.0 * j: p for j, p in enumerate([1.0, 0.1, 0.03, 0.01], 1)}, 880.0)
    for _ in range(60):
        assert mon.update(440.0, ev_first, -20.0).register == "steady"
    jumped = mon.update(880.0, ev_oct, -12.0)  # level +8 dB at the change
    assert (jumped.register, jumped.jump, jumped.mode) == ("jumped", "overblown", 2)
    assert jumped.held_f0_hz == pytest.approx(440.0)
    for _ in range(20):
        assert mon.update(None, ev_first, -90.0).register is None  # silence ends the note
    assert mon.update(880.0, ev_first, -20.0).register == "steady"  # a new note
    with pytest.raises(ValueError, match="target_hz -1"):
        mon.lock(-1.0)


def test_jumps_in_a_reverberant_room():
    # level alone misleads in a room (the tail carries the old level); the spectral collapse
    # of the held note's odd harmonics is judged against their baseline instead.
    rng = np.random.default_rng(8)
    notes = [
        NoteEvent(
            float(rng.choice([349.23, 440.0, 523.25, 587.33])), 0.8,
            jump_at_s=float(rng.uniform(0.35, 0.55)), jump_kind=["overblown", "vented"][i % 2], gap_s=0.15,
        )
        for i in range(8)
    ]
    r = render(notes, SR, seed=6, reverb_s=0.5)
    frames = StreamingAnalyser(SR).process(r.audio)
    hits, kinds, false = _score(r.jumps, _onsets(frames))
    # measured here: 8/8 found, kinds right, no false onset; the benchmark's room-jumps
    # (octaves and twelfths, weakening, breath and room noise, T60 0.5-0.7 s) print the
    # figures over a larger set
    assert hits >= 7
    assert kinds >= 7
    assert false <= 1


def _legato_steps(ratio, seed, reverb_s):
    """Pairs of notes slurred (no gap) from an alto's notes up by ``ratio``."""
    rng = np.random.default_rng(seed)
    notes = []
    for f in (293.66, 349.23, 392.0, 440.0, 466.16, 523.25):
        notes.append(NoteEvent(f, 0.45, level_dbfs=float(rng.uniform(-26, -14)), gap_s=0.0))
        notes.append(NoteEvent(f * ratio, 0.45, level_dbfs=float(rng.uniform(-26, -14)), gap_s=0.12))
    return render(notes, SR, seed=seed, reverb_s=reverb_s)


@pytest.mark.parametrize("ratio", [3 / 2, 4 / 3], ids=["fifth", "fourth"])
def test_a_slurred_step_to_another_note_is_no_register_jump(ratio):
    # Physics (Fletcher & Rossing 1998, open pipe): a register change keeps the sounding
    # partials on the fingered note's harmonics. A note a fifth (3/2) or fourth (4/3) up
    # shares some of them (the 3rd harmonic is a fifth's 2nd) but puts its own fundamental
    # between them: that is a new note, slurred, and no jump (common practice).
    onsets, unguarded = 0, 0
    for seed, reverb_s in ((0, 0.0), (1, 0.5), (2, 0.0), (3, 0.5)):
        r = _legato_steps(ratio, seed, reverb_s)
        frames = StreamingAnalyser(SR).process(r.audio)
        onsets += len(_onsets(frames))
        # once the step has settled, the held note is the note sounding, not the common
        # sub-multiple that mixed windows of the two notes can read in a room
        for start_s, end_s, ev in r.notes:
            inside = [f for f in frames if start_s + 0.2 < f.time_s < end_s - 0.1 and f.f0_hz is not None]
            assert inside and all(abs(f.held_f0_hz / f.f0_hz - 1) < 0.03 for f in inside), (seed, ev.f0_hz)
        # the same audio with the between-harmonics check switched off: the test can fail
        unguarded += len(_onsets(StreamingAnalyser(SR, new_note_db=-1e6).process(r.audio)))
    assert onsets == 0
    # measured before the settled-level reference (2026-12): 15 false jumps on these 24 slurred
    # fifths, 6 on the fourths; since then the fourths give none even unguarded (the baselines
    # stop learning while the level climbs into the second note), so only the fifths show the
    # test can fail
    if ratio == 3 / 2:
        assert unguarded > 0


def test_monitor_alone_tells_a_slurred_fifth_from_a_twelfth():
    # the held note's 3rd harmonic survives both; only the fifth sounds at 3/2 f0
    # (Fletcher & Rossing 1998: the twelfth keeps just the multiples of 3 f0)
    held = {440.0 * j: p for j, p in enumerate([1.0, 0.2, 0.1, 0.05, 0.03, 0.02, 0.01, 0.005], 1)}
    twelfth = {1320.0 * j: p for j, p in enumerate([1.0, 0.1, 0.02], 1)}
    fifth = {660.0 * j: p for j, p in enumerate([1.0, 0.1, 0.02, 0.01], 1)}
    outcomes = []
    for new in (twelfth, fifth):
        mon = RegisterMonitor(0.005)
        for _ in range(60):
            mon.update(440.0, _evidence(held, 440.0), -20.0)
        # the long window still reads the held note while the short one hears the change
        r = mon.update(440.0, _evidence(new, 440.0), -20.0)
        outcomes.append((r.register, r.jump, r.mode))
    assert outcomes == [("jumped", "vented", 3), ("steady", None, 1)]


def test_a_note_after_a_jumped_one_in_a_room_reads_its_own_pitch():
    # A reverberant tail keeps the jumped note voiced across the gap; the next note, an
    # octave above the first one's fingering, is a new note in its first register, not a
    # continued twelfth: its pitch and register are its own (synthetic truth, exact).
    notes = [
        NoteEvent(261.63, 0.8, jump_at_s=0.45, jump_kind="overblown", jump_mode=3, gap_s=0.15),
        NoteEvent(523.25, 0.8),
    ]
    r = render(notes, SR, seed=7, reverb_s=0.5, breath_noise_db=-25.0, room_noise_dbfs=-55.0)
    frames = StreamingAnalyser(SR).process(r.audio)
    start_s, end_s, _ = r.notes[1]
    inside = [f for f in frames if start_s + 0.1 < f.time_s < end_s - 0.1 and f.f0_hz is not None]
    truth = r.truth(np.array([f.time_s for f in inside])).sounding_f0_hz
    cents = 1200 * np.log2(np.array([f.f0_hz for f in inside]) / truth)
    assert len(inside) > 100 and np.max(np.abs(cents)) < 5.0
    assert all(f.register != "jumped" for f in inside)


@pytest.mark.parametrize("f0_hz", [261.63, 523.25, 880.0])
def test_a_vented_twelfth_after_weakening_is_told_vented(f0_hz):
    # before a twelfth the harmonics off the multiples of 3 fade (the fundamental with
    # them, so the level sinks); the blowing level the jump is judged against is the one
    # from before that fade, so a jump at the same blowing level reads vented
    r = render([NoteEvent(f0_hz, 0.8, jump_at_s=0.5, jump_kind="vented", jump_mode=3, weaken_s=0.1)], SR, seed=11)
    frames = StreamingAnalyser(SR).process(r.audio)
    assert _score(r.jumps, _onsets(frames)) == (1, 1, 0)


def test_a_jump_holds_through_one_stray_reading():
    # in a note's reverberant tail one frame can read another pitch (here twice the
    # sounding octave); that is no new note until confirmed, so the jump goes on, with
    # its kind, instead of ending and being reported again
    mon = RegisterMonitor(0.005)
    first = _evidence({440.0 * j: p for j, p in enumerate([1.0, 0.2, 0.1, 0.05, 0.03, 0.02, 0.01, 0.005], 1)}, 440.0)
    octave_partials = {880.0 * j: p for j, p in enumerate([1.0, 0.1, 0.03, 0.01], 1)}
    octave, stray = _evidence(octave_partials, 880.0), _evidence(octave_partials, 1760.0)
    for _ in range(60):
        mon.update(440.0, first, -20.0)
    readings = [mon.update(880.0, octave, -12.0) for _ in range(10)]  # overblown: +8 dB
    readings.append(mon.update(1760.0, stray, -16.0))
    readings += [mon.update(880.0, octave, -16.0) for _ in range(10)]  # the tail fades
    assert [(r.register, r.jump) for r in readings] == [("jumped", "overblown")] * 21


def test_jump_kinds_after_a_weakening_in_a_room():
    # a weakening lowers the level (the held note's strong odd harmonics fade), and in a
    # room an overblown change caught early has not reached its new level yet; its kind
    # waits while the level still climbs. Overblown = the level rose at the change
    # (common practice; the synth steps +8 dB), vented = kept.
    notes = [
        NoteEvent(f, 0.9, jump_at_s=0.5, jump_kind=kind, weaken_s=0.1, gap_s=0.15)
        for f in (262.0, 330.0, 392.0, 494.0, 587.0, 698.0, 784.0, 880.0)
        for kind in ("overblown", "vented")
    ]
    r = render(notes, SR, seed=0, reverb_s=0.6, breath_noise_db=-25.0, room_noise_dbfs=-55.0)
    hits, kinds, false = _score(r.jumps, _onsets(StreamingAnalyser(SR).process(r.audio)))
    assert (hits, false) == (16, 0)
    assert kinds >= 15  # measured: 15 of 16
    # judged at once instead, the same audio gives 12 of 16: the test can fail
    _, kinds_at_once, _ = _score(r.jumps, _onsets(StreamingAnalyser(SR, kind_wait_s=0.0).process(r.audio)))
    assert kinds_at_once < kinds


def test_a_jump_holds_through_a_lost_frame():
    # a frame lost inside the tone (unvoiced for one hop) is no end of the jump: it goes
    # on with its kind, although the level has since sunk (a reverberant tail)
    mon = RegisterMonitor(0.005)
    first = _evidence({440.0 * j: p for j, p in enumerate([1.0, 0.2, 0.1, 0.05, 0.03, 0.02, 0.01, 0.005], 1)}, 440.0)
    octave = _evidence({880.0 * j: p for j, p in enumerate([1.0, 0.1, 0.03, 0.01], 1)}, 880.0)
    for _ in range(60):
        mon.update(440.0, first, -20.0)
    before = [mon.update(880.0, octave, -12.0) for _ in range(10)]
    lost = mon.update(None, octave, -30.0)
    after = [mon.update(880.0, octave, -18.0) for _ in range(10)]
    assert lost.register is None
    assert {(r.register, r.jump) for r in before + after} == {("jumped", "overblown")}
