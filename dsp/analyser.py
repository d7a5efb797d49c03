"""The streaming analyser: pitch, level, harmonic balance and register, one Frame per hop.

Contract other modules code against::

    an = StreamingAnalyser(sample_rate=48000)        # any rate 16-96 kHz
    an.frame_size, an.hop_size, an.sample_rate       # samples; hop <= 10 ms
    frames: list[Frame] = an.process(block)          # block: 1-D float array, any length
    an.lock(target_hz)                               # judge register against this note; None releases
    an.reset()                                       # back to the state after construction

Per hop, vectorised over all the hops a block completes:

1. one real FFT of the newest ``frame_size`` samples (~85 ms) and one of the newest half
   of them; Hann spectra and frequency reassignment come from them (:mod:`dsp.spectrum`);
2. coarse f0 by harmonic matching of the strongest peaks, refined by weighted least
   squares over the reassigned harmonic frequencies (:mod:`dsp.pitch`);
3. voicing: clarity = 1 - (power density between the harmonics) / (density on them), the
   strongest harmonic >= 20 dB over the local floor, energy present across the window's
   centre (clicks and knocks fail it), mains hum (f0 within 0.5 % of 50, 60, 100, 120, 150
   or 180 Hz) rejected; a sounding note is held on weaker evidence (hysteresis);
4. level, clipping (:mod:`dsp.level`), H1..H8 and odd/even balance (:mod:`dsp.harmonics`);
5. the register monitor (:mod:`dsp.register`), fed with the newest half-window's powers at
   the held note's harmonics and the level of the newest quarter window. Once a jump is
   past a frame's centre and the window still shows the held note (reverberation), the
   frame's pitch is measured on the harmonics of mode x held note.

Known limits: a vibrato is read through the window's smoothing (~4.5 % shallow at 5 Hz:
~0.5 cent median error on a 15-cent vibrato); ready_s - time_s is half a window (43 ms at
48 kHz), so a change is followed ~28 ms after it by ready_s at best.

Timing: a frame measures the ``frame_size`` samples ending at sample ``e`` (exclusive);
``time_s = (e - frame_size / 2) / sample_rate`` (the centre of the symmetric window) and
``ready_s = e / sample_rate``, counted from the first sample fed since construction or
:meth:`StreamingAnalyser.reset`. The first frame comes once ``frame_size`` samples are in.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from dsp.frame import Frame
from dsp.harmonics import harmonic_levels_db, odd_even_db
from dsp.level import clipped
from dsp.pitch import RefinedPitch, estimate_coarse_f0, find_peaks, refine_f0
from dsp.register import EVIDENCE_HARMONICS, EVIDENCE_MODES, RegisterMonitor, summarise_evidence
from dsp.spectrum import BatchSpectrum, analyse_spectrum, band_floor

__all__ = ["StreamingAnalyser", "MIN_SAMPLE_RATE", "MAX_SAMPLE_RATE", "FMIN_HZ", "FMAX_HZ"]

MIN_SAMPLE_RATE = 16000
MAX_SAMPLE_RATE = 96000
FMIN_HZ = 60.0
"""Lowest fundamental reported, Hz."""
FMAX_HZ = 4500.0
"""Highest fundamental reported, Hz."""

_MAINS_HZ = np.array([50.0, 60.0, 100.0, 120.0, 150.0, 180.0])
_MAINS_TOLERANCE = 0.005  # mains frequency stays within +-0.4 %: common practice (grid codes)
_CLARITY_MIN = 0.5
_PEAK_SNR_MIN_DB = 20.0  # strongest harmonic over the local floor; noise maxima reach ~10 dB
_CLARITY_HOLD = 0.3
_PEAK_SNR_HOLD_DB = 14.0
_HOLD_CENTS = 50.0  # a sustained frame must stay within this of the previous voiced f0
_FLATNESS_MIN = 0.005  # centre segments within 23 dB of the loudest: level steps pass, knocks (decaying ~10 dB per segment) do not
_SEGMENTS = 8
_PEAK_LIMIT_HZ = 10000.0
_CHUNK_FRAMES = 32
_N_PEAKS = 10  # spectral peaks for the coarse match
_N_FIT_HARMONICS = 12  # harmonics in the refinement (H12 of a duct flute is ~50 dB down)
_CLARITY_K = np.arange(1, 41, dtype=np.float64)  # harmonics counted by the clarity
_EVIDENCE_K = np.arange(1, EVIDENCE_HARMONICS + 1, dtype=np.float64)[None, None, :]
_EVIDENCE_M = np.arange(1, EVIDENCE_MODES + 1, dtype=np.float64)[None, :, None]
_OFFS3 = np.arange(-1, 2)


@dataclass(frozen=True, slots=True)
class _Batch:
    """Per-frame results of one batch (arrays over frames)."""

    spec: BatchSpectrum
    floor: NDArray[np.float64]
    refined: RefinedPitch
    voiced: NDArray[np.bool_]
    sustain: NDArray[np.bool_]
    clarity: NDArray[np.float64]
    level_dbfs: NDArray[np.float64]
    fast_level_dbfs: NDArray[np.float64]
    clip: NDArray[np.bool_]
    evidence: NDArray[np.float64]  # (n_frames, 3, 8)
    fast: BatchSpectrum


class StreamingAnalyser:
    """Streaming pitch, level, harmonic and register analyser.

    Parameters
    ----------
    sample_rate : int, 16000..96000, Hz
    frame_size : int or None, samples
        Analysis window; default the power of two nearest 85 ms (4096 at 48 kHz), at
        least 2048 so that 60 Hz has five periods.
    hop_size : int or None, samples
        Frame step; default 5 ms. At most 10 ms.
    fmin_hz, fmax_hz : float, Hz
        Range of fundamentals reported (default 60 Hz - 4.5 kHz).

    **register_options
        Passed to :class:`dsp.register.RegisterMonitor` (thresholds in dB, times in s).

    Raises
    ------
    ValueError
        For a sample rate, frame or hop size out of range.

    Examples
    --------
    >>> an = StreamingAnalyser(48000)
    >>> an.frame_size, an.hop_size
    (4096, 240)
    >>> t = np.arange(48000) / 48000
    >>> frames = an.process(0.5 * np.sin(2 * np.pi * 440.0 * t))
    >>> round(frames[-1].f0_hz, 4)
    440.0
    """

    def __init__(
        self,
        sample_rate: int = 48000,
        *,
        frame_size: int | None = None,
        hop_size: int | None = None,
        fmin_hz: float = FMIN_HZ,
        fmax_hz: float = FMAX_HZ,
        **register_options: float,
    ) -> None:
        if isinstance(sample_rate, bool) or not isinstance(sample_rate, (int, float, np.integer, np.floating)):
            raise TypeError(f"sample_rate must be a number of Hz, got {type(sample_rate).__name__}")
        if not (MIN_SAMPLE_RATE <= sample_rate <= MAX_SAMPLE_RATE):
            if sample_rate < MIN_SAMPLE_RATE:
                raise ValueError(
                    f"sample_rate {sample_rate} Hz is below {MIN_SAMPLE_RATE} Hz; resample to 16-96 kHz"
                )
            raise ValueError(f"sample_rate {sample_rate} Hz is above {MAX_SAMPLE_RATE} Hz; resample to 16-96 kHz")
        sr = float(sample_rate)
        if frame_size is None:
            frame_size = max(2048, 1 << int(round(math.log2(0.085 * sr))))
        if int(frame_size) != frame_size or frame_size % 2 or frame_size < 5 * sr / fmin_hz / 2:
            raise ValueError(
                f"frame_size {frame_size} cannot hold 2.5 periods of {fmin_hz} Hz at {sr:g} Hz; "
                f"use an even frame_size >= {int(math.ceil(2.5 * sr / fmin_hz / 2) * 2)}"
            )
        max_hop = int(0.010 * sr)
        if hop_size is None:
            hop_size = int(round(0.005 * sr))
        if int(hop_size) != hop_size or not (1 <= hop_size <= max_hop):
            raise ValueError(f"hop_size {hop_size} is outside 1..{max_hop} samples (10 ms at {sr:g} Hz); pick a smaller hop")
        if not (0.0 < fmin_hz < fmax_hz < 0.5 * sr):
            raise ValueError(f"fmin_hz {fmin_hz} and fmax_hz {fmax_hz} must satisfy 0 < fmin < fmax < {0.5 * sr:g} Hz")
        self._sample_rate_value = sample_rate
        self._sr = sr
        self._n = int(frame_size)
        self._hop = int(hop_size)
        self._fmin = float(fmin_hz)
        self._fmax = float(fmax_hz)
        self._register_options = dict(register_options)
        self._monitor = RegisterMonitor(self._hop / sr, **register_options)
        self._override_frames = int(math.ceil(self._n / 4 / self._hop))

        df = sr / self._n
        n_bins = self._n // 2 + 1
        self._limit_hz = min(_PEAK_LIMIT_HZ, 0.45 * sr)
        self._lo_bin = max(2, int(math.floor(0.9 * fmin_hz / df)))
        self._hi_bin = min(n_bins - 3, int(math.ceil(self._limit_hz / df)))
        self._n_bins = self._hi_bin + 4
        self._fast_bins = self._hi_bin // 2 + 4
        self._store_size = self._n + 8 * self._hop + 8192
        self._hum_lo_hz = _MAINS_HZ * (1.0 - _MAINS_TOLERANCE)
        self._hum_hi_hz = _MAINS_HZ * (1.0 + _MAINS_TOLERANCE)
        self.reset()

    # -- contract -------------------------------------------------------------------------

    @property
    def sample_rate(self) -> int | float:
        """Sample rate, Hz."""
        return self._sample_rate_value

    @property
    def frame_size(self) -> int:
        """Analysis window, samples."""
        return self._n

    @property
    def hop_size(self) -> int:
        """Frame step, samples."""
        return self._hop

    @property
    def _buf(self) -> NDArray[np.float64]:
        """Samples held for the next frames (a view)."""
        return self._store[: self._fill]

    def reset(self) -> None:
        """Back to the state after construction (input clock restarts at 0; lock kept off)."""
        self._store = np.zeros(self._store_size, dtype=np.float64)
        self._fill = 0  # samples held in self._store
        self._store_start = 0  # absolute index of self._store[0]
        self._n_in = 0
        self._next_end = self._n
        self._prev_f0: float | None = None
        self._jumped_run = 0
        self._monitor.lock(None)
        self._monitor.reset()

    def lock(self, target_hz: float | None) -> None:
        """Judge the register against ``target_hz`` (the fingered note, Hz); None releases.

        Raises
        ------
        ValueError
            For a target outside the analyser's range.
        """
        if target_hz is not None:
            if not (isinstance(target_hz, (int, float, np.integer, np.floating)) and math.isfinite(target_hz)):
                raise ValueError(f"target_hz {target_hz!r} must be a frequency in Hz, or None to release")
            if not (self._fmin / 4.0 <= target_hz <= self._fmax):
                raise ValueError(
                    f"target_hz {target_hz} Hz is outside {self._fmin / 4:g}-{self._fmax:g} Hz; lock a playable note"
                )
        self._monitor.lock(None if target_hz is None else float(target_hz))

    def process(self, block: ArrayLike) -> list[Frame]:
        """Analyse the next samples; return the frames they complete (possibly none).

        Parameters
        ----------
        block : 1-D array of float (float32 or float64), full scale 1.0
            Next samples, any length (0 included).

        Returns
        -------
        list of Frame
            One per hop completed, in time order.

        Raises
        ------
        TypeError
            For a non-float block.
        ValueError
            For a block that is not 1-D or holds NaN or infinity.
        """
        x = np.asarray(block)
        if x.ndim != 1:
            raise ValueError(f"block has shape {x.shape}; pass one channel as a 1-D array")
        n_new = x.size
        if n_new == 0:
            return []
        if x.dtype.kind != "f":
            raise TypeError(f"block dtype {x.dtype} is not floating point; scale to float32/float64 with full scale 1.0")
        # a finite sum proves every sample finite; an infinite one may be an overflow only
        if not math.isfinite(float(np.add.reduce(x, dtype=np.float64))) and not np.all(np.isfinite(x)):
            bad = int(np.flatnonzero(~np.isfinite(x))[0])
            raise ValueError(f"block holds {x[bad]} at sample {bad}; pass finite samples")
        fill = self._fill
        if fill + n_new > self._store.size:
            grown = np.empty(max(2 * self._store.size, fill + n_new), dtype=np.float64)
            grown[:fill] = self._store[:fill]
            self._store = grown
        self._store[fill : fill + n_new] = x
        fill += n_new
        self._n_in += n_new
        frames: list[Frame] = []
        hop = self._hop
        if self._next_end <= self._n_in:
            n_frames = (self._n_in - self._next_end) // hop + 1
            first = self._next_end - self._n - self._store_start  # buffer index of frame 0
            item = self._store.itemsize
            view = np.lib.stride_tricks.as_strided(
                self._store[first:], shape=(n_frames, self._n), strides=(hop * item, item), writeable=False
            )
            frames = self._analyse(view, self._next_end, n_frames)
            self._next_end += hop * n_frames
        # keep from the next frame's first sample on
        drop = self._next_end - self._n - self._store_start
        if drop > 0:
            if drop < fill:
                self._store[: fill - drop] = self._store[drop:fill]
            fill = max(fill - drop, 0)
            self._store_start += drop
            if self._store.size > 4 * self._store_size and fill <= self._store_size:
                # one long block made the store large: give the memory back
                small = np.zeros(self._store_size, dtype=np.float64)
                small[:fill] = self._store[:fill]
                self._store = small
        self._fill = fill
        return frames

    # -- analysis -------------------------------------------------------------------------

    def _analyse(self, x: NDArray[np.float64], first_end: int, n_frames: int) -> list[Frame]:
        """Frames for ``n_frames`` windows ``x`` (a strided view), the first ending at ``first_end``."""
        out: list[Frame] = []
        for s in range(0, n_frames, _CHUNK_FRAMES):  # chunks that stay in cache
            c = min(_CHUNK_FRAMES, n_frames - s)
            ends = [first_end + self._hop * (s + i) for i in range(c)]
            out.extend(self._analyse_chunk(np.ascontiguousarray(x[s : s + c]), ends))
        return out

    def _analyse_chunk(self, x: NDArray[np.float64], ends_l: list[int]) -> list[Frame]:
        """Frames for up to _CHUNK_FRAMES windows."""
        b = self._analyse_batch(x)
        sr = self._sr
        half = self._n / 2.0
        out: list[Frame] = []
        update = self._monitor.update
        f0s = b.refined.f0_hz.tolist()
        voiced_l = b.voiced.tolist()
        sustain_l = b.sustain.tolist()
        harm_db = harmonic_levels_db(b.refined.harmonic_amp).tolist()
        oe = odd_even_db(b.refined.harmonic_amp).tolist()
        evidence = summarise_evidence(b.evidence).tolist()
        fast_level = b.fast_level_dbfs.tolist()
        clarity = b.clarity.tolist()
        level = b.level_dbfs.tolist()
        clip = b.clip.tolist()
        prev = self._prev_f0
        jumped_run = self._jumped_run
        for i in range(len(ends_l)):
            f0 = f0s[i] if voiced_l[i] else None
            if f0 is None and prev is not None and sustain_l[i] and abs(1200.0 * math.log2(f0s[i] / prev)) <= _HOLD_CENTS:
                f0 = f0s[i]
            reading = update(f0, evidence[i], fast_level[i])
            h_db: tuple[float, ...] | None = None
            oe_db: float | None = None
            if f0 is None:
                jumped_run = 0
            else:
                held = reading.held_f0_hz
                jumped_run = jumped_run + 1 if reading.register == "jumped" else 0
                if (
                    reading.mode > 1
                    and held is not None
                    and jumped_run > self._override_frames
                    and abs(1200.0 * math.log2(f0 / (reading.mode * held))) > 50.0
                ):
                    # the held note's odd harmonics may linger (reverberation) while the
                    # octave sounds: measure the sounding note at mode x held. Only once the
                    # change is past this frame's centre: the monitor judges the newest half
                    # window, whose centre leads this frame's by a quarter window
                    f0, h_db, oe_db = self._refine_single(b, i, reading.mode * held)
                else:
                    h_db = tuple(harm_db[i])
                    oe_db = oe[i]
            prev = f0
            e = ends_l[i]
            out.append(
                Frame(
                    time_s=(e - half) / sr,
                    ready_s=e / sr,
                    f0_hz=f0,
                    clarity=clarity[i],
                    level_dbfs=level[i],
                    clipped=clip[i],
                    harmonics_db=h_db,
                    odd_even_db=oe_db,
                    register=reading.register if f0 is not None else None,
                    jump=reading.jump if f0 is not None else None,
                    held_f0_hz=reading.held_f0_hz,
                )
            )
        self._prev_f0 = prev
        self._jumped_run = jumped_run
        return out

    def _refine_single(self, b: _Batch, i: int, f_hz: float) -> tuple[float | None, tuple[float, ...] | None, float | None]:
        """Refine frame ``i`` of a batch around ``f_hz``."""
        sp = b.spec
        spec = BatchSpectrum(sp.rect[i : i + 1], sp.power[i : i + 1], sp.bin_hz, sp.frame_size)
        r = refine_f0(spec, b.floor[i : i + 1], np.array([f_hz]), self._limit_hz, n_harmonics=_N_FIT_HARMONICS)
        f0 = float(r.f0_hz[0])
        if not math.isfinite(f0):
            return None, None, None
        return f0, tuple(harmonic_levels_db(r.harmonic_amp)[0].tolist()), float(odd_even_db(r.harmonic_amp)[0])

    def _analyse_batch(self, x: NDArray[np.float64]) -> _Batch:
        """Vectorised per-frame measurements."""
        sr = self._sr
        n = self._n
        lo, hi = self._lo_bin, self._hi_bin
        x32 = x.astype(np.float32)
        spec = analyse_spectrum(x32, sr, self._n_bins)
        floor = band_floor(spec.power)
        top = spec.power[:, lo:hi].max(axis=1, keepdims=True)
        floor = np.maximum(floor, top * 1e-12)  # digital-silence-clean tones: relative floor
        peaks = find_peaks(spec, floor, lo, hi, n_peaks=_N_PEAKS)
        coarse = estimate_coarse_f0(peaks, self._fmin * 0.97, self._fmax * 1.03)
        refined = refine_f0(spec, floor, coarse.f0_hz, self._limit_hz, n_harmonics=_N_FIT_HARMONICS)
        f0 = refined.f0_hz
        finite = np.isfinite(f0)
        f0_safe = np.where(finite, f0, 1000.0)

        clarity = self._clarity(spec, f0_safe) * finite
        seg = np.add.reduce((x * x).reshape(x.shape[0], _SEGMENTS, -1), 2)
        ms = np.empty((x.shape[0], 2))
        ms[:, 0] = np.add.reduce(seg, 1) / n
        # newest quarter of the window (~21 ms at 48 kHz): a level step shows quickly
        ms[:, 1] = (seg[:, -2] + seg[:, -1]) / (n // 4)
        with np.errstate(divide="ignore"):
            levels = 10.0 * np.log10(ms)
        level = levels[:, 0]
        fast_level = levels[:, 1]
        flat = np.minimum.reduce(seg[:, 2:6], 1) >= _FLATNESS_MIN * np.maximum(np.maximum.reduce(seg, 1), 1e-300)
        hum = ((f0_safe[:, None] >= self._hum_lo_hz) & (f0_safe[:, None] <= self._hum_hi_hz)).any(axis=1)
        usable = finite & (f0_safe >= self._fmin) & (f0_safe <= self._fmax) & flat & ~hum & (level > -100.0)
        snr = refined.best_snr_db
        voiced = usable & (clarity >= _CLARITY_MIN) & (snr >= _PEAK_SNR_MIN_DB)
        # hysteresis: a note already sounding stays voiced on weaker evidence (reverberant
        # tails, breath noise); see _analyse_chunk
        sustain = usable & (clarity >= _CLARITY_HOLD) & (snr >= _PEAK_SNR_HOLD_DB)
        fast = analyse_spectrum(x32[:, n // 2 :], sr, self._fast_bins)
        evidence = self._evidence(fast, f0_safe)
        return _Batch(
            spec=spec,
            floor=floor,
            refined=refined,
            voiced=voiced,
            sustain=sustain,
            clarity=clarity,
            level_dbfs=level,
            fast_level_dbfs=fast_level,
            clip=clipped(x),
            evidence=evidence,
            fast=fast,
        )

    def _clarity(self, spec: BatchSpectrum, f0: NDArray[np.float64]) -> NDArray[np.float64]:
        """1 - (power density between the harmonics of ``f0``) / (density on them), clipped 0..1.

        "On" a harmonic: the 3 bins nearest it (>= 97 % of a Hann-windowed sine's energy);
        "between": the other bins from the lowest search bin up to half a harmonic above the
        last harmonic counted (at most 40, below the peak search limit). A periodic tone has
        empty valleys (clarity near 1); noise fills both alike (near 0), even for a low
        candidate whose harmonics cover half the bins.
        """
        df = spec.bin_hz
        p = spec.power
        n_frames, n_bins = p.shape
        pos = f0[:, None] * _CLARITY_K
        inside = pos <= self._limit_hz
        centre = np.minimum(np.rint(pos / df).astype(np.intp), n_bins - 2)
        on = np.add.reduce(p[np.arange(n_frames)[:, None, None], centre[:, :, None] + _OFFS3], 2).astype(np.float64)
        e_on = np.add.reduce((on * inside), 1)
        n_h = np.add.reduce(inside, 1)
        n_on = 3.0 * n_h
        top = np.minimum(np.rint((n_h + 0.5) * f0 / df).astype(np.intp), self._hi_bin)
        top = np.maximum(top, self._lo_bin + 1)
        cum = p[:, self._lo_bin : self._hi_bin + 1].cumsum(1, dtype=np.float64)
        e_all = cum[np.arange(n_frames), top - self._lo_bin]
        n_all = (top - self._lo_bin + 1).astype(np.float64)
        e_off = np.maximum(e_all - e_on, 0.0)
        n_off = np.maximum(n_all - n_on, 1.0)
        dens_on = e_on / np.maximum(n_on, 1.0)
        ratio = (e_off / n_off) / np.maximum(dens_on, 1e-300)
        out: NDArray[np.float64] = np.minimum(np.maximum(1.0 - ratio, 0.0), 1.0) * (n_h > 0)
        return out

    def _evidence(self, fast: BatchSpectrum, f0: NDArray[np.float64]) -> NDArray[np.float64]:
        """Powers at k f0 / m (k = 1..8, m = 1..3), max over +-1 bin of the half window."""
        df = fast.bin_hz
        p = fast.power
        n_bins = p.shape[1]
        pos = f0[:, None, None] * _EVIDENCE_K / _EVIDENCE_M
        centre = np.minimum(np.maximum(np.rint(pos / df).astype(np.intp), 1), n_bins - 2)
        near = np.maximum.reduce(p[np.arange(p.shape[0])[:, None, None, None], centre[..., None] + _OFFS3], -1)
        return np.where(pos < self._limit_hz, near, 0.0)
