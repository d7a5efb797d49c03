"""Write the WAV fixtures in test_audio/ and their ground-truth JSON sidecars.

Run from the repository root::

    python test_audio/make_fixtures.py

Seeded and deterministic: running it again rewrites byte-identical files. Every good fixture
``NAME.wav`` gets ``NAME.json`` with its format, the notes it plays, the register changes and
the exact state every 10 ms (from ``dsp.synth.Score.truth``). ``bad/`` holds damaged files for
error-handling tests; ``bad/README.md`` says what each one is.
"""

from __future__ import annotations

import json
import math
import struct
import sys
from dataclasses import asdict
from pathlib import Path

import numpy as np
import soundfile as sf

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from dsp.synth import NoteEvent, Rendering, render  # noqa: E402

TRUTH_HOP_S = 0.01
SEED = 20260


def _f(x: float) -> float | None:
    return None if not math.isfinite(x) else round(float(x), 6)


def _json_safe(v: object) -> object:
    """Strict JSON has no inf/nan: write them as the strings "inf", "-inf", "nan"."""
    if isinstance(v, float) and not math.isfinite(v):
        return str(v)
    return v


def _sidecar(name: str, r: Rendering | None, *, sample_rate: int, channels: int, subtype: str,
             description: str, options: dict, n_samples: int, extra: dict | None = None) -> dict:
    doc: dict = {
        "file": f"{name}.wav",
        "description": description,
        "sample_rate": sample_rate,
        "channels": channels,
        "subtype": subtype,
        "n_samples": n_samples,
        "duration_s": n_samples / sample_rate,
        "render_options": {k: _json_safe(v) for k, v in options.items()},
        "truth_hop_s": TRUTH_HOP_S,
        "notes": [],
        "jumps": [],
        "truth": None,
    }
    if r is not None:
        doc["notes"] = [
            {"start_s": _f(s), "end_s": _f(e), "event": {k: v for k, v in asdict(ev).items()}}
            for s, e, ev in r.notes
        ]
        doc["jumps"] = [{"time_s": _f(t), "kind": k, "sounding_f0_after_hz": _f(f)} for t, k, f in r.jumps]
        times = np.arange(0.0, n_samples / sample_rate, TRUTH_HOP_S)
        tr = r.truth(times)
        doc["truth"] = {
            "times_s": [_f(t) for t in times],
            "sounding_f0_hz": [_f(x) for x in tr.sounding_f0_hz],
            "held_f0_hz": [_f(x) for x in tr.held_f0_hz],
            "mode": tr.mode.tolist(),
            "register": tr.register.tolist(),
            "jump": tr.jump.tolist(),
            "settled": tr.settled.tolist(),
        }
    if extra:
        doc.update(extra)
    return doc


def _write_wav(path: Path, data: np.ndarray, sample_rate: int, subtype: str) -> None:
    """soundfile.write, then zero the PEAK chunk's time stamp so reruns are byte-identical."""
    sf.write(path, data, sample_rate, subtype=subtype, format="WAV")
    raw = bytearray(path.read_bytes())
    at = raw.find(b"PEAK")  # libsndfile adds it to float files: id, size, version, timestamp
    if at >= 0:
        raw[at + 12 : at + 16] = b"\0\0\0\0"
        path.write_bytes(bytes(raw))


def _write(name: str, data: np.ndarray, sample_rate: int, subtype: str, doc: dict) -> None:
    path = HERE / f"{name}.wav"
    _write_wav(path, data, sample_rate, subtype)
    (HERE / f"{name}.json").write_text(json.dumps(doc, indent=1, allow_nan=False) + "\n")
    print(f"wrote {path.relative_to(HERE.parent)} ({path.stat().st_size} bytes)")


def _tone(name: str, events: list[NoteEvent], sample_rate: int, subtype: str, description: str,
          **options) -> Rendering:
    r = render(events, sample_rate, seed=SEED, **options)
    doc = _sidecar(name, r, sample_rate=sample_rate, channels=1, subtype=subtype, description=description,
                   options=options, n_samples=r.audio.size)
    _write(name, r.audio, sample_rate, subtype, doc)
    return r


