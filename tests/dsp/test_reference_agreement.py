"""Our analyser's pitch against outside pitch trackers on the same audio.

References (PyPI): aubio 0.4.9 ``yin`` and ``yinfft`` (de Cheveigné & Kawahara, JASA 111(4),
2002), librosa ``pyin`` (Mauch & Dixon, ICASSP 2014) and Praat's ``to_pitch_ac`` /
``to_pitch_cc`` through parselmouth (Boersma, Proc. Inst. Phonetic Sciences 17, 1993). Each
reference gets a tolerance from its own resolution, and a first test checks that each one
reads the fixture's exact truth within that tolerance, so the tolerances are measured, not
assumed:

* Praat ac/cc: sinc-interpolated autocorrelation / cross-correlation; measured within 0.1 c
  on the steady fixtures -> 0.5 c (1.0 c where vibrato in a room shifts what each window
  averages).
* aubio yin: parabolic interpolation of the difference function on the lag grid; measured
  within 0.35 c even at 2 kHz (46-sample lag at 96 kHz) -> 0.5 c.
* aubio yinfft: measured +1.7 c at 440 Hz, 48 kHz, 2048-sample buffer -> 2.5 c, only for
  notes >= 200 Hz (it reads F2 87 Hz about +28 c sharp here, so it is no reference there).
* librosa pyin: its f0 is on a grid of 0.1 semitone (librosa docs: ``resolution=0.1``), so a
  steady note can read up to half a step plus a little off -> 10 c, one grid step.

Real recording: ``examples/snds/flute.aif`` shipped inside the PyPI package **pyo**
(LGPL-3.0; 5.5 s, 44.1 kHz, a flute playing eight notes, B4 D5 A4 B4 G4 E4 G4 D4).
There is no exact truth for it, so ours is compared with the references only. The test
skips when pyo is not installed (``pip install pyo``); the file is read straight from the
installed package, pyo itself is not imported.
"""

from __future__ import annotations

import importlib.util
import json
import sys
import warnings
from functools import lru_cache
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

ROOT = Path(__file__).resolve().parents[2]
AUDIO = ROOT / "test_audio"
sys.path.insert(0, str(ROOT / "benchmarks"))

pytest.importorskip("aubio")
pytest.importorskip("librosa")
pytest.importorskip("parselmouth")

from methods import Track, run_aubio, run_ours, run_praat, run_pyin  # noqa: E402

TOL_CENTS = {"praat-ac": 0.5, "praat-cc": 0.5, "aubio-yin": 0.5, "aubio-yinfft": 2.5, "librosa-pyin": 10.0}
YINFFT_MIN_HZ = 200.0

# fixture, channel, extra tolerance (c) for every method (room + vibrato)
STEADY = [
    ("steady_a4_48k", 0.0),
    ("steady_a4_48k_clean", 0.0),
    ("low_f2_44k1", 0.0),
    ("high_c7_96k", 0.0),
    ("weak_fundamental_c5_48k", 0.0),
    ("stereo_a4_48k", 0.0),
    ("reverb_d5_48k", 0.5),
]
REFERENCES = ["praat-ac", "praat-cc", "aubio-yin", "aubio-yinfft", "librosa-pyin"]


def _cents(a: float, b: float) -> float:
    return float(1200.0 * np.log2(a / b))


@lru_cache(maxsize=None)
def _load(name: str) -> tuple[np.ndarray, int, dict]:
    x, sr = sf.read(AUDIO / f"{name}.wav", dtype="float32", always_2d=True)
    return np.ascontiguousarray(x[:, 0]), int(sr), json.loads((AUDIO / f"{name}.json").read_text())


def _run(method: str, x: np.ndarray, sr: int, fmin: float, fmax: float) -> Track:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if method == "ours":
            return run_ours(x, sr, fmin, fmax)
        if method.startswith("aubio-"):
            buf = 2048 if sr <= 48000 else 4096  # keep ~43 ms at 96 kHz
            return run_aubio(method.split("-")[1], x, sr, fmin, fmax, buf_size=buf)
        if method == "librosa-pyin":
            return run_pyin(x, sr, fmin, fmax)
        return run_praat(method.split("-")[1], x, sr, fmin, fmax)


@lru_cache(maxsize=None)
def _fixture_track(name: str, method: str) -> Track:
    x, sr, doc = _load(name)
    f0 = doc["notes"][0]["event"]["f0_hz"]
    return _run(method, x, sr, f0 / 1.6, f0 * 1.6)


def _median_hz(track: Track, t0: float, t1: float) -> float:
    sel = (track.times_s >= t0) & (track.times_s <= t1) & np.isfinite(track.f0_hz)
    assert sel.sum() >= 10, f"only {sel.sum()} voiced frames in {t0:.2f}-{t1:.2f} s"
    return float(np.median(track.f0_hz[sel]))


def _settled_span(doc: dict) -> tuple[float, float, float]:
    """(t0, t1, truth median Hz) of the first note's settled frames, from the sidecar."""
    tr = doc["truth"]
    t = np.array(tr["times_s"])
    ok = np.array(tr["settled"]) & (t < doc["notes"][0]["end_s"])
    f = np.array([np.nan if v is None else v for v in tr["sounding_f0_hz"]])
    return float(t[ok][0]), float(t[ok][-1]), float(np.median(f[ok]))


def _applies(method: str, f0_hz: float) -> bool:
    return method != "aubio-yinfft" or f0_hz >= YINFFT_MIN_HZ


