"""Analyse recordings: the engine over a file read as fast as it goes, with the same consumers
as a live session.

``bench analyze FILE`` is the live chain with an unpaced :class:`~bench.sources.wavfile.WavFileSource`
in place of the microphone: the same analyser, mapping and :class:`~bench.reading.Reading`, the
same frame log, the same held notes, captures and register events as playing the recording
into the screen. Reads in blocks, so memory does not grow with the file's length.
"""

from __future__ import annotations

import math
import sys
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TextIO

from bench.engine import Engine, EngineEvent, ReadingConsumer
from bench.errors import LogError
from bench.heldnotes import HeldNote, HeldNoteCollector
from bench.reading import Reading
from bench.sources.wavfile import WavFileSource
from bench.tuning import TuningSettings
from bench.workflow.captures import Capture, captures_path_for
from bench.workflow.live import LiveWorkflow
from bench.workflow.profiles import InstrumentProfile

READ_BLOCK = 65536
"""Samples read from the file at a time."""
_PROGRESS_EVERY_S = 0.1  # how often the progress callback is called while the engine runs


@dataclass(frozen=True, slots=True)
class FileAnalysis:
    """What :func:`analyse_file` found in one file."""

    path: Path
    duration_s: float
    sample_rate: int  # of the file, Hz
    channels: int
    frames: int  # analysis frames
    voiced_frames: int
    notes: tuple[HeldNote, ...]
    warnings: tuple[str, ...]
    csv_path: Path | None
    captures: tuple[Capture, ...] = ()
    captures_path: Path | None = None
    clock_ppm: float | None = None  # the recording card's clock error applied, ppm


class _FrameCounter:
    """Counts readings (a consumer)."""

    def __init__(self) -> None:
        self.frames = 0
        self.voiced = 0

    def take(self, reading: Reading) -> None:
        self.frames += 1
        self.voiced += reading.voiced

    def close(self) -> None:
        """Nothing to close."""


def analyse_file(
    path: Path | str,
    settings: TuningSettings,
    *,
    csv_path: Path | None = None,
    locked_midi: int | None = None,
    progress: Callable[[float], None] | None = None,
    profile: InstrumentProfile | None = None,
    label: str = "",
    overwrite: bool = False,
    clock_ppm: float | None = None,
) -> FileAnalysis:
    """Analyse one audio file; write its frame log to ``csv_path`` (and its captures beside it,
    ``<stem>.captures.csv``) when given.

    Parameters
    ----------
    path : path of a WAV/FLAC/OGG file, any channel count (mixed to mono), any rate
    settings : tuning settings the frames are mapped under
    csv_path : frame log to write, or None
    locked_midi : judge every frame against this note (MIDI number), or None
    progress : called with the fraction done, 0..1, from the calling thread
    profile : instrument profile the captures are filed under (the alto if None)
    label : label put on the captures
    overwrite : replace an existing frame log at ``csv_path`` and the captures file beside it
    clock_ppm : error of the recording card's clock, ppm (``bench calibrate``): the analyser
        runs at the true rate ``nominal * (1 + ppm / 1e6)``, so every frequency is corrected

    Raises
    ------
    AudioFileError
        The file is missing, not audio, or empty.
    LogError
        The frame log or its captures file cannot be written.
    """
    path = Path(path)
    source = WavFileSource(path, block_size=READ_BLOCK, realtime=False)
    if csv_path is not None:
        side = captures_path_for(csv_path)
        if side.exists() or side.is_symlink():
            if not overwrite:
                raise LogError(f"{side} exists already (captures of an earlier analysis?); move it, or add --overwrite")
            side.unlink()  # a link goes, never the file it points to
    held = HeldNoteCollector()
    counter = _FrameCounter()
    workflow = LiveWorkflow(profile=profile, log_path=None, label=label, clock_ppm=clock_ppm) if csv_path is not None else None
    consumers: list[ReadingConsumer] = [held, counter]
    if workflow is not None:
        consumers.append(workflow)
    events: list[EngineEvent] = []
    engine = Engine(source, settings, log_path=csv_path, log_overwrite=overwrite, on_event=events.append,
                    consumers=consumers, clock_ppm=clock_ppm)  # fmt: skip
    if locked_midi is not None:
        engine.lock(locked_midi)
    engine.start()
    try:
        failed = [e.message for e in events if e.kind == "log_error"]  # said by start() itself
        if csv_path is not None and failed:
            raise LogError(failed[0].removesuffix("; measuring goes on without a log"))
        while not engine.join(_PROGRESS_EVERY_S):
            if progress is not None:
                progress(source.fraction_read)
    finally:
        engine.stop()
    if progress is not None:
        progress(1.0)
    warnings = list(source.warnings)
    warnings += [e.message for e in events if e.kind in ("source_error", "log_error", "consumer_error")]
    duration_s = source.samples_read / source.file_rate  # what was read: less than promised if cut short
    if counter.frames == 0 and not any(w.startswith("stopped reading") for w in warnings):
        from dsp.analyser import StreamingAnalyser

        frame_size = StreamingAnalyser(source.sample_rate).frame_size
        warnings.append(
            f"too short to analyse: {source.samples_read} samples ({duration_s * 1000:.1f} ms), "
            f"one frame needs {frame_size} samples"
        )
    captures = tuple(workflow.captures()) if workflow is not None else ()
    captures_path = workflow.captures_path if workflow is not None else None
    if workflow is not None and workflow.file_error is not None:
        raise LogError(f"captures of {path} not written: {workflow.file_error}")
    return FileAnalysis(
        path, duration_s, source.file_rate, source.channels, counter.frames, counter.voiced,
        tuple(held.notes), tuple(warnings), csv_path,
        captures, captures_path, clock_ppm,
    )  # fmt: skip


class ProgressBar:
    """A one-line progress bar on a text stream (stderr), drawn only on a terminal."""

    def __init__(self, label: str, stream: TextIO | None = None, width: int = 30) -> None:
        self.stream = stream or sys.stderr
        self.label = label
        self.width = width
        self.enabled = self.stream.isatty()
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
        (
            f"{result.path}: {result.duration_s:.2f} s, {result.sample_rate} Hz, "
            f"{result.channels} ch; {result.voiced_frames} of {result.frames} frames voiced"
        ),
        (
            f"  settings: {settings.temperament} on {settings.tonic}, A4 = {settings.a4_hz:.2f} Hz, "
            f"air {settings.temp_c:.1f} °C, cents corrected to {settings.ref_temp_c:.1f} °C"
            + (f", clock {result.clock_ppm:+.2f} ppm" if result.clock_ppm is not None else "")
        ),
    ]
    lines += [f"  warning: {w}" for w in result.warnings]
    if result.notes:
        lines.append("     start   length  note    cents  spread     level  register events")
        lines += ["  " + n.describe() for n in result.notes]
    else:
        lines.append("  no held notes found")
    if result.csv_path is not None:
        lines.append(f"  frame log: {result.csv_path}")
    if result.captures_path is not None:
        lines.append(f"  captures: {result.captures_path} ({len(result.captures)})")
    return "\n".join(lines)


def seconds(value: float) -> str:
    """Format seconds for messages."""
    return f"{value:.2f} s" if math.isfinite(value) else "?"