def make_good() -> None:
    """The good fixtures: tones with exact truth, plus hum, silence and noise."""
    a4 = 440.0
    _tone("steady_a4_48k", [NoteEvent(a4, 1.8, gap_s=0.2)], 48000, "PCM_16",
          "Steady A4 (440 Hz), first register, -20 dBFS, light breath noise.")
    _tone("steady_a4_48k_clean", [NoteEvent(a4, 1.8, chiff=False, gap_s=0.2)], 48000, "FLOAT",
          "Steady A4, no breath noise or chiff, 32-bit float: the clean case.", breath_noise_db=-math.inf)
    # Wren alto in F: F4 G4 A4 Bb4 C5, the G overblown to G5, the C vented to C5 octave.
    f4, g4, a4_, bb4, c5 = 349.228, 391.995, 440.0, 466.164, 523.251
    phrase = [
        NoteEvent(f4, 0.45, gap_s=0.05),
        NoteEvent(g4, 0.9, jump_at_s=0.45, jump_kind="overblown", weaken_s=0.15, gap_s=0.05),
        NoteEvent(a4_, 0.45, vibrato_cents=12.0, gap_s=0.05),
        NoteEvent(bb4, 0.45, cents_per_db=1.0, crescendo_db=4.0, gap_s=0.05),
        NoteEvent(c5, 0.9, jump_at_s=0.4, jump_kind="vented", gap_s=0.3),
    ]
    _tone("phrase_wren_48k_24bit", phrase, 48000, "PCM_24",
          "Scale phrase F4-C5 on an alto in F: G4 overblown to G5 (with weakening), C5 vented "
          "to its octave; some vibrato and level-dependent pitch; 24-bit.")
    _tone("low_f2_44k1", [NoteEvent(87.307, 2.0, level_dbfs=-18.0, gap_s=0.2)], 44100, "PCM_16",
          "Low F2 (87.307 Hz, contrabass recorder's lowest note) at 44.1 kHz.")
    _tone("weak_fundamental_c5_48k", [NoteEvent(c5, 1.5, h1_offset_db=-15.0, gap_s=0.2)], 48000, "PCM_16",
          "C5 whose fundamental is 6 dB under its 2nd harmonic: an octave-error trap.")
    _tone("high_c7_96k", [NoteEvent(2093.005, 1.2, level_dbfs=-24.0, gap_s=0.2)], 96000, "PCM_24",
          "High C7 (2093 Hz) at 96 kHz, 24-bit.")
    _tone("reverb_d5_48k", [NoteEvent(587.330, 1.2, vibrato_cents=8.0, gap_s=0.8)], 48000, "PCM_16",
          "D5 in a reverberant room (T60 0.8 s) with room noise; the tail after the note is unvoiced "
          "in the truth.", reverb_s=0.8, room_noise_dbfs=-62.0)

    # stereo: same note in both channels, right 6 dB lower and with its own breath noise
    left = render([NoteEvent(a4, 1.5, gap_s=0.2)], 48000, seed=SEED)
    right = render([NoteEvent(a4, 1.5, level_dbfs=-26.0, gap_s=0.2)], 48000, seed=SEED + 1)
    both = np.stack([left.audio, right.audio], axis=1)
    doc = _sidecar("stereo_a4_48k", left, sample_rate=48000, channels=2, subtype="PCM_16",
                   description="Stereo A4: left -20 dBFS, right -26 dBFS; truth of both channels.",
                   options={"right_level_dbfs": -26.0}, n_samples=both.shape[0])
    _write("stereo_a4_48k", both, 48000, "PCM_16", doc)

    # hum only: 50 Hz mains with harmonics, no tone (a note at -200 dBFS carries the timeline)
    hum_opts = dict(hum_hz=50.0, hum_dbfs=-40.0, breath_noise_db=-math.inf)
    hum = render([NoteEvent(a4, 0.01, level_dbfs=-200.0, attack_s=0.005, release_s=0.005, chiff=False,
                            gap_s=1.99)], 48000, seed=SEED, **hum_opts)
    doc = _sidecar("hum_50hz_48k", None, sample_rate=48000, channels=1, subtype="PCM_16",
                   description="50 Hz mains hum with harmonics at -40 dBFS, nothing else: never voiced.",
                   options=hum_opts, n_samples=hum.audio.size, extra={"voiced": False})
    _write("hum_50hz_48k", hum.audio, 48000, "PCM_16", doc)

    silence = np.zeros(48000, dtype=np.float32)
    doc = _sidecar("silence_48k", None, sample_rate=48000, channels=1, subtype="PCM_16",
                   description="One second of digital silence.", options={}, n_samples=silence.size,
                   extra={"voiced": False})
    _write("silence_48k", silence, 48000, "PCM_16", doc)

    rng = np.random.default_rng(SEED)
    noise = (rng.standard_normal(48000) * 10 ** (-30.0 / 20.0)).astype(np.float32)
    doc = _sidecar("white_noise_48k", None, sample_rate=48000, channels=1, subtype="PCM_16",
                   description="One second of white Gaussian noise, -30 dBFS RMS.", options={},
                   n_samples=noise.size, extra={"voiced": False, "level_dbfs": -30.0})
    _write("white_noise_48k", noise, 48000, "PCM_16", doc)


