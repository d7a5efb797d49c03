"""Outside material: sampled recorder and flute notes, and a real flute recording.

* Sampled notes: a small MIDI file written here (format 0, one track; General MIDI program
  75 Recorder and 74 Flute, 1-based, i.e. 74 and 73 on the wire) rendered by the fluidsynth
  command line with the FluidR3 General MIDI soundfont (Debian packages ``fluidsynth`` and
  ``fluid-soundfont-gm``; the soundfont is under ``/usr/share/sounds/sf2/``). Reverb and
  chorus are switched off, so each note is the recorded sample itself (looped and enveloped
  by the soundfont). The samples' own tuning is not the nominal note: they are compared with
  outside pitch trackers (Praat, librosa pyin), and with the nominal note only for octave
  errors.
* The flute recording that the PyPI package pyo ships (``examples/snds/flute.aif``, 5.5 s,
  44.1 kHz, eight notes), read straight from the installed package.

Neither has an exact truth. :func:`consensus_frames` keeps the frames on which two outside
references agree with each other, and scores ours against them there.
"""

from __future__ import annotations

import importlib.util
import shutil
import struct
import subprocess
from dataclasses import dataclass
from pathlib import Path

import numpy as np

SF2_CANDIDATES = (Path("/usr/share/sounds/sf2/FluidR3_GM.sf2"), Path("/usr/share/sounds/sf2/default-GM.sf2"))
RECORDER_PROGRAM = 74  # GM "Recorder" is program 75 counted from 1
FLUTE_PROGRAM = 73  # GM "Flute" is program 74 counted from 1
TICKS_PER_QUARTER = 480
TEMPO_US_PER_QUARTER = 500_000  # the MIDI default, 120 bpm: one tick = 1/960 s
NOTE_S = 0.9
GAP_S = 0.6  # the soundfont's release fades in this gap
# MIDI notes: the recorder from C5 (523 Hz) to C7 (2093 Hz), the flute from C4 (262 Hz) up
RECORDER_NOTES = (72, 74, 77, 79, 81, 84, 86, 89, 91, 93, 96)
FLUTE_NOTES = (60, 64, 67, 71, 74, 76, 79, 83, 86, 88, 91, 96)
INNER_S = (0.25, 0.1)  # a note's inner part: from 0.25 s after note-on to 0.1 s before note-off


@dataclass(frozen=True)
class SampledNote:
    """One note of the sampled rendering."""

    instrument: str  # "recorder" or "flute"
    midi: int
    start_s: float
    end_s: float  # note-off

    @property
    def nominal_hz(self) -> float:
        """12-TET frequency of the MIDI note at A4 = 440 Hz."""
        return float(440.0 * 2.0 ** ((self.midi - 69) / 12.0))

    @property
    def inner(self) -> tuple[float, float]:
        """Inner part (attack and note-off left out), seconds."""
        return self.start_s + INNER_S[0], self.end_s - INNER_S[1]


def soundfont() -> Path | None:
    """The General MIDI soundfont, or None."""
    return next((p for p in SF2_CANDIDATES if p.is_file()), None)


def sampled_unavailable() -> str | None:
    """Why the sampled notes cannot be rendered here, or None when they can."""
    if shutil.which("fluidsynth") is None:
        return "fluidsynth is not installed (Debian package fluidsynth)"
    if soundfont() is None:
        return "no General MIDI soundfont under /usr/share/sounds/sf2 (Debian package fluid-soundfont-gm)"
    return None


def _vlq(n: int) -> bytes:
    """MIDI variable-length quantity."""
    out = [n & 0x7F]
    n >>= 7
    while n:
        out.append(0x80 | (n & 0x7F))
        n >>= 7
    return bytes(reversed(out))


def score_notes() -> list[SampledNote]:
    """The notes, recorder first, each NOTE_S long with GAP_S after it."""
    notes, t = [], 0.3
    for instrument, midis in (("recorder", RECORDER_NOTES), ("flute", FLUTE_NOTES)):
        for m in midis:
            notes.append(SampledNote(instrument, m, t, t + NOTE_S))
            t += NOTE_S + GAP_S
    return notes


