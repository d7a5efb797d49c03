"""Analyse recordings: audio file -> frames -> frame log and held-note summary.

Reads in blocks, so memory does not grow with the file's length.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from bench.errors import AudioFileError
from bench.framelog import CsvFrameLog
from bench.heldnotes import HeldNote, HeldNoteTracker
from bench.tuning import TuningSettings, map_frequency

MIN_RATE_HZ = 16000
MAX_RATE_HZ = 96000
RESAMPLE_RATE_HZ = 48000
"""Files outside 16-96 kHz are resampled to this rate (Hz) before analysis."""
READ_BLOCK = 65536
"""Samples read from the file at a time."""


@dataclass(frozen=True, slots=True)
class FileAnalysis:
    """What ``analyse_file`` found in one file."""

    path: Path
    duration_s: float
    sample_rate: int  # of the file, Hz
    channels: int
    frames: int  # analysis frames
    voiced_frames: int
    notes: tuple[HeldNote, ...]
    warnings: tuple[str, ...]
    csv_path: Path | None
    clock_ppm: float | None = None  # the recording card's clock error applied, ppm


def _open(path: Path):  # type: ignore[no-untyped-def]
    import soundfile as sf

    if not path.exists():
        raise AudioFileError(f"{path}: no such file")
    if path.is_dir():
        raise AudioFileError(f"{path}: is a folder; give audio files")
    if path.stat().st_size == 0:
        raise AudioFileError(f"{path}: the file is empty (0 bytes)")
    try:
        f = sf.SoundFile(str(path))
    except (sf.LibsndfileError, RuntimeError, TypeError) as exc:
        msg = str(exc).split(":")[-1].strip().rstrip(".").lower() or "unknown format"
        raise AudioFileError(f"{path}: not readable as audio ({msg}); give WAV, FLAC or OGG") from None
    except OSError as exc:
        raise AudioFileError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    if f.frames == 0:
        f.close()
        raise AudioFileError(f"{path}: holds no audio samples")
    return f


MIN_SALVAGE_BLOCK = 256
"""Smallest read (samples) tried when a damaged file fails mid-read, to keep what decodes."""


def _wav_shortfall(path: Path, f) -> str | None:  # type: ignore[no-untyped-def]
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


def _blocks(f, warnings: list[str], counter: list[int]) -> Iterator[NDArray[np.float32]]:  # type: ignore[no-untyped-def]
    """Mono float32 blocks at the analysis rate; non-finite samples become silence.

    A read that fails mid-file (a cut-short or damaged file) is retried from the same place
    in smaller pieces, so the audio before the damage is kept. ``counter[0]`` counts the
    file's samples read.
    """
    resampler = None
    if not MIN_RATE_HZ <= f.samplerate <= MAX_RATE_HZ:
        import soxr

        resampler = soxr.ResampleStream(f.samplerate, RESAMPLE_RATE_HZ, 1, dtype="float32")
        warnings.append(f"resampled from {f.samplerate} Hz to {RESAMPLE_RATE_HZ} Hz")
    bad = 0
    size = READ_BLOCK
    first_reason = ""
    while True:
        pos = counter[0]
        try:
            block = f.read(size, dtype="float32", always_2d=True)
        except (RuntimeError, sf_error()) as exc:  # libsndfile error mid-file
            first_reason = first_reason or str(exc).replace("Error :", "").strip().rstrip(".")
            if size > MIN_SALVAGE_BLOCK:
                try:
                    f.seek(pos)
                    size = max(size // 4, MIN_SALVAGE_BLOCK)
                    continue
                except (RuntimeError, sf_error()):
                    pass
            reason = first_reason or "read error"
            warnings.append(
                f"stopped reading at {pos / f.samplerate:.2f} s of {f.frames / f.samplerate:.2f} s "
                f"({reason}): the file is cut short or damaged; analysed the part before"
            )
            break
        if len(block) == 0:
            break
        counter[0] = pos + len(block)
        mono = block.mean(axis=1, dtype=np.float64).astype(np.float32)
        finite = np.isfinite(mono)
        if not finite.all():
            bad += int((~finite).sum())
            mono[~finite] = 0.0
        if resampler is not None:
            mono = resampler.resample_chunk(mono)
        yield mono
    if resampler is not None:
        yield resampler.resample_chunk(np.zeros(0, np.float32), last=True)
    if bad:
        warnings.append(f"{bad} non-finite samples (NaN/Inf) replaced by silence")


def sf_error() -> type[Exception]:
    """soundfile's error class (LibsndfileError, a RuntimeError in soundfile >= 0.11)."""
    import soundfile as sf

    return getattr(sf, "LibsndfileError", RuntimeError)


