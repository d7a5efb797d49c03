"""The streaming analyser: pitch, level, harmonic balance and register, one Frame per hop.

Contract other modules code against::

    an = StreamingAnalyser(sample_rate=48000)        # any rate 16-96 kHz
    an.frame_size, an.hop_size, an.sample_rate       # samples; hop <= 10 ms
    frames: list[Frame] = an.process(block)          # block: 1-D float array, any length
    an.lock(target_hz)                               # judge register against this note; None releases
    an.reset()                                       # back to the state after construction

Per hop: one real FFT of the newest ``frame_size`` samples (~85 ms) and one of the newest
half of them, for all the hops a block completes at once; then one compiled pass per frame
(:mod:`dsp.measure`): Hann spectra, coarse and refined f0 (:mod:`dsp.pitch`), voicing,
level, clipping, H1..H8 and odd/even balance, and the register evidence. The register
monitor (:mod:`dsp.register`) is fed the newest half-window's powers at the held note's
harmonics and the level of the newest quarter window; a sounding note stays voiced on
weaker evidence (hysteresis). Once a jump is past a frame's centre and the window still
shows the held note (reverberation), the frame's pitch is measured on the harmonics of
mode x held note.

Known limits: the window's smoothing of a vibrato is taken out only to second order (a 40-cent,
7 Hz vibrato still reads ~0.35 cent off in the median) and not at all below 12 bins of f0
(~140 Hz at 48 kHz); ready_s - time_s is half a window (43 ms at 48 kHz), so a change is
followed ~28 ms after it by ready_s at best.

Timing: a frame measures the ``frame_size`` samples ending at sample ``e`` (exclusive);
``time_s = (e - frame_size / 2) / sample_rate`` (the centre of the symmetric window) and
``ready_s = e / sample_rate``, counted from the first sample fed since construction or
:meth:`StreamingAnalyser.reset`. The first frame comes once ``frame_size`` samples are in.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

import scipy.fft  # type: ignore[import-untyped]

from dsp.frame import Frame
from dsp.harmonics import N_REPORTED, balance_row
from dsp.measure import (
    CURVATURE_GAIN,
    CURVATURE_NOISE,
    FIT_SNR_DB,
    MAINS_HZ,
    MAINS_TOLERANCE,
    N_FIT_HARMONICS,
    copy_frames,
    measure_frames,
)
from dsp.pitch import refine_f0
from dsp.register import EVIDENCE_MODES, RegisterMonitor

__all__ = ["StreamingAnalyser", "prepare_kernels", "MIN_SAMPLE_RATE", "MAX_SAMPLE_RATE", "FMIN_HZ", "FMAX_HZ"]

MIN_SAMPLE_RATE = 16000
MAX_SAMPLE_RATE = 96000
FMIN_HZ = 60.0
"""Lowest fundamental reported, Hz."""
FMAX_HZ = 4500.0
"""Highest fundamental reported, Hz."""

_HOLD_CENTS = 50.0  # a sustained frame must stay within this of the previous voiced f0
_PEAK_LIMIT_HZ = 10000.0
_CHUNK_FRAMES = 32
_compiled = False  # the kernels compiled (or loaded from numba's cache) in this process


def prepare_kernels() -> None:
    """Compile the analyser's kernels, or load them from numba's disk cache, in this process.

    Idempotent; the first :class:`StreamingAnalyser` does it too. Call it early where the
    moment matters: compiling takes seconds once per installation, loading ~0.3 s.
    """
    if not _compiled:
        StreamingAnalyser(48000)


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
        self._keep = min(self._hi_bin + 4, self._n // 2)  # bins of the whole-window spectrum used
        self._fast_keep = min(self._hi_bin // 2 + 4, self._n // 4)  # ... of the newest half window
        self._store_size = self._n + 8 * self._hop + 8192
        self._hum_lo_hz = MAINS_HZ * (1.0 - MAINS_TOLERANCE)
        self._hum_hi_hz = MAINS_HZ * (1.0 + MAINS_TOLERANCE)
        c, keep = _CHUNK_FRAMES, self._keep
        self._power = np.empty((c, keep))  # kept for _refine_single
        self._floor = np.empty((c, keep))
        # what one chunk's frames are measured into; views per chunk size in self._work
        self._work_arrays = (
            np.empty((c, self._n), dtype=np.float32), self._power, self._floor,
            np.empty(c), np.empty(c), np.empty(c), np.empty(c),  # f0, clarity, level, newest-quarter level
            np.empty(c, dtype=bool), np.empty(c, dtype=bool), np.empty(c, dtype=bool),  # clip, voiced, sustain
            np.empty((c, N_REPORTED)), np.empty(c), np.empty((c, EVIDENCE_MODES, 4)),  # H1..H8, odd/even, evidence
        )  # fmt: skip
        self._work: dict[int, tuple[NDArray[Any], ...]] = {}  # views of the work arrays per chunk size
        self.reset()
        if not _compiled:
            self._compile()

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
            frames = self._analyse(first, self._next_end, n_frames)
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

    def _analyse(self, first: int, first_end: int, n_frames: int) -> list[Frame]:
        """Frames for ``n_frames`` windows, the first at store index ``first`` and ending at ``first_end``."""
        out: list[Frame] = []
        for s in range(0, n_frames, _CHUNK_FRAMES):  # chunks that stay in cache
            c = min(_CHUNK_FRAMES, n_frames - s)
            ends = [first_end + self._hop * (s + i) for i in range(c)]
            out.extend(self._analyse_chunk(first + s * self._hop, ends))
        return out

    def _analyse_chunk(self, first: int, ends_l: list[int]) -> list[Frame]:
        """Frames for up to _CHUNK_FRAMES windows, the first at store index ``first``."""
        n, hop, c = self._n, self._hop, len(ends_l)
        work = self._work.get(c)
        if work is None:
            work = self._work[c] = tuple(a[:c] for a in self._work_arrays)
        (x32, power, floor, f0_a, clarity_a, level_a, fast_level_a, clip_a, voiced_a, sustain_a, harm_db_a,
         odd_even_a, evidence_a) = work  # fmt: skip
        # single precision: rounding noise ~1e-7 of the peak, far under any microphone's floor
        copy_frames(self._store, first, hop, x32)
        rect = scipy.fft.rfft(x32, axis=1, workers=1)
        rect_fast = scipy.fft.rfft(x32[:, n // 2 :], axis=1, workers=1)
        measure_frames(
            self._store, first, hop, n, rect, rect_fast, self._sr, self._lo_bin, self._hi_bin, self._fast_keep,
            self._limit_hz, self._fmin, self._fmax, self._hum_lo_hz, self._hum_hi_hz,
            power, floor, f0_a, clarity_a, level_a, fast_level_a, clip_a, voiced_a, sustain_a, harm_db_a,
            odd_even_a, evidence_a,
        )  # fmt: skip
        sr = self._sr
        half = n / 2.0
        out: list[Frame] = []
        update = self._monitor.update
        f0s = f0_a.tolist()
        voiced_l = voiced_a.tolist()
        sustain_l = sustain_a.tolist()
        harm_db = harm_db_a.tolist()
        oe = odd_even_a.tolist()
        evidence = evidence_a.tolist()
        fast_level = fast_level_a.tolist()
        clarity = clarity_a.tolist()
        level = level_a.tolist()
        clip = clip_a.tolist()
        prev = self._prev_f0
        jumped_run = self._jumped_run
        for i in range(c):
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
                    f0, h_db, oe_db = self._refine_single(rect[i], i, reading.mode * held)
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

    def _compile(self) -> None:
        """Run every compiled kernel once on a made-up frame, so that no first call stalls a live stream.

        numba compiles on first use (seconds, once per installation: the result is cached
        on disk) and loads from its cache on each process's first call (~0.3 s).
        """
        global _compiled
        t = np.arange(self._n + self._hop) / self._sr
        self._store = np.sin(2.0 * np.pi * 440.0 * t) * 0.1
        try:
            self._analyse_chunk(0, [self._n])
            self._refine_single(scipy.fft.rfft(self._store[: self._n].astype(np.float32)), 0, 880.0)
        finally:
            self.reset()  # the made-up frame leaves no trace
        _compiled = True

    def _refine_single(
        self, rect: NDArray[np.complex64], i: int, f_hz: float
    ) -> tuple[float | None, tuple[float, ...] | None, float | None]:
        """Refine frame ``i`` of the current chunk around ``f_hz``."""
        amp = np.empty(N_FIT_HARMONICS)
        f0, _ = refine_f0(
            rect, self._power[i], self._floor[i], f_hz, self._sr / self._n, self._n, self._limit_hz, amp, FIT_SNR_DB,
            CURVATURE_GAIN, CURVATURE_NOISE,
        )  # fmt: skip
        if not math.isfinite(f0):
            return None, None, None
        levels = np.empty(N_REPORTED)
        oe = balance_row(amp, levels)
        return f0, tuple(levels.tolist()), oe