def midi_bytes(notes: list[SampledNote]) -> bytes:
    """A format-0 Standard MIDI File playing ``notes`` (recorder on channel 0, flute on 1)."""
    tick_s = TEMPO_US_PER_QUARTER / 1e6 / TICKS_PER_QUARTER
    events: list[tuple[int, bytes]] = [
        (0, b"\xff\x51\x03" + TEMPO_US_PER_QUARTER.to_bytes(3, "big")),
        (0, bytes([0xC0, RECORDER_PROGRAM])),
        (0, bytes([0xC1, FLUTE_PROGRAM])),
    ]
    for n in notes:
        ch = 0 if n.instrument == "recorder" else 1
        events.append((round(n.start_s / tick_s), bytes([0x90 | ch, n.midi, 90])))
        events.append((round(n.end_s / tick_s), bytes([0x80 | ch, n.midi, 0])))
    events.sort(key=lambda e: e[0])
    track, last = b"", 0
    for tick, data in events:
        track += _vlq(tick - last) + data
        last = tick
    track += _vlq(round(GAP_S / tick_s)) + b"\xff\x2f\x00"  # end of track after the last release
    header = b"MThd" + struct.pack(">IHHH", 6, 0, 1, TICKS_PER_QUARTER)
    return header + b"MTrk" + struct.pack(">I", len(track)) + track


def render_sampled(workdir: Path, sample_rate: int = 48000) -> tuple[np.ndarray, int, list[SampledNote]]:
    """Render the notes with fluidsynth into ``workdir``; mono float32 audio, rate, notes.

    Raises
    ------
    RuntimeError
        When fluidsynth or the soundfont is missing, or fluidsynth fails.
    """
    import soundfile as sf

    why = sampled_unavailable()
    if why is not None:
        raise RuntimeError(why)
    notes = score_notes()
    mid = workdir / "sampled.mid"
    wav = workdir / "sampled.wav"
    mid.write_bytes(midi_bytes(notes))
    cmd = ["fluidsynth", "-ni", "-q", "-R", "0", "-C", "0", "-g", "0.5", "-F", str(wav), "-r", str(sample_rate),
           str(soundfont()), str(mid)]
    res = subprocess.run(cmd, capture_output=True, text=True, timeout=300, check=False)
    if res.returncode != 0 or not wav.is_file():
        raise RuntimeError(f"fluidsynth failed ({res.returncode}): {res.stderr.strip()[-500:]}")
    x, sr = sf.read(wav, dtype="float32", always_2d=True)
    return np.ascontiguousarray(x.mean(axis=1)), int(sr), notes


def pyo_flute() -> tuple[np.ndarray, int] | None:
    """pyo's flute recording (mono float32, rate), or None when pyo is not installed."""
    import soundfile as sf

    spec = importlib.util.find_spec("pyo")
    if spec is None or not spec.submodule_search_locations:
        return None
    path = Path(next(iter(spec.submodule_search_locations))) / "examples" / "snds" / "flute.aif"
    if not path.is_file():
        return None
    x, sr = sf.read(path, dtype="float32", always_2d=True)
    return np.ascontiguousarray(x[:, 0]), int(sr)


def at_times(times_s: np.ndarray, ref_times_s: np.ndarray, ref_f0: np.ndarray, tol_s: float = 0.006) -> np.ndarray:
    """``ref_f0`` at the nearest of ``ref_times_s`` to each of ``times_s`` (nan beyond ``tol_s``)."""
    if ref_times_s.size == 0:
        return np.full(times_s.shape, np.nan)
    i = np.clip(np.searchsorted(ref_times_s, times_s), 1, max(ref_times_s.size - 1, 1))
    i0 = np.clip(i - 1, 0, ref_times_s.size - 1)
    i = np.clip(i, 0, ref_times_s.size - 1)
    pick = np.where(np.abs(ref_times_s[i0] - times_s) <= np.abs(ref_times_s[i] - times_s), i0, i)
    out = ref_f0[pick].astype(np.float64)
    out[np.abs(ref_times_s[pick] - times_s) > tol_s] = np.nan
    return out


def consensus_frames(times_s: np.ndarray, ref_a: tuple[np.ndarray, np.ndarray], ref_b: tuple[np.ndarray, np.ndarray],
                     agree_cents: float = 20.0) -> np.ndarray:
    """Reference f0 (the first one's) at ``times_s`` where both references are voiced and agree.

    ``agree_cents`` 20: librosa pyin's f0 grid is 10 c (its ``resolution=0.1`` semitone), so
    two references on one steady tone differ by up to ~10 c; 20 c leaves a margin for vibrato
    that each window averages differently. nan elsewhere.
    """
    a = at_times(times_s, *ref_a)
    b = at_times(times_s, *ref_b)
    with np.errstate(invalid="ignore", divide="ignore"):
        ok = np.isfinite(a) & np.isfinite(b) & (np.abs(1200.0 * np.log2(a / b)) <= agree_cents)
    return np.where(ok, a, np.nan)