@pytest.mark.parametrize("method", REFERENCES)
@pytest.mark.parametrize("name, extra", STEADY)
def test_reference_reads_the_truth_within_its_tolerance(name, extra, method):
    # Validates the tolerance table above against the synth's exact truth.
    _, _, doc = _load(name)
    t0, t1, truth_hz = _settled_span(doc)
    if not _applies(method, truth_hz):
        pytest.skip(f"{method} is no reference below {YINFFT_MIN_HZ} Hz")
    got = _median_hz(_fixture_track(name, method), t0, t1)
    assert abs(_cents(got, truth_hz)) <= TOL_CENTS[method] + extra


@pytest.mark.parametrize("method", REFERENCES)
@pytest.mark.parametrize("name, extra", STEADY)
def test_our_median_agrees_with_reference(name, extra, method):
    _, _, doc = _load(name)
    t0, t1, truth_hz = _settled_span(doc)
    if not _applies(method, truth_hz):
        pytest.skip(f"{method} is no reference below {YINFFT_MIN_HZ} Hz")
    ours = _median_hz(_fixture_track(name, "ours"), t0, t1)
    ref = _median_hz(_fixture_track(name, method), t0, t1)
    assert abs(_cents(ours, ref)) <= TOL_CENTS[method] + extra, f"ours {ours:.4f} Hz, {method} {ref:.4f} Hz"


def _phrase_segments(doc: dict) -> list[tuple[float, float]]:
    """Runs of settled frames with one sounding pitch (each note, before and after a change)."""
    tr = doc["truth"]
    t = np.array(tr["times_s"])
    ok = np.array(tr["settled"])
    mode = np.array(tr["mode"])
    spans, start = [], None
    for i in range(t.size + 1):
        run_on = i < t.size and ok[i] and (start is None or mode[i] == mode[start]) and (
            start is None or t[i] - t[i - 1] < 0.015)
        if run_on and start is None:
            start = i
        elif not run_on and start is not None:
            if t[i - 1] - t[start] >= 0.15:
                spans.append((float(t[start]), float(t[i - 1])))
            start = i if i < t.size and ok[i] else None
    return spans


@pytest.mark.parametrize("method", ["praat-ac", "aubio-yin"])
def test_phrase_notes_agree_with_reference(method):
    # Each settled stretch of the Wren-alto phrase, both registers: ours vs the reference.
    x, sr, doc = _load("phrase_wren_48k_24bit")
    ours = _fixture_track("phrase_wren_48k_24bit", "ours")
    ref = _run(method, x, sr, 250.0, 1200.0)
    spans = _phrase_segments(doc)
    assert len(spans) >= 5  # the five notes; G and C are scored in the register they jump to
    for t0, t1 in spans:
        a, b = _median_hz(ours, t0, t1), _median_hz(ref, t0, t1)
        # 1 c: vibrato and a crescendo-driven pitch drift in some notes; windows differ
        assert abs(_cents(a, b)) <= 1.0, f"{t0:.2f}-{t1:.2f} s: ours {a:.3f} Hz, {method} {b:.3f} Hz"


# --- a real flute recording shipped inside the pyo package -------------------------------

# Inner parts of the eight notes (segmentation by inspection of Praat's track, 10 ms steps).
FLUTE_NOTES = [
    (0.15, 0.80), (1.00, 1.60), (1.85, 2.60), (2.80, 3.40),
    (3.55, 3.85), (3.97, 4.25), (4.35, 4.60), (4.72, 5.35),
]
# Real tone with pitch drift inside each note: windows of different length weigh the drift
# differently; Praat ac, cc and aubio yin spread up to 0.7 c among themselves here -> 2 c.
FLUTE_TOL_CENTS = {"praat-ac": 2.0, "praat-cc": 2.0, "aubio-yin": 2.0, "librosa-pyin": 10.0}


@lru_cache(maxsize=None)
def _flute() -> tuple[np.ndarray, int]:
    spec = importlib.util.find_spec("pyo")
    if spec is None or not spec.submodule_search_locations:
        pytest.skip("pyo is not installed (pip install pyo); it ships the flute recording")
    path = Path(list(spec.submodule_search_locations)[0]) / "examples" / "snds" / "flute.aif"
    if not path.is_file():
        pytest.skip(f"pyo has no {path}")
    x, sr = sf.read(path, dtype="float32", always_2d=True)
    return np.ascontiguousarray(x[:, 0]), int(sr)


@lru_cache(maxsize=None)
def _flute_track(method: str) -> Track:
    x, sr = _flute()
    return _run(method, x, sr, 200.0, 1000.0)


def test_flute_references_agree_with_each_other():
    # Before trusting them on a real tone: Praat ac and cc medians within 1 c on every note.
    for t0, t1 in FLUTE_NOTES:
        a = _median_hz(_flute_track("praat-ac"), t0, t1)
        b = _median_hz(_flute_track("praat-cc"), t0, t1)
        assert abs(_cents(a, b)) <= 1.0


@pytest.mark.parametrize("method", list(FLUTE_TOL_CENTS))
@pytest.mark.parametrize("note", range(len(FLUTE_NOTES)))
def test_flute_recording_agrees_with_reference(note, method):
    # Note 1 (D5: H1 5 dB under H2, H3 at -17 dB) was read an octave high by the first
    # analyser version (1181.8 Hz against 591.1 Hz from every reference).
    t0, t1 = FLUTE_NOTES[note]
    ours = _median_hz(_flute_track("ours"), t0, t1)
    ref = _median_hz(_flute_track(method), t0, t1)
    assert abs(_cents(ours, ref)) <= FLUTE_TOL_CENTS[method], f"ours {ours:.2f} Hz, {method} {ref:.2f} Hz"
