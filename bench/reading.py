"""What the engine publishes to the screen for every analysis frame."""

from __future__ import annotations

from dataclasses import dataclass

from bench.tuning import NoteMapping, TuningSettings
from dsp.frame import Frame


@dataclass(frozen=True, slots=True)
class Reading:
    """The newest measurement, with the settings it was mapped under.

    Attributes
    ----------
    frame : Frame
        The analyser's output.
    mapping : NoteMapping or None
        Note, target and cents; None when unvoiced.
    settings : TuningSettings
        Settings in force when the frame was measured.
    locked_midi : int or None
        Target note the user locked, if any.
    stream_time_s : float, seconds
        Input time of the frame (same clock as ``frame.time_s``).
    dropped_blocks : int
        Input blocks lost so far (overflows and full buffer).
    log_path : str or None
        File the session log is being written to; None when logging is off.
    """

    frame: Frame
    mapping: NoteMapping | None
    settings: TuningSettings
    locked_midi: int | None
    stream_time_s: float
    dropped_blocks: int
    log_path: str | None
