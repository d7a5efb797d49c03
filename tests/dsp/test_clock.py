"""The clock estimators (dsp.clock) against outside references.

Outside references used here:
* the definition of the clock error, ``ppm = (true rate / nominal rate - 1) * 1e6``, and the
  sample-rate arithmetic it implies: a tone of true frequency f recorded on a card running
  ``ppm`` fast is stored at ``f / (1 + ppm/1e6)`` of the nominal rate (the issue's definition;
  sampling arithmetic is *common practice*);
* Praat's autocorrelation pitch (praat-parselmouth, Boersma 1993), precise to ~0.1 ppm on a
  clean sine (measured: a 440 Hz sine reads 440 - 4.3e-5 Hz), as an independent reading of
  the same file. librosa.pyin is not used: its pitch grid is 0.1 semitone (10 cents, librosa
  docs), 60 times the 100 ppm (0.17 cents) to be found;
* scipy.stats.linregress for the straight-line fit and its standard error;
* the Cramer-Rao bound of Rife & Boorstyn (1974), /work/shared/REFERENCES.md section 6.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import soundfile as sf
from scipy import stats

from dsp.clock import clock_ppm, clock_ppm_from_tone, fit_frame_rate, measure_tone

SR = 48000


def _tone(freq_hz: float, seconds: float, *, snr_db: float = 40.0, reed: bool = False, seed: int = 0) -> np.ndarray:
    t = np.arange(int(seconds * SR)) / SR
    x = 0.4 * np.sin(2 * np.pi * freq_hz * t + 0.7)
    if reed:  # a few harmonics, as a reed-like reference tone has
        x += 0.12 * np.sin(4 * np.pi * freq_hz * t + 0.2) + 0.06 * np.sin(6 * np.pi * freq_hz * t + 1.1)
    noise_rms = 0.4 / math.sqrt(2) / 10 ** (snr_db / 20)
    x += np.random.default_rng(seed).normal(0.0, noise_rms, len(t))
    return x


def test_file_of_a_card_100_ppm_fast_reads_plus_100_ppm(tmp_path):
    # The done-when: 440 Hz played, card +100 ppm fast -> stored at 440/(1+1e-4) Hz.
    path = tmp_path / "fast-card.wav"
    sf.write(path, _tone(440.0 / (1 + 1e-4), 12.0, snr_db=70.0).astype(np.float32), SR, subtype="FLOAT")
    x, rate = sf.read(path, dtype="float32")
    tone = measure_tone(x, rate, 440.0)
    ppm, se = clock_ppm_from_tone(440.0, tone)
    assert ppm == pytest.approx(100.0, abs=2.0)
    assert 0 < se < 2.0
    # Praat reads the same file independently (autocorrelation pitch, 10 ms steps; its
    # per-frame noise needs a clean file: at 40 dB SNR its mean sat 2.8 ppm off, measured)
    import parselmouth

    pitch = parselmouth.Sound(x.astype(np.float64), sampling_frequency=rate).to_pitch_ac(
        time_step=0.01, pitch_floor=200, pitch_ceiling=800, very_accurate=True
    )
    f0 = pitch.selected_array["frequency"]
    praat_ppm = clock_ppm(440.0 / float(np.mean(f0[f0 > 0])))
    assert praat_ppm == pytest.approx(ppm, abs=1.0)


@pytest.mark.parametrize("ppm_true", [-250.0, -20.0, 0.0, 37.0, 100.0])
@pytest.mark.parametrize("reed", [False, True])
def test_clock_error_recovered_from_the_stored_frequency(ppm_true, reed):
    ref_hz = 523.25
    x = _tone(ref_hz / (1 + ppm_true * 1e-6), 8.0, snr_db=25.0, reed=reed, seed=int(ppm_true) + 1000)
    ppm, se = clock_ppm_from_tone(ref_hz, measure_tone(x, SR, ref_hz))
    assert ppm == pytest.approx(ppm_true, abs=max(2.0, 5 * se))
    assert abs(ppm - ppm_true) <= 5 * se + 0.05  # the error lies within a few standard errors


def test_standard_error_matches_the_scatter_and_respects_the_bound():
    # 60 noisy 3-s tones: the errors' spread agrees with the reported standard error, and the
    # reported error is never below the Cramer-Rao bound (Rife & Boorstyn 1974).
    f_hz = 440.0
    errors, ses, crbs = [], [], []
    for seed in range(60):
        tone = measure_tone(_tone(f_hz, 3.0, snr_db=0.0, seed=seed), SR, f_hz)
        errors.append(tone.freq_hz - f_hz)
        ses.append(tone.freq_se_hz)
        crbs.append(tone.crb_hz)
        assert tone.freq_se_hz >= tone.crb_hz
    spread = float(np.std(errors))
    assert 0.6 < spread / float(np.median(ses)) < 1.6
    # Worked value of the bound: N = 144000, SNR = A^2/(2 sigma^2) = 1 (0 dB)
    n = 3 * SR
    crb_hz = math.sqrt(12 / (1.0 * n * (n * n - 1))) * SR / (2 * math.pi)
    assert float(np.median(crbs)) == pytest.approx(crb_hz, rel=0.15)
    # a windowed estimator does not beat the bound; ~1.2-1.4x it (Hann segments)
    assert 1.0 <= spread / crb_hz < 1.8


def test_a_tone_far_from_the_stated_frequency_is_refused():
    x = _tone(450.0, 4.0)  # 2.3 % (39 cents) above 440
    with pytest.raises(ValueError, match=r"450\.\d\d Hz, \+39 cents from the stated 440 Hz"):
        measure_tone(x, SR, 440.0)


def test_a_tone_within_one_percent_is_taken():
    tone = measure_tone(_tone(443.0, 4.0), SR, 440.0)  # +0.7 %: a generator set a little off
    assert tone.freq_hz == pytest.approx(443.0, abs=1e-4)


def test_a_tone_that_stops_is_refused():
    x = _tone(440.0, 6.0)
    x[3 * SR : 4 * SR] = np.random.default_rng(5).normal(0, 1e-4, SR)
    with pytest.raises(ValueError, match="not steady: its level changes"):
        measure_tone(x, SR, 440.0)


def test_a_gliding_tone_is_refused():
    # a slow glide of 200 ppm (0.35 cents) over the recording: no use for a calibration
    t = np.arange(8 * SR) / SR
    f = 440.0 * (1 + 200e-6 * t / 8)
    x = 0.4 * np.sin(2 * np.pi * np.cumsum(f) / SR)
    with pytest.raises(ValueError, match="not steady"):
        measure_tone(x, SR, 440.0)


def test_a_played_note_with_vibrato_is_refused():
    t = np.arange(6 * SR) / SR
    f = 440.0 * 2 ** (15 * np.sin(2 * np.pi * 0.3 * t) / 1200)  # slow 15-cent wander
    x = 0.4 * np.sin(2 * np.pi * np.cumsum(f) / SR)
    with pytest.raises(ValueError, match="not steady"):
        measure_tone(x, SR, 440.0)


@pytest.mark.parametrize(
    ("x", "message"),
    [
        (np.zeros(5 * SR), "silent"),
        (np.ones(SR), "record at least 2 s"),
        (np.full(5 * SR, np.nan), "NaN"),
    ],
)
def test_unusable_recordings_are_refused(x, message):
    with pytest.raises(ValueError, match=message):
        measure_tone(x, SR, 440.0)


def test_frame_rate_fit_agrees_with_scipy_linregress():
    rng = np.random.default_rng(3)
    t = np.cumsum(rng.uniform(0.009, 0.012, 6000))  # callbacks about every 10.7 ms for ~64 s
    true_rate = 48000 * (1 + 2083e-6)
    frames = np.round(true_rate * (t - rng.uniform(0, 3e-4, len(t))))  # wake-up delays
    fit = fit_frame_rate(t, frames, reject_late=False)
    ref = stats.linregress(t, frames)
    assert fit.rate_hz == pytest.approx(ref.slope, rel=1e-12)
    assert fit.fit_se_hz == pytest.approx(ref.stderr, rel=1e-4)  # rounding differs at 1e-5
    assert abs(fit.rate_hz - true_rate) < 5 * fit.rate_se_hz
    ppm = clock_ppm(fit.rate_hz / 48000)
    assert ppm == pytest.approx(2083.0, abs=max(1.0, 5e6 * fit.rate_se_hz / 48000))


def test_frame_rate_fit_leaves_out_late_callbacks():
    rng = np.random.default_rng(4)
    t = np.arange(5000) * 512 / 48100.0
    frames = np.arange(5000) * 512.0
    late = rng.choice(5000, 40, replace=False)
    t_seen = t + rng.normal(0, 2e-5, len(t))
    t_seen[late] += rng.uniform(0.003, 0.008, 40)  # the machine was busy: callbacks run late
    plain = fit_frame_rate(t_seen, frames, reject_late=False)
    robust = fit_frame_rate(t_seen, frames)
    assert robust.points == 5000 - 40
    assert abs(robust.rate_hz - 48100.0) < abs(plain.rate_hz - 48100.0)
    assert robust.rate_hz == pytest.approx(48100.0, abs=5 * robust.rate_se_hz)


def test_frame_rate_fit_refuses_too_few_or_unordered_points():
    with pytest.raises(ValueError, match="too few"):
        fit_frame_rate(np.arange(5.0), np.arange(5.0))
    with pytest.raises(ValueError, match="must increase"):
        fit_frame_rate(np.arange(20.0)[::-1], np.arange(20.0))


def test_ppm_definition():
    # a card delivering 48004.8 frames per true second at a nominal 48000: +100 ppm
    assert clock_ppm(48004.8 / 48000) == pytest.approx(100.0, abs=1e-9)
    with pytest.raises(ValueError):
        clock_ppm(0.0)


@pytest.mark.parametrize("wander", [False, True])
def test_frame_rate_standard_error_matches_the_scatter_of_repeated_runs(wander):
    # 60 simulated runs: the spread of the rates found agrees with the reported standard error,
    # with independent timing scatter (white jitter) and with a rate that wanders (the timing
    # error a random walk, as a drifting timer or crystal gives); in the second case the
    # least-squares error alone is far too small. Reference: the runs' own scatter (numpy).
    rate_hz = 48000.0
    found, reported, fit_only = [], [], []
    for seed in range(60):
        rng = np.random.default_rng(seed)
        n = 4000
        t_true = np.arange(n) * 512 / rate_hz
        err_s = rng.normal(0, 5e-5, n)
        if wander:
            err_s += np.cumsum(rng.normal(0, 2e-6, n))
        fit = fit_frame_rate(t_true + err_s, np.arange(n) * 512.0, reject_late=False)
        found.append(fit.rate_hz)
        reported.append(fit.rate_se_hz)
        fit_only.append(fit.fit_se_hz)
    spread = float(np.std(found))
    assert 0.6 < spread / float(np.median(reported)) < 1.6
    if wander:
        assert spread / float(np.median(fit_only)) > 2.0  # what the parts' scatter adds is needed


def test_a_reference_whose_second_harmonic_is_the_strongest_is_taken():
    # a pipe-like reference tone: H2 6 dB above H1; the fundamental is still the one stated
    t = np.arange(6 * SR) / SR
    f_hz = 392.0 / (1 + 40e-6)
    x = 0.2 * np.sin(2 * np.pi * f_hz * t) + 0.4 * np.sin(4 * np.pi * f_hz * t) + 0.1 * np.sin(6 * np.pi * f_hz * t)
    ppm, se = clock_ppm_from_tone(392.0, measure_tone(x, SR, 392.0))
    assert ppm == pytest.approx(40.0, abs=max(2.0, 5 * se))
