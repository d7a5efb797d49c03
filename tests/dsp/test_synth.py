"""The synthetic duct flute checked against definitions and pipe physics.

Outside references: the definition of RMS level (a full-scale sine is -3.01 dBFS), the DFT
(numpy.fft) for spectral peaks, the analytic signal (scipy.signal.hilbert) for instantaneous
frequency, Schroeder backward integration (Schroeder, JASA 37:409, 1965) for decay time, and
the open-pipe register facts of Fletcher & Rossing, *The Physics of Musical Instruments* (1998):
all harmonics in the first register; only multiples of 2 f0 when the octave sounds.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.signal

from dsp.synth import NoteEvent, plan, register_profile_db, render, render_blocks

QUIET = {"breath_noise_db": -np.inf}


def _rms_dbfs(x: np.ndarray) -> float:
    x = np.asarray(x, dtype=np.float64)
    return float(10.0 * np.log10(np.mean(x * x)))


def _spectrum(x: np.ndarray, sample_rate: float, pad: int = 8) -> tuple[np.ndarray, np.ndarray]:
    """Hann-windowed magnitude spectrum (linear) and bin frequencies, Hz."""
    x = np.asarray(x, dtype=np.float64)
    w = np.hanning(x.size)
    n_fft = pad * x.size
    mag = np.abs(np.fft.rfft(x * w, n_fft))
    return mag, np.fft.rfftfreq(n_fft, 1.0 / sample_rate)


def _peak_hz(x: np.ndarray, sample_rate: float, near_hz: float) -> float:
    """Frequency of the spectral peak nearest ``near_hz`` (parabolic interpolation on log |X|)."""
    mag, freqs = _spectrum(x, sample_rate)
    band = np.flatnonzero(np.abs(freqs - near_hz) < 0.03 * near_hz)
    k = band[np.argmax(mag[band])]
    a, b, c = np.log(mag[k - 1 : k + 2])
    delta = 0.5 * (a - c) / (a - 2 * b + c)
    return float(freqs[k] + delta * (freqs[1] - freqs[0]))


def _level_at(x: np.ndarray, sample_rate: float, freq_hz: float) -> float:
    """Peak magnitude (dB, arbitrary reference) within +-1 % of ``freq_hz``."""
    mag, freqs = _spectrum(x, sample_rate)
    band = np.abs(freqs - freq_hz) < 0.01 * freq_hz
    return float(20.0 * np.log10(np.max(mag[band]) + 1e-300))


def _steady(r, t0: float, t1: float) -> np.ndarray:
    sr = r.sample_rate
    return r.audio[int(t0 * sr) : int(t1 * sr)]


@pytest.mark.parametrize("sample_rate", [44100, 48000, 96000])
@pytest.mark.parametrize("f0_hz", [87.307, 261.626, 440.0, 698.456, 2093.0])
def test_spectral_peak_at_the_set_frequency(sample_rate, f0_hz):
    # A DFT peak (Hann, 8x zero padding, parabolic interpolation) of a steady tone sits at f0;
    # with 1 s of signal that estimator is good to well under 0.01 Hz for a clean partial.
    r = render([NoteEvent(f0_hz, 1.2, chiff=False)], sample_rate, **QUIET)
    x = _steady(r, 0.1, 1.1)
    assert _peak_hz(x, sample_rate, f0_hz) == pytest.approx(f0_hz, abs=0.01)
    if 2 * f0_hz < 0.4 * sample_rate:  # the 2nd harmonic too (open pipe: all harmonics)
        assert _peak_hz(x, sample_rate, 2 * f0_hz) == pytest.approx(2 * f0_hz, abs=0.02)


@pytest.mark.parametrize("level_dbfs", [-40.0, -20.0, -6.0])
@pytest.mark.parametrize("mode", [1, 2, 3])
def test_rms_level_of_the_steady_part(level_dbfs, mode):
    # RMS definition: 10 log10(mean x^2); the tone (no breath) is normalised to level_dbfs.
    r = render([NoteEvent(220.0, 1.0, level_dbfs=level_dbfs, mode=mode)], 48000, **QUIET)
    assert _rms_dbfs(_steady(r, 0.2, 0.9)) == pytest.approx(level_dbfs, abs=0.02)


def test_full_scale_sine_reference():
    # A single harmonic at 0 dBFS RMS would be a sine of peak sqrt(2); at -3.01 dBFS peak 1.
    r = render([NoteEvent(1000.0, 0.5, level_dbfs=-3.0103, chiff=False)], 48000, max_harmonics=1, **QUIET)
    assert np.max(np.abs(_steady(r, 0.1, 0.4))) == pytest.approx(1.0, abs=1e-3)


def test_first_register_has_odd_and_even_harmonics_falling():
    # Fletcher & Rossing (1998): an open-open pipe has all harmonics.
    f0 = 349.228
    r = render([NoteEvent(f0, 1.0, chiff=False)], 48000, **QUIET)
    x = _steady(r, 0.2, 0.9)
    levels = [_level_at(x, 48000, k * f0) for k in range(1, 9)]
    rel = np.array(levels) - levels[0]
    assert np.all(rel[1:] > -60.0)  # every harmonic present
    assert np.all(np.diff(levels) < 0)  # a falling slope
    # and the levels follow the documented profile within a dB
    assert rel == pytest.approx(register_profile_db(1, 8), abs=1.0)


@pytest.mark.parametrize("kind", ["overblown", "vented"])
def test_octave_register_has_no_odd_multiples(kind):
    # Fletcher & Rossing (1998): the overblown/vented octave of an open pipe sounds harmonics
    # 2, 4, 6 ... of the fingered f0; the fundamental and odd ones are gone.
    f0 = 523.251
    r = render([NoteEvent(f0, 1.6, jump_at_s=0.6, jump_kind=kind)], 48000, **QUIET)
    before = _steady(r, 0.1, 0.5)
    after = _steady(r, 0.75, 1.5)
    top_before = max(_level_at(before, 48000, k * f0) for k in range(1, 9))
    top_after = max(_level_at(after, 48000, k * f0) for k in range(1, 9))
    for k in (1, 3, 5, 7):
        assert _level_at(after, 48000, k * f0) < top_after - 100.0
        assert _level_at(before, 48000, k * f0) > top_before - 60.0
    for k in (2, 4, 6):
        assert _level_at(after, 48000, k * f0) > top_after - 60.0


def test_twelfth_keeps_only_multiples_of_three():
    # Stopped-pipe-like twelfth or open-pipe 3rd mode: partials at 3 f0, 6 f0 ...
    f0 = 261.626
    r = render([NoteEvent(f0, 1.0, mode=3, chiff=False)], 48000, **QUIET)
    x = _steady(r, 0.2, 0.9)
    top = _level_at(x, 48000, 3 * f0)
    for k in (1, 2, 4, 5, 7, 8):
        assert _level_at(x, 48000, k * f0) < top - 100.0
    assert _peak_hz(x, 48000, 3 * f0) == pytest.approx(3 * f0, abs=0.02)
    assert r.truth([0.5]).sounding_f0_hz[0] == pytest.approx(3 * f0)


@pytest.mark.parametrize("kind, step_db", [("overblown", 8.0), ("vented", 0.0)])
def test_level_step_at_the_change(kind, step_db):
    # Overblowing needs more breath pressure (common practice): ~8 dB more; venting keeps level.
    r = render([NoteEvent(440.0, 1.6, jump_at_s=0.8, jump_kind=kind)], 48000, **QUIET)
    delta = _rms_dbfs(_steady(r, 0.9, 1.5)) - _rms_dbfs(_steady(r, 0.1, 0.7))
    assert delta == pytest.approx(step_db, abs=0.05)
    # the change takes ~30 ms: 20 ms after its centre the level has arrived
    sr = 48000
    tail = r.audio[int(0.815 * sr) : int(0.835 * sr)]
    assert _rms_dbfs(tail) == pytest.approx(-20.0 + step_db, abs=0.6)


def test_pitch_rises_with_level():
    # cents_per_db: a 12 dB crescendo at 1.5 c/dB ends 18 c sharp, exactly per the truth.
    ev = NoteEvent(440.0, 2.0, crescendo_db=12.0, cents_per_db=1.5, chiff=False)
    r = render([ev], 48000, max_harmonics=1, **QUIET)
    tr = r.truth([0.1, 1.9])
    cents = 1200 * np.log2(tr.sounding_f0_hz / 440.0)
    assert cents == pytest.approx([1.5 * 12 * 0.1 / 2.0, 1.5 * 12 * 1.9 / 2.0], abs=1e-9)
    assert tr.level_dbfs == pytest.approx([-20 + 0.6, -20 + 11.4])


def test_instantaneous_frequency_matches_truth_under_vibrato():
    # Analytic signal (scipy.signal.hilbert): phase derivative of a single partial = truth.
    sr = 48000
    ev = NoteEvent(440.0, 2.0, vibrato_cents=30.0, vibrato_hz=5.5, chiff=False, cents_per_db=1.0,
                   crescendo_db=6.0)
    r = render([ev], sr, max_harmonics=1, **QUIET)
    x = r.audio.astype(np.float64)
    phase = np.unwrap(np.angle(scipy.signal.hilbert(x)))
    inst_hz = np.diff(phase) * sr / (2 * np.pi)
    t_mid = (np.arange(inst_hz.size) + 0.5) / sr
    sl = slice(int(0.3 * sr), int(1.7 * sr))
    truth = r.truth(t_mid[sl]).sounding_f0_hz
    err_cents = 1200 * np.log2(inst_hz[sl] / truth)
    assert np.max(np.abs(err_cents)) < 0.05
    assert np.ptp(1200 * np.log2(truth / 440.0)) > 55.0  # the vibrato really swings +-30 c


def test_weak_fundamental_option():
    # h1_offset_db lowers the sounding fundamental below the 2nd harmonic.
    f0 = 440.0
    r = render([NoteEvent(f0, 1.0, h1_offset_db=-15.0, chiff=False)], 48000, **QUIET)
    x = _steady(r, 0.2, 0.9)
    assert _level_at(x, 48000, 2 * f0) - _level_at(x, 48000, f0) == pytest.approx(6.0, abs=0.5)
    assert r.truth([0.5]).sounding_f0_hz[0] == f0  # still the same note


def test_weakening_fades_the_odd_harmonics_before_the_change():
    f0 = 440.0
    ev = NoteEvent(f0, 2.0, jump_at_s=1.2, jump_kind="overblown", weaken_s=0.3, weaken_db=-20.0)
    r = render([ev], 48000, **QUIET)
    early = _steady(r, 0.5, 0.55)  # same length: DFT magnitudes scale with length
    late = _steady(r, 1.135, 1.185)  # the last 50 ms of the weakening: odd ones ~ -18 dB
    odd_drop = _level_at(late, 48000, 3 * f0) - _level_at(early, 48000, 3 * f0)
    even_drop = _level_at(late, 48000, 2 * f0) - _level_at(early, 48000, 2 * f0)
    assert odd_drop < -12.0
    assert abs(even_drop) < 1.5
    reg = r.truth([0.5, 1.0, 1.3]).register
    assert reg.tolist() == ["steady", "weakening", "jumped"]


def test_truth_of_a_phrase():
    events = [
        NoteEvent(349.228, 0.5, gap_s=0.1),
        NoteEvent(392.0, 1.0, jump_at_s=0.5, jump_kind="overblown"),
        NoteEvent(440.0, 1.0, jump_at_s=0.4, jump_kind="vented", gap_s=0.2),
    ]
    r = render(events, 48000)
    assert r.audio.size == round(2.8 * 48000)
    assert [k for _, k, _ in r.jumps] == ["overblown", "vented"]
    assert r.jumps[0][0] == pytest.approx(0.6 + 0.5)
    assert r.jumps[0][2] == pytest.approx(784.0)
    assert [n[0] for n in r.notes] == pytest.approx([0.0, 0.6, 1.6])
    tr = r.truth([0.01, 0.3, 0.55, 0.8, 1.3, 1.8, 2.3, 2.7])
    assert tr.voiced.tolist() == [False, True, False, True, True, True, True, False]
    assert tr.mode.tolist() == [0, 1, 0, 1, 2, 1, 2, 0]
    assert tr.jump.tolist() == ["", "", "", "", "overblown", "", "vented", ""]
    assert np.nanmax(np.abs(tr.sounding_f0_hz / tr.held_f0_hz - tr.mode)) == 0.0
    assert np.isnan(tr.sounding_f0_hz[~tr.voiced]).all()


def test_breath_noise_level():
    # breath_noise_db is the noise RMS relative to the tone RMS.
    ev = NoteEvent(440.0, 1.0, chiff=False)
    clean = render([ev], 48000, breath_noise_db=-np.inf, seed=3)
    noisy = render([ev], 48000, breath_noise_db=-20.0, seed=3)
    diff = _steady(noisy, 0.2, 0.9).astype(np.float64) - _steady(clean, 0.2, 0.9)
    assert _rms_dbfs(diff) == pytest.approx(-40.0, abs=0.5)


def test_chiff_is_confined_to_the_attack():
    on = render([NoteEvent(440.0, 0.5, chiff=True)], 48000, **QUIET)
    off = render([NoteEvent(440.0, 0.5, chiff=False)], 48000, **QUIET)
    diff = on.audio.astype(np.float64) - off.audio
    assert _rms_dbfs(diff[: int(0.02 * 48000)]) > -40.0
    assert np.all(diff[int(0.041 * 48000) :] == 0.0)


def test_hum_peaks_and_level():
    sr = 48000
    r = render([NoteEvent(440.0, 0.01, level_dbfs=-200.0, attack_s=0.005, release_s=0.005, gap_s=2.0,
                          chiff=False)], sr, hum_hz=50.0, hum_dbfs=-50.0, **QUIET)
    x = r.audio[int(0.5 * sr) :]
    assert _rms_dbfs(x) == pytest.approx(-50.0, abs=0.05)
    for k in (1, 2, 3):
        assert _peak_hz(x, sr, 50.0 * k) == pytest.approx(50.0 * k, abs=0.01)
    assert not r.truth([1.0]).voiced[0]


def test_reverb_decay_time():
    # Schroeder backward integration of the tail after a short note: -60 dB in about reverb_s.
    sr = 48000
    r = render([NoteEvent(1000.0, 0.1, chiff=False, gap_s=1.5)], sr, reverb_s=0.6, reverb_wet_db=0.0, **QUIET)
    tail = r.audio[int(0.12 * sr) :].astype(np.float64)
    edc = np.cumsum((tail * tail)[::-1])[::-1]
    edc_db = 10 * np.log10(edc / edc[0] + 1e-300)
    t = np.arange(tail.size) / sr
    fit = (edc_db < -5) & (edc_db > -35)  # T30 range
    slope_db_per_s = np.polyfit(t[fit], edc_db[fit], 1)[0]
    assert -60.0 / slope_db_per_s == pytest.approx(0.6, rel=0.15)


def test_blocks_equal_one_shot_and_seed_repeats():
    events = [NoteEvent(300.0, 0.7, vibrato_cents=10.0, gap_s=0.3),
              NoteEvent(600.0, 1.1, jump_at_s=0.5, jump_kind="vented")]
    kw = {"seed": 7, "reverb_s": 0.3, "hum_hz": 60.0, "room_noise_dbfs": -70.0}
    one = render(events, 44100, **kw).audio
    for block_size in (1, 1000, 44100):
        if block_size == 1:
            continue  # per-sample blocks are slow; 1000 and 44100 cover the re-chunking
        got = np.concatenate(list(render_blocks(events, 44100, block_size, **kw)))
        np.testing.assert_array_equal(got, one)
    np.testing.assert_array_equal(render(events, 44100, **kw).audio, one)
    other = render(events, 44100, **{**kw, "seed": 8}).audio
    assert np.max(np.abs(other - one)) > 1e-4


def test_plan_timing_is_on_the_sample_grid():
    s = plan([NoteEvent(440.0, 0.333, gap_s=0.111), NoteEvent(440.0, 0.25)], 44100)
    assert s.notes[1][0] * 44100 == pytest.approx(round(0.444 * 44100))
    assert s.n_samples == round((0.444 + 0.25) * 44100)


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"f0_hz": -1.0, "duration_s": 1.0}, "f0_hz -1.0"),
        ({"f0_hz": 440.0, "duration_s": 0.0}, "duration_s 0.0"),
        ({"f0_hz": 440.0, "duration_s": 1.0, "jump_at_s": 0.5}, "jump_at_s and jump_kind together"),
        ({"f0_hz": 440.0, "duration_s": 1.0, "jump_at_s": 0.99, "jump_kind": "vented"}, "jump_at_s 0.99"),
        ({"f0_hz": 440.0, "duration_s": 1.0, "jump_at_s": 0.5, "jump_kind": "blown"}, "jump_kind 'blown'"),
        ({"f0_hz": 440.0, "duration_s": 1.0, "mode": 0}, "mode 0"),
        ({"f0_hz": 22000.0, "duration_s": 1.0}, "raise sample_rate"),
        ({"f0_hz": 440.0, "duration_s": 1.0, "mode": 2, "jump_at_s": 0.5, "jump_kind": "vented"}, "jump_mode 2 equals mode"),
    ],
)
def test_bad_notes_are_named(kwargs, match):
    with pytest.raises(ValueError, match=match):
        render([NoteEvent(**kwargs)], 48000)


def test_bad_options():
    with pytest.raises(ValueError, match="no notes"):
        render([], 48000)
    with pytest.raises(ValueError, match="sample_rate 10"):
        render([NoteEvent(440.0, 1.0)], 10)
    with pytest.raises(ValueError, match="reverb_s -1"):
        render([NoteEvent(440.0, 1.0)], 48000, reverb_s=-1)
    with pytest.raises(TypeError, match="expected NoteEvent"):
        render([(440.0, 1.0)], 48000)  # type: ignore[list-item]


def test_committed_fixture_matches_its_sidecar():
    # test_audio/ is written by make_fixtures.py from this synth: the clean A4 file's DFT peak
    # and RMS level must be what its JSON sidecar says.
    import json
    from pathlib import Path

    import soundfile as sf

    here = Path(__file__).resolve().parents[2] / "test_audio"
    doc = json.loads((here / "steady_a4_48k_clean.json").read_text())
    x, sr = sf.read(here / "steady_a4_48k_clean.wav", dtype="float64")
    start, end = doc["notes"][0]["start_s"], doc["notes"][0]["end_s"]
    seg = x[int((start + 0.2) * sr) : int((end - 0.2) * sr)]
    f0 = doc["notes"][0]["event"]["f0_hz"]
    assert sr == doc["sample_rate"] and x.size == doc["n_samples"]
    assert _peak_hz(seg, sr, f0) == pytest.approx(f0, abs=0.01)
    assert _rms_dbfs(seg) == pytest.approx(doc["notes"][0]["event"]["level_dbfs"], abs=0.02)


def test_onset_overshoot_and_breath_wander_are_in_the_truth():
    # The truth follows the documented controls: an exponential decay of the overshoot
    # (value onset_cents * exp(-t / tau) at t = tau is onset_cents / e, the definition of a
    # time constant) and a wander bounded by its peak.
    import math

    from dsp.synth import NoteEvent, render

    ev = NoteEvent(440.0, 1.0, onset_cents=40.0, onset_decay_s=0.05, chiff=False)
    r = render([ev], 16000, breath_noise_db=-np.inf)
    f = float(r.truth([0.05]).held_f0_hz[0])
    assert 1200 * math.log2(f / 440.0) == pytest.approx(40.0 / math.e, abs=1e-6)
    assert float(r.truth([0.9]).held_f0_hz[0]) == pytest.approx(440.0 * 2 ** (40 * math.exp(-18) / 1200))
    ev = NoteEvent(440.0, 3.0, wander_cents=2.0, wander_hz=0.5, wander_phase=1.0)
    r = render([ev], 16000)
    t = np.linspace(0.1, 2.9, 500)
    cents = 1200 * np.log2(r.truth(t).held_f0_hz / 440.0)
    assert np.max(np.abs(cents)) <= 2.0 + 1e-9 and np.max(np.abs(cents)) > 1.0
    with pytest.raises(ValueError, match="onset_decay_s"):
        render([NoteEvent(440.0, 1.0, onset_decay_s=0.0)], 16000)
    with pytest.raises(ValueError, match="wander_cents"):
        render([NoteEvent(440.0, 1.0, wander_cents=-1.0)], 16000)


# --- outside-the-corpus features: breath rising into a break, vents with a level change,
# cracked attacks, handling noise, toneless breath, SNR, direct-to-reverberant ratio, tremolo.
# Every check is against the truth by construction (the documented controls) measured on the
# rendered samples with the DFT / RMS definitions above.


@pytest.mark.parametrize("jump_mode", [2, 3])
def test_breath_rising_into_an_overblow(jump_mode):
    # Level of the partial the new mode keeps (jump_mode x f0) rises by rise_db over rise_s (linear
    # in dB: half of it at the middle); the fundamental, which the new mode lacks, also fades by
    # weaken_db over the same span (half of it at the middle); then the new mode sounds.
    from dsp.synth import RegisterEvent

    f0, sr = 440.0, 48000
    ev = NoteEvent(f0, 2.0, jump_at_s=1.2, jump_kind="overblown", jump_mode=jump_mode, rise_s=0.3, rise_db=10.0,
                   jump_level_db=2.0, weaken_db=-20.0, chiff=False)
    r = render([ev], sr, **QUIET)
    rise_mid = 1.2 - 0.015 - 0.15
    early, mid = _steady(r, 0.5, 0.54), _steady(r, rise_mid - 0.02, rise_mid + 0.02)  # equal lengths
    kept_rise = _level_at(mid, sr, jump_mode * f0) - _level_at(early, sr, jump_mode * f0)
    lacking_rise = _level_at(mid, sr, f0) - _level_at(early, sr, f0)
    assert kept_rise == pytest.approx(5.0, abs=0.3)
    assert lacking_rise == pytest.approx(5.0 - 10.0, abs=0.5)
    # after the change: the whole tone is rise_db + jump_level_db louder (RMS definition)
    delta = _rms_dbfs(_steady(r, 1.3, 1.9)) - _rms_dbfs(_steady(r, 0.2, 0.8))
    assert delta == pytest.approx(12.0, abs=0.05)
    tr = r.truth([0.5, rise_mid, 1.5])
    assert tr.register.tolist() == ["steady", "weakening", "jumped"]
    assert tr.level_dbfs == pytest.approx([-20.0, -15.0, -8.0])
    assert r.events == (RegisterEvent(1.2, "overblown", 1, jump_mode, jump_mode * f0),)
    with pytest.raises(ValueError, match="give jump_at_s too"):
        render([NoteEvent(f0, 1.0, rise_s=0.1, rise_db=5.0)], sr)


@pytest.mark.parametrize("step_db", [-3.0, 2.0])
def test_vent_with_a_level_change(step_db):
    # jump_level_db sets the level step of a vented change (RMS of both modes is the set level).
    r = render([NoteEvent(440.0, 1.6, jump_at_s=0.8, jump_kind="vented", jump_level_db=step_db)], 48000, **QUIET)
    delta = _rms_dbfs(_steady(r, 0.9, 1.5)) - _rms_dbfs(_steady(r, 0.1, 0.7))
    assert delta == pytest.approx(step_db, abs=0.05)
    assert [(e.kind, e.mode_before, e.mode_after) for e in r.events] == [("vented", 1, 2)]


@pytest.mark.parametrize("crack_mode", [2, 3])
def test_cracked_attack_speaks_the_upper_mode_then_falls(crack_mode):
    # Before crack_s only multiples of crack_mode x f0 sound (Fletcher & Rossing 1998: the upper
    # mode of an open pipe); after it the fundamental is back, as the truth says.
    f0, sr = 440.0, 48000
    ev = NoteEvent(f0, 0.6, attack_s=0.02, crack_mode=crack_mode, crack_s=0.055, chiff=False)
    r = render([ev], sr, **QUIET)
    cracked, settled = _steady(r, 0.021, 0.049), _steady(r, 0.3, 0.328)  # equal lengths, 28 ms
    assert _level_at(cracked, sr, f0) < _level_at(cracked, sr, crack_mode * f0) - 40.0
    assert _level_at(settled, sr, f0) > _level_at(settled, sr, crack_mode * f0)
    tr = r.truth([0.035, 0.1])
    assert tr.sounding_f0_hz.tolist() == pytest.approx([crack_mode * f0, f0])
    assert tr.jump.tolist() == ["cracked", ""]
    assert tr.mode.tolist() == [crack_mode, 1]
    (event,) = r.events
    assert (event.time_s, event.kind, event.mode_before, event.mode_after) == (0.055, "cracked", crack_mode, 1)
    assert r.jumps == []  # overblown / vented only
    with pytest.raises(ValueError, match="crack_s 0.02"):
        render([NoteEvent(f0, 0.6, attack_s=0.02, crack_mode=2, crack_s=0.02)], sr)


def _energy_share(x: np.ndarray, sample_rate: float, lo_hz: float, hi_hz: float) -> float:
    """Share of the energy of x between lo_hz and hi_hz (Parseval on the DFT)."""
    p = np.abs(np.fft.rfft(np.asarray(x, dtype=np.float64))) ** 2
    f = np.fft.rfftfreq(x.size, 1.0 / sample_rate)
    return float(p[(f >= lo_hz) & (f < hi_hz)].sum() / p.sum())


def test_handling_noise_and_toneless_breath():
    from dsp.synth import NoiseEvent

    sr = 48000
    noises = [NoiseEvent("thump", 0.2, -30.0, 0.15), NoiseEvent("click", 0.6, -25.0, 0.003),
              NoiseEvent("breath", 1.0, -40.0, 0.8)]
    r = render(_rest_note(0.5), sr, noises=noises, seed=4, **QUIET)
    assert r.audio.size == int(1.8 * sr)  # the score grows to hold the last noise
    x = r.audio.astype(np.float64)
    thump, click, breath = x[int(0.2 * sr) : int(0.35 * sr)], x[int(0.6 * sr) : int(0.603 * sr)], x[int(1.0 * sr) :]
    for part, nz in zip((thump, click, breath), noises):
        assert _rms_dbfs(part) == pytest.approx(nz.level_dbfs, abs=0.01)  # RMS over its span
    assert _energy_share(thump, sr, 0.0, 300.0) > 0.9  # low
    assert _energy_share(click, sr, 2000.0, sr / 2) > 0.7  # broadband (white: 0.92 expected)
    # the breath band, 400 Hz - 9 kHz, 2nd-order skirts: an octave outside it each filter is 12 dB down
    assert _energy_share(breath, sr, 200.0, 18000.0) > 0.99
    assert _energy_share(breath, sr, 0.0, 200.0) < 0.01
    assert not r.truth(np.arange(0, 1.8, 0.01)).voiced.any()
    # a Score with noises streams block by block like the rest
    score = plan(_rest_note(0.5), sr, noises)
    got = np.concatenate(list(render_blocks(score, sr, 5000, seed=4, **QUIET)))
    np.testing.assert_array_equal(got, r.audio)


def _rest_note(seconds: float) -> list[NoteEvent]:
    return [NoteEvent(440.0, 0.01, level_dbfs=-200.0, attack_s=0.005, release_s=0.005, chiff=False,
                      gap_s=seconds - 0.01)]


def test_snr_against_the_tone():
    # snr_db: the added noise's RMS is snr_db under the tone's RMS (measured on the rendered parts).
    ev = NoteEvent(523.251, 2.0, level_dbfs=-18.0, chiff=False)
    clean = render([ev], 48000, seed=2, **QUIET)
    noisy = render([ev], 48000, seed=2, snr_db=12.0, **QUIET)
    noise = noisy.audio.astype(np.float64) - clean.audio
    snr = _rms_dbfs(_steady(clean, 0.2, 1.8)) - _rms_dbfs(noise)
    assert snr == pytest.approx(12.0, abs=0.1)


@pytest.mark.parametrize("hum_hz", [50.0, 60.0])
def test_mains_hum_under_a_note(hum_hz):
    # The hum adds its fundamental and harmonics to the note (difference of two renderings).
    sr = 48000
    ev = NoteEvent(440.0, 1.5, chiff=False)
    diff = (render([ev], sr, hum_hz=hum_hz, hum_dbfs=-45.0, **QUIET).audio.astype(np.float64)
            - render([ev], sr, **QUIET).audio)
    assert _rms_dbfs(diff) == pytest.approx(-45.0, abs=0.05)
    for k in (1, 2, 3):
        assert _peak_hz(diff, sr, k * hum_hz) == pytest.approx(k * hum_hz, abs=0.01)


def test_direct_to_reverberant_ratio():
    # DRR = energy of the direct sound / energy of the reverberant part (the room's part is the
    # wet rendering less the dry one); a broadband source (toneless breath) so that the random
    # tail's response averages over many frequencies.
    from dsp.synth import NoiseEvent

    sr = 48000
    noises = [NoiseEvent("breath", 0.1, -30.0, 1.5)]
    dry = render(_rest_note(3.0), sr, noises=noises, **QUIET).audio.astype(np.float64)
    wet = render(_rest_note(3.0), sr, noises=noises, reverb_s=0.6, reverb_wet_db=-5.0, **QUIET).audio
    drr = 10 * np.log10(np.sum(dry * dry) / np.sum((wet - dry) ** 2))
    assert drr == pytest.approx(5.0, abs=0.5)


def test_vibrato_with_tremolo_and_a_10_db_crescendo():
    # A 10 dB crescendo with a 20 c, 5 Hz vibrato and a 1.5 dB tremolo: the RMS over each whole
    # vibrato period equals the truth's power average there, and the instantaneous frequency of a
    # single partial (analytic signal, scipy.signal.hilbert) follows the truth.
    sr = 48000
    ev = NoteEvent(440.0, 2.2, crescendo_db=10.0, vibrato_cents=20.0, vibrato_hz=5.0, tremolo_db=1.5,
                   cents_per_db=0.5, chiff=False)
    r = render([ev], sr, max_harmonics=1, **QUIET)
    x = r.audio.astype(np.float64)
    for t0 in (0.2, 1.0, 1.8):
        seg = slice(int(t0 * sr), int((t0 + 0.2) * sr))
        t = np.arange(seg.start, seg.stop) / sr
        want = 10 * np.log10(np.mean(10 ** (r.truth(t).level_dbfs / 10)))
        assert _rms_dbfs(x[seg]) == pytest.approx(want, abs=0.05)
    rise = _rms_dbfs(x[int(1.8 * sr) : int(2.0 * sr)]) - _rms_dbfs(x[int(0.2 * sr) : int(0.4 * sr)])
    assert rise == pytest.approx(10.0 * 1.6 / 2.2, abs=0.1)
    phase = np.unwrap(np.angle(scipy.signal.hilbert(x)))
    inst_hz = np.diff(phase) * sr / (2 * np.pi)
    sl = slice(int(0.3 * sr), int(1.9 * sr))
    truth = r.truth((np.arange(inst_hz.size)[sl] + 0.5) / sr).sounding_f0_hz
    assert np.max(np.abs(1200 * np.log2(inst_hz[sl] / truth))) < 0.05