def make_bad() -> None:
    """Damaged files: each must give a clear error (or, for NaN and one sample, a clear answer)."""
    bad = HERE / "bad"
    bad.mkdir(exist_ok=True)
    (bad / "empty.wav").write_bytes(b"")
    # RIFF/WAVE header with a fmt chunk and a data chunk that holds nothing
    fmt = struct.pack("<HHIIHH", 1, 1, 48000, 96000, 2, 16)
    header = b"RIFF" + struct.pack("<I", 4 + 8 + len(fmt) + 8) + b"WAVE"
    header += b"fmt " + struct.pack("<I", len(fmt)) + fmt + b"data" + struct.pack("<I", 0)
    (bad / "header_only.wav").write_bytes(header)
    # a valid 16-bit file cut in the middle of its data (the header claims more)
    tone = render([NoteEvent(440.0, 0.5)], 48000, seed=SEED).audio
    good = bad / "_tmp.wav"
    sf.write(good, tone, 48000, subtype="PCM_16")
    raw = good.read_bytes()
    good.unlink()
    (bad / "truncated.wav").write_bytes(raw[: 44 + 1001])  # odd cut: half a sample at the end
    (bad / "not_audio.wav").write_text("This is a text file with a .wav name, not audio.\n")
    x = tone.copy()
    x[1000:1100] = np.nan
    x[2000] = np.inf
    _write_wav(bad / "nan_samples_float.wav", x, 48000, "FLOAT")
    sf.write(bad / "single_sample.wav", np.array([0.25], dtype=np.float32), 48000, subtype="PCM_16")
    (bad / "README.md").write_text(
        "# Damaged WAV files (written by ../make_fixtures.py)\n\n"
        "| file | what is wrong |\n|---|---|\n"
        "| empty.wav | 0 bytes |\n"
        "| header_only.wav | a valid 44-byte RIFF/WAVE header whose data chunk is empty |\n"
        "| truncated.wav | 16-bit 48 kHz file cut after 1001 data bytes; the header claims 48 000 bytes |\n"
        "| not_audio.wav | a text file named .wav |\n"
        "| nan_samples_float.wav | 32-bit float; samples 1000-1099 NaN, sample 2000 +inf |\n"
        "| single_sample.wav | one 16-bit sample (0.25) at 48 kHz |\n"
    )
    for p in sorted(bad.iterdir()):
        print(f"wrote {p.relative_to(HERE.parent)} ({p.stat().st_size} bytes)")


if __name__ == "__main__":
    make_good()
    make_bad()