def analyse_file(
    path: Path | str,
    settings: TuningSettings,
    *,
    csv_path: Path | None = None,
    locked_midi: int | None = None,
    progress: Callable[[float], None] | None = None,
    clock_ppm: float | None = None,
) -> FileAnalysis:
    """Analyse one audio file; write its frame log to ``csv_path`` when given.

    Parameters
    ----------
    path : path of a WAV/FLAC/OGG file, any channel count (mixed to mono), any rate
    settings : tuning settings the frames are mapped under
    csv_path : frame log to write (replaced if it exists), or None
    locked_midi : judge every frame against this note (MIDI number), or None
    progress : called with the fraction done, 0..1
    clock_ppm : error of the recording card's clock, ppm (``bench calibrate``): the analyser
        runs at the true rate ``nominal * (1 + ppm / 1e6)``, so every frequency is corrected

    Raises
    ------
    AudioFileError
        The file is missing, not audio, or empty.
    """
    from dsp.analyser import StreamingAnalyser

    path = Path(path)
    warnings: list[str] = []
    f = _open(path)
    with f:
        rate = f.samplerate if MIN_RATE_HZ <= f.samplerate <= MAX_RATE_HZ else RESAMPLE_RATE_HZ
        analyser = StreamingAnalyser(sample_rate=rate * (1.0 + clock_ppm * 1e-6) if clock_ppm else rate)
        if locked_midi is not None:
            from bench.tuning.mapping import target_hz_at_air

            analyser.lock(target_hz_at_air(locked_midi, settings))  # where it sounds in this air
        tracker = HeldNoteTracker()
        notes: list[HeldNote] = []
        log = CsvFrameLog(csv_path, overwrite=True, flush_interval_s=1.0, clock_ppm=clock_ppm) if csv_path else None
        n_frames = voiced = 0
        locked_note = None
        if locked_midi is not None:
            from bench.tuning.notes import note_name

            locked_note = note_name(locked_midi, settings.flats)
        shortfall = _wav_shortfall(path, f)
        if shortfall:
            warnings.append(shortfall)
        counter = [0]
        try:
            for block in _blocks(f, warnings, counter):
                for frame in analyser.process(block):
                    mapping = None
                    if frame.f0_hz is not None:
                        mapping = map_frequency(frame.f0_hz, settings, locked_midi)
                        voiced += 1
                    n_frames += 1
                    if log is not None:
                        log.write(frame, mapping, settings, locked_note)
                    done = tracker.push(frame, mapping, settings)
                    if done is not None:
                        notes.append(done)
                if progress is not None:
                    progress(min(counter[0] / f.frames, 1.0))
            last = tracker.finish()
            if last is not None:
                notes.append(last)
        finally:
            if log is not None:
                log.close()
        duration_s = counter[0] / f.samplerate  # what was read: less than promised if cut short
        if n_frames == 0 and not any(w.startswith("stopped reading") for w in warnings):
            warnings.append(
                f"too short to analyse: {counter[0]} samples ({duration_s * 1000:.1f} ms), "
                f"one frame needs {analyser.frame_size} samples"
            )
        return FileAnalysis(
            path, duration_s, f.samplerate, f.channels, n_frames, voiced,
            tuple(notes), tuple(warnings), csv_path, clock_ppm,
        )  # fmt: skip


class ProgressBar:
    """A one-line progress bar on a text stream (stderr), drawn only on a terminal."""

    def __init__(self, label: str, stream=None, width: int = 30) -> None:  # type: ignore[no-untyped-def]
        self.stream = stream or sys.stderr
        self.label = label
        self.width = width
        self.enabled = bool(getattr(self.stream, "isatty", lambda: False)())
        self._last = -1

    def __call__(self, fraction: float) -> None:
        if not self.enabled:
            return
        pct = int(100 * min(max(fraction, 0.0), 1.0))
        if pct == self._last:
            return
        self._last = pct
        filled = self.width * pct // 100
        bar = "#" * filled + "." * (self.width - filled)
        self.stream.write(f"\r{self.label} [{bar}] {pct:3d}%")
        self.stream.flush()

    def close(self) -> None:
        if self.enabled and self._last >= 0:
            self.stream.write("\r" + " " * (len(self.label) + self.width + 8) + "\r")
            self.stream.flush()


def format_summary(result: FileAnalysis, settings: TuningSettings) -> str:
    """The per-note summary a maker reads, as text."""
    lines = [
        f"{result.path}: {result.duration_s:.2f} s, {result.sample_rate} Hz, "
        f"{result.channels} ch; {result.voiced_frames} of {result.frames} frames voiced",
        f"  settings: {settings.temperament} on {settings.tonic}, A4 = {settings.a4_hz:.2f} Hz, "
        f"air {settings.temp_c:.1f} °C, cents corrected to {settings.ref_temp_c:.1f} °C"
        + (f", clock {result.clock_ppm:+.2f} ppm" if result.clock_ppm is not None else ""),
    ]
    lines += [f"  warning: {w}" for w in result.warnings]
    if result.notes:
        lines.append("     start   length  note    cents  spread     level  register events")
        lines += ["  " + n.describe() for n in result.notes]
    else:
        lines.append("  no held notes found")
    if result.csv_path is not None:
        lines.append(f"  frame log: {result.csv_path}")
    return "\n".join(lines)


def seconds(value: float) -> str:
    """Format seconds for messages."""
    return f"{value:.2f} s" if math.isfinite(value) else "?"
