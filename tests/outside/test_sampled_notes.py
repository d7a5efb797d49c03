"""bench's analyser on sampled recorder and flute notes: outside material it was never tuned on.

Material: General MIDI "Recorder" (program 75) and "Flute" (program 74) from the FluidR3 GM
soundfont (Debian package fluid-soundfont-gm), played by the fluidsynth command line (Debian
package fluidsynth) from a MIDI file written by benchmarks/sampled.py; reverb and chorus off.
The samples' own tuning is not the nominal note (measured here: 1-10 c sharp), so the pitch is
compared with outside trackers on the same audio, and with the nominal note only for octave
errors:

* Praat through parselmouth (Boersma 1993), ``to_pitch_ac`` and ``to_pitch_cc``;
* librosa ``pyin`` (Mauch & Dixon 2014), f0 on a 10 c grid (librosa docs: ``resolution=0.1``
  semitone).

Skips, saying why, when fluidsynth or the soundfont is missing (tests/run.sh installs both).
"""

from __future__ import annotations

import sys
import warnings
from functools import cache
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "benchmarks"))

pytest.importorskip("librosa")
pytest.importorskip("parselmouth")

from methods import Track, run_ours, run_praat, run_pyin
from sampled import (
    SampledNote,
    midi_bytes,
    render_sampled,
    sampled_unavailable,
    score_notes,
)

RANGE_HZ = (200.0, 2600.0)  # the notes sound 262-2093 Hz
# Ours within 2 c of the nearer Praat method: a sampled loop drifts a little inside a note and
# windows of different length weigh the drift differently; Praat ac and cc themselves spread up
# to 1.2 c on these notes (measured), as on pyo's flute (tests/dsp/test_reference_agreement.py).
PRAAT_TOL_CENTS = 2.0
# pyin: one step of its 10 c grid (as in tests/dsp/test_reference_agreement.py).
PYIN_TOL_CENTS = 10.0
NOTES = score_notes()


@cache
def _audio() -> tuple[np.ndarray, int]:
    why = sampled_unavailable()
    if why is not None:
        pytest.skip(f"sampled notes need fluidsynth and a GM soundfont: {why}")
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        x, sr, _ = render_sampled(Path(tmp))
    return x, sr


@cache
def _track(method: str) -> Track:
    x, sr = _audio()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if method == "ours":
            return run_ours(x, sr, *RANGE_HZ)
        if method == "librosa-pyin":
            return run_pyin(x, sr, *RANGE_HZ)
        return run_praat(method.removeprefix("praat-"), x, sr, *RANGE_HZ)


def _inner_f0(track: Track, note: SampledNote) -> np.ndarray:
    a, b = note.inner
    return track.f0_hz[(track.times_s >= a) & (track.times_s <= b)]


def _median_hz(track: Track, note: SampledNote) -> float:
    f = _inner_f0(track, note)
    f = f[np.isfinite(f)]
    assert f.size > 20, f"{track} gave {f.size} voiced frames in {note}"
    return float(np.median(f))


def _cents(a: float, b: float) -> float:
    return float(1200.0 * np.log2(a / b))


def _name(note: SampledNote) -> str:
    return f"{note.instrument}-{note.midi}"


def test_midi_file_layout():
    # Standard MIDI File 1.0 (MIDI Manufacturers Association): "MThd" length 6, format 0, one
    # track, then "MTrk" with its byte length; the program changes are GM 75 and 74 (1-based).
    data = midi_bytes(NOTES)
    assert data[:14] == b"MThd\x00\x00\x00\x06\x00\x00\x00\x01\x01\xe0"
    assert data[14:18] == b"MTrk"
    assert int.from_bytes(data[18:22], "big") == len(data) - 22
    assert b"\xc0\x4a" in data and b"\xc1\x49" in data  # 74 and 73 on the wire
    assert data.endswith(b"\xff\x2f\x00")


def test_fluidsynth_played_every_note_where_the_file_says():
    # Each note's inner part holds a tone (RMS well above the silence before the first note).
    x, sr = _audio()
    silence = x[: int(0.25 * sr)]
    assert np.sqrt(np.mean(silence.astype(np.float64) ** 2)) < 1e-4
    for note in NOTES:
        a, b = note.inner
        seg = x[int(a * sr) : int(b * sr)].astype(np.float64)
        assert 10 * np.log10(np.mean(seg * seg)) > -45.0, _name(note)


@pytest.mark.parametrize("note", NOTES, ids=_name)
def test_references_agree_with_each_other(note):
    # Before trusting them: Praat ac and pyin medians within pyin's grid step on every note.
    assert abs(_cents(_median_hz(_track("praat-ac"), note), _median_hz(_track("librosa-pyin"), note))) <= PYIN_TOL_CENTS


@pytest.mark.parametrize("note", NOTES, ids=_name)
def test_ours_agrees_with_praat(note):
    ours = _median_hz(_track("ours"), note)
    errs = [_cents(ours, _median_hz(_track(m), note)) for m in ("praat-ac", "praat-cc")]
    assert min(abs(e) for e in errs) <= PRAAT_TOL_CENTS, f"ours - praat ac, cc: {errs[0]:+.2f}, {errs[1]:+.2f} c"


@pytest.mark.parametrize("note", NOTES, ids=_name)
def test_ours_agrees_with_pyin(note):
    err = _cents(_median_hz(_track("ours"), note), _median_hz(_track("librosa-pyin"), note))
    assert abs(err) <= PYIN_TOL_CENTS, f"ours - pyin {err:+.2f} c"


# Measured with the end-of-note rule (dsp/voicing.py): the sampled flute's E4 dips 8.5 dB in
# ~60 ms at the end of its inner part (about 130 dB/s, as steep as a free decay in a room of
# T60 0.46 s, which the rule must end), and 14 of its 110 inner frames (70 ms) go unvoiced
# until the level climbs back. A limit of the rule on real material, left open in the
# register/voicing issue; strict, so a fix shows here as XPASS.
MID_NOTE_GAP_KNOWN = {("flute", 64)}


@pytest.mark.parametrize(
    "note",
    [pytest.param(n, marks=pytest.mark.xfail(strict=True, reason="end-of-note rule unvoices 70 ms of an 8.5 dB "
                                             "dip as steep as a room's free decay; measured"))
     if (n.instrument, n.midi) in MID_NOTE_GAP_KNOWN else n for n in NOTES],
    ids=_name,
)
def test_no_octave_errors_against_the_nominal_note(note):
    # Every voiced frame of ours inside the note is within half an octave of the nominal note
    # (a sample may be tuned a few cents off, never by a tritone), and most frames are voiced.
    f = _inner_f0(_track("ours"), note)
    voiced = f[np.isfinite(f)]
    assert voiced.size >= 0.9 * f.size
    off = np.abs(1200.0 * np.log2(voiced / note.nominal_hz))
    assert np.max(off) < 600.0, f"{np.sum(off >= 600.0)} frames an octave (or more) away"
