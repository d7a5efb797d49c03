"""The held-note summary (``bench analyze`` and unattended logging) takes any frame sequence the
analyser could emit, odd values included, without raising: an exception there would detach the
summary from the engine for the rest of a session."""

from __future__ import annotations

import math

from hypothesis import given, settings
from hypothesis import strategies as st

from bench.heldnotes import MIN_NOTE_S, HeldNoteTracker
from bench.reading import make_reading
from bench.tuning import TuningSettings
from dsp.frame import Frame

S = TuningSettings()
odd_hz = st.one_of(
    st.none(),
    st.floats(min_value=20.0, max_value=5000.0),
    st.sampled_from([0.0, -1.0, math.inf, math.nan, 1e-9, 1e300]),
)
frames = st.lists(
    st.tuples(
        st.floats(min_value=0.0, max_value=0.2),  # time step, s
        odd_hz,  # f0_hz
        odd_hz,  # held_f0_hz
        st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.just(-math.inf)),  # level
        st.sampled_from([None, "steady", "weakening", "jumped"]),
        st.sampled_from([None, "overblown", "vented"]),
    ),
    max_size=120,
)


@given(frames)
@settings(max_examples=300, deadline=None)
def test_any_frame_sequence_gives_notes_without_raising(seq):
    tracker = HeldNoteTracker()
    notes = []
    t = 0.0
    for step, f0, held, level, register, jump in seq:
        t += step
        frame = Frame(time_s=t, ready_s=t + 0.04, f0_hz=f0, clarity=0.9, level_dbfs=level, clipped=False,
                      harmonics_db=None, odd_even_db=None, register=register, jump=jump, held_f0_hz=held)
        done = tracker.push(make_reading(frame, S))
        if done is not None:
            notes.append(done)
    last = tracker.finish()
    if last is not None:
        notes.append(last)
    for note in notes:
        assert note.duration_s >= MIN_NOTE_S
        assert "\n" not in note.describe()
