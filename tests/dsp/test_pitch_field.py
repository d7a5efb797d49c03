"""Pitch in field conditions: vibrato with a crescendo in a room, noisy reverberant rooms.

Truth known by construction: every test signal is a sum of harmonics whose phase is the
integral of a known instantaneous frequency (constructed here, or by :mod:`dsp.synth`), so
the true f0 at each frame's ``time_s`` (its window centre) is exact. Random parameters come
from the benchmark's tuning seeds (1000-1099) only.

Outside reference on the same signals: Praat's autocorrelation pitch through
praat-parselmouth (Boersma, Proc. Inst. Phonetic Sciences 17, 1993), run by
``benchmarks/methods.py`` (``run_praat("ac", ...)``), the best of the references there on
these scenes (aubio ``yin``, Praat ``cc`` measured worse on the same tuning seeds).
"""

from __future__ import annotations

import sys
import warnings
from pathlib import Path

import numpy as np
import pytest
import scipy.signal

from dsp.pitch import coarse_f0
from dsp.synth import NoteEvent, render

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "benchmarks"))

from methods import Track, run_ours

SR = 48000


def _room(x: np.ndarray, rng: np.random.Generator, t60_s: float, drr_db: float) -> np.ndarray:
    """Direct sound plus an exponentially decaying noise tail (T60, direct-to-reverberant ratio)."""
    n = int(1.2 * t60_s * SR)
    t = np.arange(n) / SR
    tail = rng.standard_normal(n) * 10.0 ** (-3.0 * t / t60_s)
    tail[: int(0.005 * SR)] = 0.0
    tail *= 10.0 ** (-drr_db / 20.0) / np.sqrt(np.sum(tail**2))
    tail[0] = 1.0
    return np.asarray(scipy.signal.fftconvolve(x, tail)[: x.size])


