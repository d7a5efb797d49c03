"""An audio file as an input: the one reader of recordings, for the live screen (paced at
real time against an injected clock) and for ``bench analyze`` (handed out as fast as the
engine takes it).

Any format soundfile (libsndfile) reads, any channel count (mixed to mono). A file recorded
at a rate the analyser does not take (outside :data:`dsp.rates.MIN_SAMPLE_RATE` ..
:data:`dsp.rates.MAX_SAMPLE_RATE`) is resampled to :data:`dsp.rates.RESAMPLE_RATE` on the way
(soxr, streaming). A damaged or cut-short file gives what decodes before the damage, with a
warning in :attr:`WavFileSource.warnings`; non-finite samples are read as silence.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

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
from dsp.rates import MAX_SAMPLE_RATE, MIN_SAMPLE_RATE, RESAMPLE_RATE

if TYPE_CHECKING:
    import soundfile
    import soxr

MIN_SALVAGE_BLOCK = 256
"""Smallest read (samples) tried when a damaged file fails mid-read, to keep what decodes."""


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
        as fast as :meth:`read` is called (``bench analyze``, offline logging).
    clock : Clock, optional
        Time source for pacing; the system clock by default. Tests inject
        :class:`~bench.sources.base.ManualClock` so nothing sleeps.

    Attributes
    ----------
    file_rate : int, Hz
        The file's own sample rate (``sample_rate`` is the rate handed out).
    channels : int
        The file's channel count.
    warnings : list of str
        What was wrong with the file and how it was read anyway (one line each).

    Raises
    ------
    AudioFileError
        The file is missing, a folder, empty, not audio, or holds no samples (raised by the
        constructor, which opens the file to learn its rate, and by :meth:`start`).
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
        f = _open_checked(self.path)
        with f:
            self.file_rate = int(f.samplerate)
            self.channels = int(f.channels)
            self.file_frames = int(f.frames)
        self.resampled = not MIN_SAMPLE_RATE <= self.file_rate <= MAX_SAMPLE_RATE
        self.sample_rate = RESAMPLE_RATE if self.resampled else self.file_rate
        self.dropped_blocks = 0
        self.input_latency_s = 0.0
        self.ended = False
        self.warnings: list[str] = []
        self.description = (
            f"file {self.path.name} ({self.file_frames / self.file_rate:.1f} s, {self.channels} ch, "
            f"{self.file_rate} Hz{f' resampled to {self.sample_rate} Hz' if self.resampled else ''}"
            f"{'' if realtime else ', fast'})"
        )
        self._pacer = PacedBlocks(
            self.sample_rate, self.block_size, realtime=realtime, clock=clock or SystemClock()
        )
        self._file: soundfile.SoundFile | None = None
        self._pending: NDArray[np.float32] | None = None
        self._resampler: soxr.ResampleStream | None = None
        self._out = np.zeros(0, dtype=np.float32)
        self._eof = False
        self._read_size = self.block_size
        self._first_failure = ""
        self._nonfinite = 0
        self.samples_read = 0
        """Samples of the file read so far (at the file's rate)."""

    @property
    def fraction_read(self) -> float:
        """Share of the file read so far, 0..1."""
        return min(self.samples_read / self.file_frames, 1.0) if self.file_frames else 1.0

    def start(self) -> None:
        self.stop()
        self._file = _open_checked(self.path)
        self.ended = False
        self._pending = None
        self._out = np.zeros(0, dtype=np.float32)
        self._eof = False
        self._read_size = self.block_size
        self.samples_read = 0
        self._nonfinite = 0
        self.warnings = []
        shortfall = _wav_shortfall(self.path, self._file)
        if shortfall:
            self.warnings.append(shortfall)
        self._resampler = None
        if self.resampled:
            import soxr

            self._resampler = soxr.ResampleStream(self.file_rate, self.sample_rate, 1, dtype="float32")
            self.warnings.append(f"resampled from {self.file_rate} Hz to {self.sample_rate} Hz")
        self._pacer.start()

    def read(self, timeout_s: float) -> NDArray[np.float32] | None:
        if self._file is None or self.ended:
            return None
        skip = self._pacer.overdue_blocks(MAX_LAG_S)
        if skip:  # the reader fell behind real time: lose input as a microphone would
            self._pending = None
            for _ in range(skip):
                lost = self._next_block()
                if lost is None:
                    break
                self.dropped_blocks += 1
                self._pacer.delivered(len(lost))
        if self._pending is None:
            self._pending = self._next_block()
            if self._pending is None:
                self._end()
                return None
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

    # -- reading ------------------------------------------------------------------------------

    def _end(self) -> None:
        self.ended = True
        if self._nonfinite:
            self.warnings.append(f"{self._nonfinite} non-finite samples (NaN/Inf) replaced by silence")

    def _read_file(self) -> NDArray[np.float32] | None:
        """The next mono block at the file's rate; None at its end (or at damage that no
        smaller read gets past: what came before is kept, with a warning)."""
        import soundfile as sf

        f = self._file
        assert f is not None
        while True:
            pos = self.samples_read
            try:
                data = f.read(self._read_size, dtype="float32", always_2d=True)
            except (RuntimeError, sf.LibsndfileError) as exc:  # libsndfile error mid-file
                reason = str(exc).replace("Error :", "").strip().rstrip(".")
                self._first_failure = self._first_failure or reason
                if self._read_size > MIN_SALVAGE_BLOCK:
                    try:
                        f.seek(pos)
                        self._read_size = max(self._read_size // 4, MIN_SALVAGE_BLOCK)
                        continue
                    except (RuntimeError, sf.LibsndfileError):
                        pass
                self.warnings.append(
                    f"stopped reading at {pos / self.file_rate:.2f} s of {self.file_frames / self.file_rate:.2f} s "
                    f"({self._first_failure or 'read error'}): the file is cut short or damaged; "
                    "analysed the part before"
                )
                return None
            if len(data) == 0:
                return None
            self.samples_read = pos + len(data)
            mono = to_mono(data)
            finite = np.isfinite(mono)
            if not finite.all():
                self._nonfinite += int((~finite).sum())
                mono[~finite] = 0.0
            return mono

    def _next_block(self) -> NDArray[np.float32] | None:
        """The next block at the output rate, or None at the end of the file."""
        if self._resampler is None:
            return self._read_file()
        while len(self._out) < self.block_size and not self._eof:
            data = self._read_file()
            if data is None:
                self._eof = True
                more = self._resampler.resample_chunk(np.zeros(0, dtype=np.float32), last=True)
            else:
                more = self._resampler.resample_chunk(data)
            self._out = np.concatenate([self._out, np.asarray(more, dtype=np.float32)])
        if len(self._out) == 0:
            return None
        block, self._out = self._out[: self.block_size], self._out[self.block_size :]
        return block


def _open_checked(path: Path) -> soundfile.SoundFile:
    """Open an audio file for reading, with one-line errors that say what to do."""
    import soundfile as sf

    if not path.exists():
        raise AudioFileError(f"{path}: no such file")
    if path.is_dir():
        raise AudioFileError(f"{path}: is a folder; give audio files")
    if path.is_file() and path.stat().st_size == 0:
        raise AudioFileError(f"{path}: the file is empty (0 bytes)")
    try:
        f = sf.SoundFile(str(path))
    except (sf.LibsndfileError, RuntimeError, TypeError) as exc:
        msg = str(exc).split(":")[-1].strip().rstrip(".").lower() or "unknown format"
        raise AudioFileError(f"{path}: not readable as audio ({msg}); give WAV, FLAC or OGG") from None
    except OSError as exc:
        raise AudioFileError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    if f.frames <= 0:
        f.close()
        raise AudioFileError(f"{path}: holds no audio samples")
    return f


def _wav_shortfall(path: Path, f: soundfile.SoundFile) -> str | None:
    """For a RIFF/WAVE file whose data chunk promises more bytes than the file holds, a warning."""
    if f.format not in ("WAV", "WAVEX"):
        return None
    try:
        with open(path, "rb") as raw:
            head = raw.read(12)
            if len(head) < 12 or head[:4] != b"RIFF" or head[8:12] != b"WAVE":
                return None
            while True:
                chunk = raw.read(8)
                if len(chunk) < 8:
                    return None
                size = int.from_bytes(chunk[4:], "little")
                if chunk[:4] == b"data":
                    held = path.stat().st_size - raw.tell()
                    break
                raw.seek(size + (size & 1), 1)
    except OSError:
        return None
    if held >= size:
        return None
    return (
        f"cut short: the header promises {size} bytes of samples, the file holds {max(held, 0)} "
        f"(a half-copied recording? copy it again); analysed what is there"
    )
