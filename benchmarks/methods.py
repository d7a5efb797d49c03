"""Pitch trackers run side by side on the same audio: ours and outside references.

Each runner returns a :class:`Track`: frame-centre times (s), f0 in Hz (nan when the method
says unvoiced) and the method's analysis window (s), which sets how far from a transition a
frame must be before it is scored. References, all at a 10 ms hop:

* aubio 0.4.9 ``yin`` and ``yinfft`` (de Cheveigné & Kawahara 2002; aubio's spectral variant),
  2048-sample buffer. ``yin``: unvoiced when confidence < 0.8 (as in aubio's
  ``python/demos/demo_pitch.py``) or below aubio's -50 dB silence gate. ``yinfft``: aubio
  0.4.9 reports confidence 0 for mid-range notes (aubio/aubio issue #167, measured here
  too), so its voicing is the silence gate alone.
* librosa ``pyin`` (Mauch & Dixon 2014) with its default voicing, frame 2048, given the
  category's range (fmin, fmax): its Viterbi cost grows with the range.
* Praat through parselmouth: ``to_pitch_ac`` and ``to_pitch_cc`` with floor/ceiling = range.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

REF_HOP_S = 0.01
AUBIO_BUF = 2048


@dataclass
class Track:
    times_s: np.ndarray
    f0_hz: np.ndarray  # nan = unvoiced
    window_s: float
    frames: list[Any] = field(default_factory=list)  # ours only: the Frame objects


def run_aubio(method: str, audio: np.ndarray, sample_rate: int, fmin: float, fmax: float,
              buf_size: int = AUBIO_BUF, hop_size: int | None = None) -> Track:
    import aubio

    hop = hop_size or int(round(REF_HOP_S * sample_rate))
    det = aubio.pitch(method, buf_size, hop, sample_rate)
    det.set_unit("Hz")
    x = np.ascontiguousarray(audio, dtype=np.float32)
    n = x.size // hop
    f0 = np.full(n, np.nan)
    for i in range(n):
        f = float(det(x[i * hop : (i + 1) * hop])[0])
        if f > 0 and (method == "yinfft" or det.get_confidence() >= 0.8):
            f0[i] = f
    # call i has seen samples up to (i+1)*hop; the buffer is the last buf_size of them
    times = ((np.arange(n) + 1) * hop - buf_size / 2) / sample_rate
    return Track(times, f0, buf_size / sample_rate)


def run_pyin(audio: np.ndarray, sample_rate: int, fmin: float, fmax: float, max_s: float | None = None) -> Track:
    import librosa

    if max_s is not None:  # pyin is slow (Viterbi over the whole range): --quick scores a prefix
        audio = audio[: int(max_s * sample_rate)]
    hop = int(round(REF_HOP_S * sample_rate))
    frame = 2048 if sample_rate <= 48000 else 4096
    while frame < 2.2 * sample_rate / fmin:  # pyin needs ~2 periods of fmin in a frame
        frame *= 2
    f0, voiced, _ = librosa.pyin(np.asarray(audio, dtype=np.float32), fmin=fmin, fmax=fmax, sr=sample_rate,
                                 frame_length=frame, hop_length=hop, center=True)
    f0 = np.where(voiced, f0, np.nan)
    times = librosa.times_like(f0, sr=sample_rate, hop_length=hop)
    return Track(np.asarray(times), np.asarray(f0, dtype=np.float64), frame / sample_rate)


def run_praat(kind: str, audio: np.ndarray, sample_rate: int, fmin: float, fmax: float) -> Track:
    import parselmouth

    snd = parselmouth.Sound(np.asarray(audio, dtype=np.float64), sampling_frequency=sample_rate)
    if kind == "ac":
        pitch = snd.to_pitch_ac(time_step=REF_HOP_S, pitch_floor=fmin, pitch_ceiling=fmax)
        window = 3.0 / fmin  # Praat's ac window: 3 periods of the floor
    else:
        pitch = snd.to_pitch_cc(time_step=REF_HOP_S, pitch_floor=fmin, pitch_ceiling=fmax)
        window = 2.0 / fmin
    f = pitch.selected_array["frequency"]
    return Track(np.asarray(pitch.xs()), np.where(f > 0, f, np.nan), window)


def analyser_available() -> bool:
    """True once dsp.analyser provides StreamingAnalyser."""
    try:
        from dsp.analyser import StreamingAnalyser  # noqa: F401
    except ImportError:
        return False
    return True


def run_ours(audio: np.ndarray, sample_rate: int, fmin: float, fmax: float, block_size: int = 1024) -> Track:
    from dsp.analyser import StreamingAnalyser

    an = StreamingAnalyser(sample_rate)
    frames = []
    x = np.asarray(audio, dtype=np.float32)
    for i in range(0, x.size, block_size):
        frames.extend(an.process(x[i : i + block_size]))
    times = np.array([fr.time_s for fr in frames])
    f0 = np.array([np.nan if fr.f0_hz is None else fr.f0_hz for fr in frames], dtype=np.float64)
    return Track(times, f0, an.frame_size / sample_rate, frames)


Runner = Callable[[np.ndarray, int, float, float], Track]


def runners(include_pyin: bool = True, pyin_max_s: float | None = None) -> dict[str, Runner]:
    """Method name -> runner, ours first when it exists."""
    out: dict[str, Runner] = {}
    if analyser_available():
        out["ours"] = run_ours
    out["aubio-yin"] = lambda a, sr, lo, hi: run_aubio("yin", a, sr, lo, hi)
    out["aubio-yinfft"] = lambda a, sr, lo, hi: run_aubio("yinfft", a, sr, lo, hi)
    if include_pyin:
        out["librosa-pyin"] = lambda a, sr, lo, hi: run_pyin(a, sr, lo, hi, pyin_max_s)
    out["praat-ac"] = lambda a, sr, lo, hi: run_praat("ac", a, sr, lo, hi)
    out["praat-cc"] = lambda a, sr, lo, hi: run_praat("cc", a, sr, lo, hi)
    return out
