"""Synthetic sessions for the workflow tests: dsp.synth renders, dsp.analyser (or the synth's
own truth) makes readings; each goes through a frame-log row and back
(``bench.framelog.frame_row`` then ``reading_from_row``), as a session log read later gives them."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from bench.framelog import EXTRA_COLUMNS, FRAME_LOG_COLUMNS, frame_row, reading_from_row
from bench.reading import Reading, make_reading
from bench.tuning import TuningSettings
from dsp.frame import Frame
from dsp.synth import NoteEvent, Rendering, render

SAMPLE_RATE = 48000
COLUMNS = (*FRAME_LOG_COLUMNS, *EXTRA_COLUMNS)


def equal_hz(midi: int, a4_hz: float = 440.0) -> float:
    """12-TET frequency (REFERENCES §1: f = A4 * 2**((m - 69) / 12))."""
    return a4_hz * 2.0 ** ((midi - 69) / 12)


def row_dict(frame: Frame, settings: TuningSettings) -> Reading:
    """A frame's reading after a trip through a frame-log row (all cells text) and back."""
    return reading_from_row(dict(zip(COLUMNS, frame_row(make_reading(frame, settings)), strict=True)))


def analyse(rendering: Rendering, settings: TuningSettings | None = None) -> list[Reading]:
    """Readings of a rendering through dsp.analyser.StreamingAnalyser (via frame-log rows)."""
    from dsp.analyser import StreamingAnalyser

    settings = settings or TuningSettings()
    an = StreamingAnalyser(int(rendering.sample_rate))
    return [row_dict(f, settings) for f in an.process(rendering.audio)]


def truth_rows(
    rendering: Rendering, settings: TuningSettings | None = None, hop_s: float = 0.005
) -> list[Reading]:
    """Readings made from the synth's exact truth (no analyser), every ``hop_s`` (via frame-log rows)."""
    settings = settings or TuningSettings()
    times = np.arange(0.0, rendering.score.duration_s, hop_s)
    tr = rendering.truth(times)
    rows = []
    for i, t in enumerate(times):
        voiced = bool(tr.voiced[i])
        reg = str(tr.register[i]) or None
        frame = Frame(
            time_s=float(t),
            ready_s=float(t),
            f0_hz=float(tr.sounding_f0_hz[i]) if voiced else None,
            clarity=1.0 if voiced else 0.0,
            level_dbfs=float(tr.level_dbfs[i]),
            clipped=False,
            harmonics_db=(0.0, -9.0, -15.5, -21.0, -26.0, -30.5, -35.0, -39.0) if voiced else None,
            odd_even_db=3.0 if voiced else None,
            register=reg if voiced else None,  # type: ignore[arg-type]
            jump=(str(tr.jump[i]) or None) if voiced else None,  # type: ignore[arg-type]
            held_f0_hz=float(tr.held_f0_hz[i]) if voiced else None,
        )
        rows.append(row_dict(frame, settings))
    return rows


def scale_events(
    midis: Sequence[int],
    offsets_cents: dict[int, float] | None = None,
    *,
    duration_s: float = 0.8,
    gap_s: float = 0.15,
    level_dbfs: float = -20.0,
    a4_hz: float = 440.0,
    second_register_from: int | None = None,
) -> list[NoteEvent]:
    """One note per MIDI number, each ``offsets_cents[m]`` off 12-TET (default in tune).

    Notes from ``second_register_from`` up are rendered in mode 2 (fingered an octave lower,
    sounding its octave), as a vented second-register note sounds.
    """
    offsets_cents = offsets_cents or {}
    events = []
    for m in midis:
        f = equal_hz(m, a4_hz) * 2.0 ** (offsets_cents.get(m, 0.0) / 1200.0)
        mode = 2 if second_register_from is not None and m >= second_register_from else 1
        events.append(NoteEvent(f / mode, duration_s, level_dbfs=level_dbfs, mode=mode, gap_s=gap_s))
    return events


def render_events(events: Sequence[NoteEvent], seed: int = 0) -> Rendering:
    return render(events, SAMPLE_RATE, seed=seed)


def cents_between(f_hz: float, ref_hz: float) -> float:
    """1200 log2(f / ref)."""
    return 1200.0 * math.log2(f_hz / ref_hz)
