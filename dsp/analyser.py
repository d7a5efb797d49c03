"""The streaming analyser: pitch, level, harmonic balance and register, one Frame per hop.

Contract other modules code against::

    an = StreamingAnalyser(sample_rate=48000)        # any rate 16-96 kHz
    an.frame_size, an.hop_size, an.sample_rate       # samples; hop <= 10 ms
    frames: list[Frame] = an.process(block)          # block: 1-D float array, any length
    an.lock(target_hz)                               # judge register against this note; None releases
    an.reset()                                       # back to the state after construction

Per hop, for all the hops a block completes at once, one compiled call per chunk of up to 32
frames (:mod:`dsp.chunk`): one real FFT of the newest ``frame_size`` samples (~85 ms); Hann
spectra, coarse and refined f0 (:mod:`dsp.pitch`), voicing, level, clipping, H1..H8 and
odd/even balance, and the register evidence (:mod:`dsp.measure`). The register monitor
(:mod:`dsp.register`) is fed the newest half window's powers at the held note's harmonics
(read out of the same FFT) and the level of the newest quarter window; a sounding note stays
voiced on weaker evidence (hysteresis). Once a jump is past a frame's centre and the window
still shows the held note (reverberation), the frame's pitch is measured on the harmonics of
mode x held note. A reading ends with the note: once the direct sound has stopped by a
frame's centre, its reverberant tail is no longer voiced (:mod:`dsp.voicing`). Python only
checks the block and builds the Frames.

Known limits: the window's smoothing of a vibrato is taken out only to second order (a 40-cent,
7 Hz vibrato still reads ~0.35 cent off in the median) and not at all below 12 bins of f0
(~140 Hz at 48 kHz). ready_s - time_s is half a window (43 ms at 48 kHz): after a register
change the track reads the new pitch from frames centred ~9 ms past it, which are ready ~52 ms
after it; the jump itself is flagged sooner (~25 ms by ready_s), from the newest half window.

Timing: a frame measures the ``frame_size`` samples ending at sample ``e`` (exclusive);
``time_s = (e - frame_size / 2) / sample_rate`` (the centre of the symmetric window) and
``ready_s = e / sample_rate``, counted from the first sample fed since construction or
:meth:`StreamingAnalyser.reset`. The first frame comes once ``frame_size`` samples are in.
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from dsp.chunk import (
    CARRY_JUMPED_RUN,
    CARRY_PREV_F0,
    N_OUT,
    O_CLARITY,
    O_CLIP,
    O_F0,
    O_H1,
    O_HELD,
    O_JUMP,
    O_LEVEL,
    O_ODD_EVEN,
    O_REGISTER,
    analyse_chunk,
    chunk_params,
    store_block,
)
from dsp.frame import Frame
from dsp.measure import MAINS_HZ, MAINS_TOLERANCE
from dsp.rates import MAX_SAMPLE_RATE, MIN_SAMPLE_RATE
from dsp.register import JUMP_NAMES, REGISTER_NAMES, RegisterMonitor
from dsp.spectrum import newest_half_taps
from dsp.voicing import N_VOICING_STATE, voicing_reset

__all__ = ["FMAX_HZ", "FMIN_HZ", "MAX_SAMPLE_RATE", "MIN_SAMPLE_RATE", "StreamingAnalyser", "prepare_kernels"]

FMIN_HZ = 60.0
"""Lowest fundamental reported, Hz."""
FMAX_HZ = 4500.0
"""Highest fundamental reported, Hz."""

_HOLD_CENTS = 50.0  # a sustained frame must stay within this of the previous voiced f0
_PEAK_LIMIT_HZ = 10000.0
_CHUNK_FRAMES = 32
_F32, _F64 = np.dtype(np.float32), np.dtype(np.float64)
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
    sample_rate : float, 16000..96000, Hz (a calibrated input's true rate may be fractional)
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
        sample_rate: float = 48000,
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
            frame_size = max(2048, 1 << round(math.log2(0.085 * sr)))
        if int(frame_size) != frame_size or frame_size % 2 or frame_size < 5 * sr / fmin_hz / 2:
            raise ValueError(
                f"frame_size {frame_size} cannot hold 2.5 periods of {fmin_hz} Hz at {sr:g} Hz; "
                f"use an even frame_size >= {int(math.ceil(2.5 * sr / fmin_hz / 2) * 2)}"
            )
        max_hop = int(0.010 * sr)
        if hop_size is None:
            hop_size = round(0.005 * sr)
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
        self._monitor = RegisterMonitor(self._hop / sr, **register_options)
        self._override_frames = math.ceil(self._n / 4 / self._hop)

        df = sr / self._n
        n_bins = self._n // 2 + 1
        self._limit_hz = min(_PEAK_LIMIT_HZ, 0.45 * sr)
        self._lo_bin = max(2, math.floor(0.9 * fmin_hz / df))
        self._hi_bin = min(n_bins - 3, math.ceil(self._limit_hz / df))
        self._keep = min(self._hi_bin + 4, self._n // 2)  # bins of the whole-window spectrum used
        self._fast_keep = min(self._hi_bin // 2 + 4, self._n // 4)  # ... of the newest half window
        self._store_size = self._n + 8 * self._hop + 8192
        self._hum_hz = np.stack([MAINS_HZ * (1.0 - MAINS_TOLERANCE), MAINS_HZ * (1.0 + MAINS_TOLERANCE)])
        self._params = chunk_params(
            sr, self._lo_bin, self._hi_bin, self._fast_keep, self._limit_hz, self._fmin, self._fmax,
            self._override_frames, _HOLD_CENTS,
        )  # fmt: skip
        self._half_taps = newest_half_taps(self._n)
        self._carry = np.empty(2)
        self._voicing = np.empty(N_VOICING_STATE)  # end-of-note state (dsp.voicing)
        c = _CHUNK_FRAMES
        # what one chunk's frames are measured into; views per chunk size in self._work
        self._work_arrays = (
            np.empty((c, self._n), dtype=np.float32), np.empty((c, self._keep)), np.empty((c, self._keep)),
            np.empty((c, N_OUT)),
        )  # fmt: skip
        self._work: dict[int, tuple[NDArray[np.generic], ...]] = {}  # views of the work arrays per chunk size
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
        return self._store[max(self._next_end - self._n - self._store_start, 0) : self._fill]

    def reset(self) -> None:
        """Back to the state after construction (input clock restarts at 0; lock kept off)."""
        self._store = np.zeros(self._store_size, dtype=np.float64)
        self._fill = 0  # samples held in self._store
        self._store_start = 0  # absolute index of self._store[0]
        self._n_in = 0
        self._next_end = self._n
        self._carry[CARRY_PREV_F0] = math.nan
        self._carry[CARRY_JUMPED_RUN] = 0.0
        voicing_reset(self._voicing)
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
        if x.dtype not in (_F32, _F64) or not x.flags.c_contiguous:
            x = np.ascontiguousarray(x, dtype=np.float64)
        if self._fill + n_new > self._store.size:
            self._compact(n_new)
        fill = self._fill
        bad = store_block(self._store, fill, x)  # copies, and finds the first non-finite sample
        if bad >= 0:
            raise ValueError(f"block holds {x[bad]} at sample {bad}; pass finite samples")
        self._fill = fill + n_new
        self._n_in += n_new
        frames: list[Frame] = []
        if self._next_end <= self._n_in:
            hop = self._hop
            n_frames = (self._n_in - self._next_end) // hop + 1
            first = self._next_end - self._n - self._store_start  # store index of frame 0
            frames = self._analyse(first, self._next_end, n_frames)
            self._next_end += hop * n_frames
        if self._store.size > 4 * self._store_size:
            self._compact(0)  # one long block made the store large: give the memory back
        return frames

    def _compact(self, n_new: int) -> None:
        """Move the samples still needed (from the next frame's first on) to the store's start.

        Grows the store when they and ``n_new`` more do not fit; shrinks it back to its
        usual size when they fit in that. Called only when the store is full (or too large),
        so that most blocks cost no move.
        """
        keep_from = max(self._next_end - self._n - self._store_start, 0)
        live = self._fill - keep_from
        need = live + n_new
        store = self._store
        if need > store.size:
            store = np.empty(max(2 * store.size, need), dtype=np.float64)
        elif store.size > 4 * self._store_size and need <= self._store_size:
            store = np.empty(self._store_size, dtype=np.float64)
        store[:live] = self._store[keep_from : self._fill]
        self._store = store
        self._store_start += keep_from
        self._fill = live

    # -- analysis -------------------------------------------------------------------------

    def _analyse(self, first: int, first_end: int, n_frames: int) -> list[Frame]:
        """Frames for ``n_frames`` windows, the first at store index ``first`` and ending at ``first_end``."""
        if n_frames <= _CHUNK_FRAMES:
            return self._analyse_chunk(first, first_end, n_frames)
        out: list[Frame] = []
        hop = self._hop
        for s in range(0, n_frames, _CHUNK_FRAMES):  # chunks that stay in cache
            out.extend(self._analyse_chunk(first + s * hop, first_end + s * hop, min(_CHUNK_FRAMES, n_frames - s)))
        return out

    def _analyse_chunk(self, first: int, first_end: int, c: int) -> list[Frame]:
        """Frames for ``c <= _CHUNK_FRAMES`` windows, the first at store index ``first`` ending at ``first_end``."""
        work = self._work.get(c)
        if work is None:
            x32, power, floor, out = (a[:c] for a in self._work_arrays)
            work = self._work[c] = (
                x32, power, floor, self._params, self._hum_hz, *self._half_taps, *self._monitor.arrays, self._carry, self._voicing, out,
            )  # fmt: skip
        analyse_chunk(self._store, first, self._hop, *work)
        sr = self._sr
        hop = self._hop
        e = first_end - hop
        half = self._n / 2.0
        frames: list[Frame] = []
        append = frames.append
        isnan = math.isnan
        for row in work[-1].tolist():
            e += hop
            f0 = row[O_F0]
            held = row[O_HELD]
            if not isnan(f0):  # voiced
                append(
                    Frame(
                        (e - half) / sr, e / sr, f0, row[O_CLARITY], row[O_LEVEL], row[O_CLIP] != 0.0, tuple(row[O_H1:]),
                        row[O_ODD_EVEN], REGISTER_NAMES[int(row[O_REGISTER])], JUMP_NAMES[int(row[O_JUMP])],
                        None if isnan(held) else held,
                    )
                )  # fmt: skip
            else:
                append(
                    Frame(
                        (e - half) / sr, e / sr, None, row[O_CLARITY], row[O_LEVEL], row[O_CLIP] != 0.0, None, None,
                        None, None, None if isnan(held) else held,
                    )
                )  # fmt: skip
        return frames

    def _compile(self) -> None:
        """Run the compiled pass once on a made-up frame, so that no first call stalls a live stream.

        numba compiles on first use (seconds, once per installation: the result is cached
        on disk) and loads from its cache on each process's first call (~0.3 s).
        """
        global _compiled
        t = np.arange(self._n + 8 * self._hop) / self._sr
        self._store = np.sin(2.0 * np.pi * 440.0 * t) * 0.1
        try:
            for dtype in (_F32, _F64):  # the live input's samples and any other float's
                store_block(np.empty(4), 0, np.zeros(4, dtype=dtype))
            self._analyse_chunk(0, self._n, 8)
        finally:
            self.reset()  # the made-up frames leave no trace
        _compiled = True
