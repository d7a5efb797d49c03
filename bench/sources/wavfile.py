"""An audio file as an input: any format soundfile reads, mixed to mono, paced at real
time (against an injected clock) or handed out as fast as the engine takes it."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bench.errors import AudioFileError
from bench.sources.base import DEFAULT_BLOCK_SIZE, MAX_LAG_S, Clock, PacedBlocks, SystemClock, to_mono


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
        self.sample_rate = int(info.samplerate)
        self._channels = int(info.channels)
        self._frames = int(info.frames)
        self.dropped_blocks = 0
        self.ended = False
        self.description = (
            f"file {self.path.name} ({self._frames / self.sample_rate:.1f} s, "
            f"{self._channels} ch, {self.sample_rate} Hz{'' if realtime else ', fast'})"
        )
        self._pacer = PacedBlocks(
            self.sample_rate, self.block_size, realtime=realtime, clock=clock or SystemClock()
        )
        self._file = None
        self._pending: NDArray[np.float32] | None = None

    def start(self) -> None:
        import soundfile as sf

        self.stop()
        try:
            self._file = sf.SoundFile(str(self.path))
        except (sf.LibsndfileError, RuntimeError, OSError) as exc:
            raise AudioFileError(f"cannot read audio file {self.path}: {exc}") from None
        self.ended = False
        self._pending = None
        self._pacer.start()

    def read(self, timeout_s: float) -> NDArray[np.float32] | None:
        if self._file is None or self.ended:
            return None
        skip = self._pacer.overdue_blocks(MAX_LAG_S)
        if skip:  # the reader fell behind real time: lose input as a microphone would
            self._pending = None
            skipped = len(self._file.read(skip * self.block_size, dtype="float32", always_2d=True))
            self.dropped_blocks += skip
            self._pacer.delivered(skipped)
        if self._pending is None:
            data = self._file.read(self.block_size, dtype="float32", always_2d=True)
            if len(data) == 0:
                self.ended = True
                return None
            self._pending = to_mono(data)
        block = self._pending
        if not self._pacer.wait_due(len(block), timeout_s):
            return None
        self._pending = None
        self._pacer.delivered(len(block))
        return block

    def stop(self) -> None:
        if self._file is not None:
            f, self._file = self._file, None
            f.close()


def _file_info(path: Path) -> Any:
    """soundfile.info with one-line errors."""
    import soundfile as sf

    if not path.exists():
        raise AudioFileError(f"no such audio file: {path}")
    if path.is_dir():
        raise AudioFileError(f"{path} is a folder; give an audio file")
    try:
        info = sf.info(str(path))
    except (sf.LibsndfileError, RuntimeError, OSError) as exc:
        raise AudioFileError(f"cannot read audio file {path}: {exc}") from None
    if info.frames <= 0:
        raise AudioFileError(f"audio file {path} holds no samples; record something first")
    return info
