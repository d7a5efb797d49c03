"""A cracked attack through the whole chain: event list, frame log, held notes, captures.

The signal is the synthetic duct flute (dsp/synth.py), whose truth is exact: G4 fingered
(392.00 Hz; MIDI 67 in f = 440 * 2^((m - 69)/12), A4 = 440 Hz: /work/shared/REFERENCES.md
section 1) that speaks its octave, G5 (783.99 Hz), for its first 50 ms and then its
fundamental (mode 2 -> 1, a crossfade of 30 ms centred 50 ms into the note). A cracked
attack is no break of the breath (common practice): the note is the fundamental, captured and
charted as such, never as broken.
"""

from __future__ import annotations

from pathlib import Path

import soundfile as sf

from bench.engine import Engine, EngineEvent
from bench.framelog import iter_readings
from bench.heldnotes import HeldNoteCollector
from bench.sources.wavfile import WavFileSource
from bench.tuning import TuningSettings
from bench.workflow.live import LiveWorkflow
from dsp.synth import NoteEvent, render

RATE = 48000
G4_HZ = 391.995  # A4 = 440 Hz equal temperament (REFERENCES section 1)


def _cracked_g4(tmp_path: Path) -> Path:
    # mode 2 at the start, mode 1 after the change at 50 ms; the synth names every change
    # "overblown" or "vented": "vented" (level kept) is only the synth's label here
    note = NoteEvent(G4_HZ, 1.6, level_dbfs=-20.0, mode=2, jump_at_s=0.05, jump_kind="vented", jump_mode=1,
                     chiff=False, gap_s=0.3)  # fmt: skip
    path = tmp_path / "cracked.wav"
    sf.write(path, render([NoteEvent(G4_HZ, 0.1, gap_s=0.3, level_dbfs=-90.0, chiff=False), note], RATE, seed=1001).audio,
             RATE, subtype="FLOAT")  # fmt: skip
    return path


def test_a_cracked_attack_is_an_event_a_log_entry_and_no_broken_capture(tmp_path):
    events: list[EngineEvent] = []
    log = tmp_path / "session.csv"
    held = HeldNoteCollector()
    workflow = LiveWorkflow(log_path=log)
    engine = Engine(WavFileSource(_cracked_g4(tmp_path), realtime=False), TuningSettings(), log_path=log,
                    on_event=events.append, consumers=[held, workflow])  # fmt: skip
    engine.start()
    assert engine.join(60.0)
    engine.stop()
    workflow.close()

    # the live event list: one line naming the fingered note and what it spoke first
    jumps = [e.message for e in events if e.kind == "jump"]
    assert jumps == ["G4 cracked attack: spoke G5 first"]

    # the frame log reads back with the mark, on steady first-register frames of G4
    rows = [r for r in iter_readings(log) if r.jump == "cracked"]
    assert rows
    assert all(r.register_state == "steady" and r.held_note == "G4" for r in rows)

    # held notes: one G4 with its cracked attack, no break
    notes = [n for n in held.notes if n.note == "G4"]
    assert len(notes) == 1
    assert [e.kind for e in notes[0].events] == ["cracked"]

    # captures: of the settled fundamental, not broken, none of G5
    caps = workflow.captures()
    assert caps
    assert all(c.note == "G4" and c.jump == "" and c.mode in (None, 1) for c in caps)
    assert all(abs(c.f0_hz - G4_HZ) < G4_HZ * (2 ** (50 / 1200) - 1) for c in caps)
    assert workflow.last_break() is None  # no breath limit taken from it