def _vibrato_crescendo(seed: int, room: tuple[float, float] | None) -> tuple[np.ndarray, np.ndarray]:
    """Notes with vibrato 10-25 c at 4-6 Hz, the level moving +-10 dB over the note and with the
    vibrato (0.5-3 dB, lagging), brighter when louder, pitch rising with level; truth per sample
    (nan outside the notes' middles)."""
    rng = np.random.default_rng(seed)
    parts, truth = [], []
    for _ in range(3):
        f0 = float(np.exp(rng.uniform(np.log(250), np.log(1500))))
        dur = float(rng.uniform(1.2, 1.8))
        vib_c, vib_hz = rng.uniform(10, 25), rng.uniform(4, 6)
        cresc, am_db, lag = rng.choice([-1, 1]) * rng.uniform(8, 12), rng.uniform(0.5, 3.0), rng.uniform(0, np.pi / 2)
        bright, level, c_per_db = rng.uniform(0, 0.3), rng.uniform(-30, -16), rng.uniform(0.3, 1.5)
        t = np.arange(int(dur * SR)) / SR
        lev = level + cresc * t / dur + am_db * np.sin(2 * np.pi * vib_hz * t - lag)
        f = f0 * 2.0 ** ((vib_c * np.sin(2 * np.pi * vib_hz * t) + c_per_db * (lev - level)) / 1200.0)
        ph = 2 * np.pi * np.concatenate([[0.0], np.cumsum((f[1:] + f[:-1]) / 2 / SR)])
        x = np.zeros(t.size)
        for k in range(1, min(16, int(0.45 * SR // (1.1 * f0))) + 1):
            prof_db = -(k - 1) * 3.0 - 6.0 * np.log2(k) + bright * (k - 1) * (lev - level)
            x += 10 ** (prof_db / 20) * np.sin(k * ph + rng.uniform(0, 2 * np.pi))
        env = np.minimum(1.0, np.minimum(t / 0.03, (dur - t) / 0.03))
        parts += [0.1 * 10 ** (lev / 20) * x * env, np.zeros(int(0.2 * SR))]
        mid = (t >= 0.15) & (t <= dur - 0.15)
        truth += [np.where(mid, f, np.nan), np.full(int(0.2 * SR), np.nan)]
    x, tf = np.concatenate(parts), np.concatenate(truth)
    breath = scipy.signal.sosfilt(scipy.signal.butter(2, [400, 9000], "bandpass", fs=SR, output="sos"),
                                  rng.standard_normal(x.size))
    x = x + breath / breath.std() * np.sqrt(np.mean(x[np.isfinite(tf)] ** 2)) * 10 ** (-35 / 20)
    if room is not None:
        x = _room(x, rng, *room)
    return x.astype(np.float32), tf


def _errors(track: Track, truth_hz: np.ndarray) -> np.ndarray:
    """|cents| of each voiced frame against the truth at its time_s (scored frames only)."""
    idx = np.clip(np.round(track.times_s * SR).astype(int), 0, truth_hz.size - 1)
    ref = truth_hz[idx]
    ok = np.isfinite(ref) & np.isfinite(track.f0_hz)
    return np.abs(1200.0 * np.log2(track.f0_hz[ok] / ref[ok]))


def _praat_ac(x: np.ndarray) -> Track:
    pytest.importorskip("parselmouth")
    from methods import run_praat

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return run_praat("ac", x, SR, 200.0, 2500.0)


def test_vibrato_crescendo_in_a_room_beats_praat():
    # T60 0.8 s, direct-to-reverberant 6 dB: the room's tail lies on each harmonic with its own
    # phase; weighting the harmonics by their agreement (random effects) halves the error.
    # Nine notes pooled: one scene alone spreads (seed 1001 alone: ours p95 9.7 c, Praat 9.3 c).
    ours_e, ref_e = [], []
    for seed in (1001, 1004, 1007):
        x, tf = _vibrato_crescendo(seed, (0.8, 6.0))
        ours_e.append(_errors(run_ours(x, SR, 200.0, 2500.0), tf))
        ref_e.append(_errors(_praat_ac(x), tf))
    ours, ref = np.concatenate(ours_e), np.concatenate(ref_e)
    print(f"room vibrato: ours {np.median(ours):.2f} / {np.percentile(ours, 95):.2f} c, praat ac "
          f"{np.median(ref):.2f} / {np.percentile(ref, 95):.2f} c")
    assert ours.size > 1500 and ref.size > 700
    # measured on tuning seeds 1000-1011 (48 notes): ours median 1.22 c, p95 5.0 c; Praat ac
    # 2.20 / 7.80 (before this weighting ours read 2.25 / 9.6). These nine notes: ours
    # 1.53 / 7.9 c, Praat ac 2.52 / 9.0 c; with the harmonics weighted by noise alone (before
    # this change) ours read 3.24 / 10.3 c
    assert np.median(ours) < 0.8 * np.median(ref)
    assert np.percentile(ours, 95) < np.percentile(ref, 95)
    assert np.median(ours) < 2.0 and np.percentile(ours, 95) < 9.0
    assert np.mean(ours > 50.0) < 0.003


def test_dry_vibrato_crescendo_keeps_its_precision():
    # the same notes without the room: harmonics agree within their noise and keep their
    # noise weights (measured on tuning seeds 1000-1011: median 0.13 c, p95 0.53 c)
    x, tf = _vibrato_crescendo(1002, None)
    ours = _errors(run_ours(x, SR, 200.0, 2500.0), tf)
    print(f"dry: {np.median(ours):.3f} / {np.percentile(ours, 95):.3f} c")
    assert ours.size > 500
    assert np.median(ours) < 0.3
    assert np.percentile(ours, 95) < 1.2


def test_synth_vibrato_with_crescendo_below_a_fifth_of_a_cent():
    # dsp.synth's own vibrato (pitch only) with a +-10 dB crescendo and pitch rising with level
    rng = np.random.default_rng(1005)
    notes = [
        NoteEvent(float(f), 1.5, level_dbfs=float(rng.uniform(-28, -16)), vibrato_cents=float(rng.uniform(10, 25)),
                  vibrato_hz=float(rng.uniform(4, 6)), crescendo_db=float(rng.choice([-10.0, 10.0])),
                  cents_per_db=float(rng.uniform(0.3, 1.5)), gap_s=0.2)
        for f in np.exp(rng.uniform(np.log(250), np.log(1500), 3))
    ]
    r = render(notes, SR, seed=1005)
    track = run_ours(r.audio, SR, 200.0, 2500.0)
    truth = r.truth(track.times_s, settle_s=0.1)
    ok = truth.settled & np.isfinite(track.f0_hz)
    err = np.abs(1200.0 * np.log2(track.f0_hz[ok] / truth.sounding_f0_hz[ok]))
    print(f"synth: {np.median(err):.3f} / {np.percentile(err, 95):.3f} c")
    assert err.size > 500
    # measured on tuning seeds 1000-1011: median 0.076 c, p95 0.23 c
    assert np.median(err) < 0.15
    assert np.percentile(err, 95) < 0.6


def _noisy_room(seed: int) -> tuple[np.ndarray, object]:
    """Six legato-ish notes 250-2200 Hz, some with a weak fundamental (-6, -12 dB), breath -20 dB,
    T60 0.4-1.5 s, direct-to-reverberant 3-7 dB, white noise 10-14 dB under the notes."""
    rng = np.random.default_rng(seed)
    notes = [
        NoteEvent(float(f), float(rng.uniform(0.35, 1.0)), level_dbfs=-22.0 + float(rng.uniform(-3, 3)),
                  vibrato_cents=float(rng.choice([0.0, 0.0, 10.0])), h1_offset_db=float(rng.choice([0.0, 0.0, -6.0, -12.0])),
                  gap_s=float(rng.choice([0.0, 0.0, 0.05, 0.2])))
        for f in np.exp(rng.uniform(np.log(250), np.log(2200), 6))
    ]
    r = render(notes, SR, seed=seed, breath_noise_db=-20.0, reverb_s=float(rng.uniform(0.4, 1.5)),
               reverb_wet_db=-float(rng.uniform(3, 7)))
    noise = np.random.default_rng([seed, 77]).standard_normal(r.audio.size)
    x = r.audio + 10 ** ((-22.0 - float(rng.uniform(10, 14))) / 20) * noise
    return x.astype(np.float32), r


def test_noisy_reverberant_rooms_no_octave_errors():
    # Frames centred at least 30 ms + half a window (as benchmarks/metrics.py) from a note's
    # start or end, scored against the synth's exact sounding f0.
    n_ours = n_bad_ours = n_ref = n_bad_ref = 0
    for seed in (1031, 1032, 1033, 1034):
        x, r = _noisy_room(seed)
        for name, track in (("ours", run_ours(x, SR, 200.0, 2500.0)), ("praat", _praat_ac(x))):
            truth = r.truth(track.times_s)
            guard = 0.03 + 0.5 * track.window_s
            far = np.ones(track.times_s.size, dtype=bool)
            for start_s, end_s, ev in r.notes:
                for b in (start_s + ev.attack_s, end_s - ev.release_s):
                    far &= np.abs(track.times_s - b) > guard
            ok = far & np.isfinite(truth.sounding_f0_hz) & np.isfinite(track.f0_hz)
            bad = int(np.sum(np.abs(1200.0 * np.log2(track.f0_hz[ok] / truth.sounding_f0_hz[ok])) > 50.0))
            if name == "ours":
                n_ours, n_bad_ours = n_ours + int(ok.sum()), n_bad_ours + bad
            else:
                n_ref, n_bad_ref = n_ref + int(ok.sum()), n_bad_ref + bad
    # measured: ours 0 of 2381 frames (3 before the coarse-match fixes), Praat ac 74 of 1359
    print(f"gross+octave: ours {n_bad_ours}/{n_ours}, praat ac {n_bad_ref}/{n_ref}")
    assert n_ours > 1500
    assert n_bad_ours / n_ours <= 0.003  # the target for every scene type (issue #12)
    assert n_bad_ours / n_ours < n_bad_ref / n_ref


def test_a_partial_split_in_two_counts_once():
    # f0 500 Hz with a weak fundamental; a room splits H4 into two peaks (2000 and 2020 Hz).
    # Counting both made the octave above (1000 Hz) look fuller than full and win.
    freq = np.array([1000.0, 2000.0, 1500.0, 2020.0, 500.0, 2500.0])
    power = np.array([1.0, 0.2, 0.2, 0.15, 0.05, 0.02])
    f0, _ = coarse_f0(freq, power, freq.size, 60.0, 4500.0)
    assert f0 == pytest.approx(500.0)


def test_common_submultiple_of_two_overlapping_notes_is_no_note():
    # 333.3 Hz sounding over the tail of 250 Hz: 83.3 Hz (their common sub-multiple) explains
    # every peak, but its 1st and 2nd harmonics are empty; an open pipe sounds its fundamental
    # (Fletcher & Rossing 1998, open pipe: all harmonics present)
    freq = np.array([333.3, 250.0, 666.7, 1000.0, 1666.5])
    power = np.array([1.0, 0.8, 0.5, 0.05, 0.005])
    f0, _ = coarse_f0(freq, power, freq.size, 60.0, 4500.0)
    assert f0 == pytest.approx(333.3)
