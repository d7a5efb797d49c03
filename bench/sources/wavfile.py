"""An audio file as an input: any format soundfile reads, mixed to mono, paced at real
time (against an injected clock) or handed out as fast as the engine takes it.

A file recorded at a rate the analyser does not take (below 16 kHz or above 96 kHz) is
resampled to 48 kHz on the way (soxr, streaming), so it goes through like any other.
"""

from __future__ import annotations

from pathlib import Path
from typing import Protocol

import numpy as np
from numpy.typing import NDArray

from bench.errors import AudioFileError
from bench.sources.base import (
    DEFAULT_BLOCK_SIZE,
    MAX_LAG_S,
    Clock,
    PacedBlocks,
    SystemClock,
    to_mono,
)

ANALYSIS_RATES_HZ = (16000, 96000)
"""Sample rates the analyser takes (``dsp.analyser.MIN_SAMPLE_RATE``..``MAX_SAMPLE_RATE``)."""
RESAMPLE_RATE_HZ = 48000
"""Rate a file outside :data:`ANALYSIS_RATES_HZ` is resampled to, Hz."""


class _FileInfo(Protocol):
    """What this module reads of ``soundfile.info`` (soundfile ships no type information)."""

    samplerate: int
    channels: int
    frames: int


class _OpenFile(Protocol):
    """What this module calls on a ``soundfile.SoundFile``."""

    def read(self, frames: int, dtype: str, always_2d: bool) -> NDArray[np.float32]: ...

    def close(self) -> None: ...


class _Resampler(Protocol):
    """What this module calls on a ``soxr.ResampleStream`` (soxr ships no type information)."""

    def resample_chunk(self, x: NDArray[np.float32], last: bool = False) -> NDArray[np.float32]: ...


class WavFileSource:
    """Play a sound file into the engine in blocks, as a microphone would.

    Parameters
    ----------
    path : Path
        Any file soundfile (libsndfile) reads: WAV, FLAC, OGG, AIFF...
    block_size : int >= 16, samples
        Samples per block, as for the microphone.
    realtime : bool
        True paces blocks at the file's sample rate against ``clock``; False hands them out
        as fast as :meth:`read` is called (offline logging).
    clock : Clock, optional
        Time source for pacing; the system clock by default. Tests inject
        :class:`~bench.sources.base.ManualClock` so nothing sleeps.

    Raises
    ------
    AudioFileError
        The file is missing, unreadable, or holds no samples (raised by :meth:`start`
        and by the constructor, which opens the file to learn its rate).
    """

    def __init__(
        self,
        path: Path | str,
        *,
        block_size: int = DEFAULT_BLOCK_SIZE,
        realtime: bool = True,
        clock: Clock | None = None,
    ) -> None:
        if block_size < 16:
            raise AudioFileError(f"block size {block_size} is too small; use 16 samples or more")
        self.path = Path(path)
        self.block_size = int(block_size)
        self.realtime = bool(realtime)
        info = _file_info(self.path)
        self.file_rate = int(info.samplerate)
        lo, hi = ANALYSIS_RATES_HZ
        self.resampled = not lo <= self.file_rate <= hi
        self.sample_rate = RESAMPLE_RATE_HZ if self.resampled else self.file_rate
        self._channels = int(info.channels)
        self._frames = int(info.frames)
        self.dropped_blocks = 0
        self.ended = False
        self.description = (
            f"file {self.path.name} ({self._frames / self.file_rate:.1f} s, {self._channels} ch, "
            f"{self.file_rate} Hz{f' resampled to {self.sample_rate} Hz' if self.resampled else ''}"
            f"{'' if realtime else ', fast'})"
        )
        self._pacer = PacedBlocks(
            self.sample_rate, self.block_size, realtime=realtime, clock=clock or SystemClock()
        )
        self._file: _OpenFile | None = None
        self._pending: NDArray[np.float32] | None = None
        self._resampler: _Resampler | None = None
        self._out = np.zeros(0, dtype=np.float32)
        self._eof = False

    def start(self) -> None:
        import soundfile as sf  # type: ignore[import-untyped]

        self.stop()
        try:
            self._file = sf.SoundFile(str(self.path))
        except (sf.LibsndfileError, RuntimeError, OSError) as exc:
            raise AudioFileError(f"cannot read audio file {self.path}: {exc}") from None
        self.ended = False
        self._pending = None
        self._out = np.zeros(0, dtype=np.float32)
        self._eof = False
        if self.resampled:
            import soxr  # type: ignore[import-untyped]

            self._resampler = soxr.ResampleStream(self.file_rate, self.sample_rate, 1, dtype="float32")
        self._pacer.start()

    def read(self, timeout_s: float) -> NDArray[np.float32] | None:
        file = self._file
        if file is None or self.ended:
            return None
        skip = self._pacer.overdue_blocks(MAX_LAG_S)
        if skip:  # the reader fell behind real time: lose input as a microphone would
            self._pending = None
            for _ in range(skip):
                lost = self._next_block(file)
                if lost is None:
                    break
                self.dropped_blocks += 1
                self._pacer.delivered(len(lost))
        if self._pending is None:
            self._pending = self._next_block(file)
            if self._pending is None:
                self.ended = True
                return None
        block = self._pending
        if not self._pacer.wait_due(len(block), timeout_s):
            return None
        self._pending = None
        self._pacer.delivered(len(block))
        return block

    def _next_block(self, file: _OpenFile) -> NDArray[np.float32] | None:
        """The next block of ``file`` at the output rate, or None at its end."""
        if self._resampler is None:
            data = file.read(self.block_size, dtype="float32", always_2d=True)
            return to_mono(data) if len(data) else None
        while len(self._out) < self.block_size and not self._eof:
            data = file.read(self.block_size, dtype="float32", always_2d=True)
            if len(data) == 0:
                self._eof = True
                more = self._resampler.resample_chunk(np.zeros(0, dtype=np.float32), last=True)
            else:
                more = self._resampler.resample_chunk(to_mono(data))
            self._out = np.concatenate([self._out, np.asarray(more, dtype=np.float32)])
        if len(self._out) == 0:
            return None
        block, self._out = self._out[: self.block_size], self._out[self.block_size :]
        return block

    def stop(self) -> None:
        if self._file is not None:
            f, self._file = self._file, None
            f.close()


def _file_info(path: Path) -> _FileInfo:
    """soundfile.info with one-line errors."""
    import soundfile as sf

    if not path.exists():
        raise AudioFileError(f"no such audio file: {path}")
    if path.is_dir():
        raise AudioFileError(f"{path} is a folder; give an audio file")
    try:
        info: _FileInfo = sf.info(str(path))
    except (sf.LibsndfileError, RuntimeError, OSError) as exc:
        raise AudioFileError(f"cannot read audio file {path}: {exc}") from None
    if info.frames <= 0:
        raise AudioFileError(f"audio file {path} holds no samples; record something first")
    return info
