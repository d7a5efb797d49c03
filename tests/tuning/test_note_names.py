"""Note names: scientific pitch notation (C4 = middle C = MIDI 60).

Outside reference: librosa.note_to_midi / midi_to_note (same convention); MIDI 60 = middle C
and A4 = 69 are the MIDI standard's numbering (common practice).
"""

from __future__ import annotations

import librosa
import pytest
from hypothesis import given
from hypothesis import strategies as st

from bench.errors import SettingsError
from bench.tuning import note_name, parse_note, parse_pitch_class, pitch_class_name
from bench.tuning.notes import canonical_pitch_class


@pytest.mark.parametrize(
    ("text", "midi"),
    [
        ("C4", 60), ("A4", 69), ("a4", 69), ("C#4", 61), ("Db4", 61), ("C♯4", 61), ("D♭4", 61),
        ("db4", 61), ("Cb4", 59), ("B#3", 60), ("E#4", 65), ("Fb4", 64), ("C##4", 62), ("Cx4", 62),
        ("Ebb4", 62), ("C𝄪4", 62), ("E𝄫4", 62), ("C-1", 0), ("G9", 127), (" F5 ", 77), ("A0", 21),
        ("C8", 108), ("C−1", 0),
    ],
)
def test_parse_note(text: str, midi: int) -> None:
    assert parse_note(text) == midi


@pytest.mark.parametrize(
    "name",
    ["C4", "C#4", "Db4", "A4", "Bb3", "F#5", "Cb4", "B#3", "E#4", "C-1", "G9", "A0", "C8", "Eb2"],
)
def test_parse_note_agrees_with_librosa(name: str) -> None:
    # librosa.note_to_midi (PyPI) as an outside reference for the octave convention.
    assert parse_note(name) == int(librosa.note_to_midi(name))


@pytest.mark.parametrize("midi", range(0, 128))
def test_note_name_agrees_with_librosa(midi: int) -> None:
    # librosa spells sharps with '♯' when unicode=True; ASCII form with unicode=False.
    assert note_name(midi) == librosa.midi_to_note(midi, unicode=False)


def test_flats_spelling() -> None:
    assert [note_name(m, flats=True) for m in range(60, 72)] == [
        "C4", "Db4", "D4", "Eb4", "E4", "F4", "Gb4", "G4", "Ab4", "A4", "Bb4", "B4"]
    assert [note_name(m) for m in range(60, 72)] == [
        "C4", "C#4", "D4", "D#4", "E4", "F4", "F#4", "G4", "G#4", "A4", "A#4", "B4"]


@pytest.mark.parametrize(
    ("text", "pc"),
    [("C", 0), ("c", 0), ("F#", 6), ("Gb", 6), ("f♯", 6), ("B", 11), ("Cb", 11), ("B#", 0),
     ("bb", 10), ("Bbb", 9), ("Ax", 11), ("E♮", 4)],
)
def test_parse_pitch_class(text: str, pc: int) -> None:
    assert parse_pitch_class(text) == pc


def test_canonical_pitch_class_keeps_sharp_or_flat() -> None:
    assert canonical_pitch_class("bb") == "Bb"
    assert canonical_pitch_class("a#") == "A#"
    assert canonical_pitch_class("d♭") == "Db"
    assert canonical_pitch_class("B#") == "C"


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("H4", r"note 'H4' is not a note name; use a letter A-G"),
        ("C", r"note 'C' is not a note name"),
        ("C#", r"is not a note name"),
        ("4C", r"is not a note name"),
        ("C###4", r"is not a note name"),
        ("", r"note '' is not a note name"),
        ("Ab9", r"note 'Ab9' is outside the MIDI range; use a note from C-1 to G9"),
        ("Cb-1", r"outside the MIDI range"),
    ],
)
def test_parse_note_errors(text: str, match: str) -> None:
    with pytest.raises(SettingsError, match=match):
        parse_note(text)


@pytest.mark.parametrize("text", ["H", "C4", "#", "", "Cq"])
def test_parse_pitch_class_errors(text: str) -> None:
    with pytest.raises(SettingsError, match=r"is not a note name; use a letter A-G"):
        parse_pitch_class(text)


@given(st.integers(0, 127), st.booleans())
def test_note_round_trip(midi: int, flats: bool) -> None:
    assert parse_note(note_name(midi, flats)) == midi


@given(st.integers(0, 11), st.booleans())
def test_pitch_class_round_trip(pc: int, flats: bool) -> None:
    assert parse_pitch_class(pitch_class_name(pc, flats)) == pc


@given(
    st.sampled_from("CDEFGAB"),
    st.sampled_from(["", "#", "b", "##", "bb", "♯", "♭", "x"]),
    st.integers(0, 8),
    st.booleans(),
)
def test_any_spelling_round_trips_through_its_name(letter: str, acc: str, octave: int, lower: bool) -> None:
    text = f"{letter.lower() if lower else letter}{acc}{octave}"
    midi = parse_note(text)
    assert parse_note(note_name(midi)) == midi
    assert parse_note(note_name(midi, flats=True)) == midi
    assert parse_pitch_class(text[:-1]) == midi % 12
