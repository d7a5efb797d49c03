"""Instrument profiles against the recorder family's published/common-practice compass."""

from __future__ import annotations

import librosa
import pytest

from bench.errors import SettingsError
from bench.tuning.notes import note_name
from bench.workflow.profiles import (
    FAMILY,
    get_profile,
    guess_profile,
    load_profile_file,
)

# REFERENCES §5 (common practice): lowest note, its Hz at A4 = 440 and the ideal L_eff = c/2f
# at 343.2 m/s.
FAMILY_TABLE = [
    ("sopranino", "F5", 698.456, 0.246),
    ("soprano", "C5", 523.251, 0.328),
    ("alto", "F4", 349.228, 0.491),
    ("tenor", "C4", 261.626, 0.656),
    ("bass", "F3", 174.614, 0.983),
    ("great-bass", "C3", 130.813, 1.312),
    ("contrabass", "F2", 87.307, 1.966),
    ("sub-great-bass", "C2", 65.406, 2.624),
]


@pytest.mark.parametrize(("name", "lowest", "lowest_hz", "l_eff_m"), FAMILY_TABLE)
def test_family_lowest_note_matches_references(name, lowest, lowest_hz, l_eff_m):
    p = get_profile(name)
    assert note_name(p.lowest_midi) == lowest
    # REFERENCES §5 table, 3 decimals
    assert p.lowest_hz == pytest.approx(lowest_hz, abs=6e-4)
    # librosa's note_to_hz (12-TET, A4 = 440) as an outside reference
    assert p.lowest_hz == pytest.approx(float(librosa.note_to_hz(lowest)), rel=1e-9)
    assert 343.2 / (2 * p.lowest_hz) == pytest.approx(l_eff_m, abs=6e-4)


@pytest.mark.parametrize("name", list(FAMILY))
def test_compass_is_two_octaves_and_a_tone(name):
    # REFERENCES §5: compass about two octaves and a tone (common practice)
    p = get_profile(name)
    assert p.highest_midi - p.lowest_midi == 2 * 12 + 2
    assert len(p.notes()) == 27


def test_alto_compass_f4_to_g6():
    # REFERENCES §5: alto F4-G6 (common practice)
    p = get_profile("alto")
    assert (note_name(p.lowest_midi), note_name(p.highest_midi)) == ("F4", "G6")


def test_family_order_and_intervals():
    # Each size is a fifth or a fourth from its neighbour (F/C alternation; common practice)
    lows = [FAMILY[n].lowest_midi for n in FAMILY]
    steps = [a - b for a, b in zip(lows, lows[1:])]
    assert steps == [5, 7, 5, 7, 5, 7, 5]


@pytest.mark.parametrize("name", list(FAMILY))
def test_every_note_in_exactly_one_register_and_registers_rise(name):
    p = get_profile(name)
    regs = [p.register_of(m) for m in p.notes()]
    assert regs == sorted(regs)
    assert set(regs) == {1, 2, 3}
    together = sorted(m for r in (1, 2, 3) for m in p.notes_in_register(r))
    assert together == p.notes()


def test_register_split_soprano():
    # from memory (common practice): first register C5-D6 (the ninth), thumb-vented second
    # register from D#6, third register from the double octave C7.
    p = get_profile("soprano")
    assert note_name(p.notes_in_register(1)[0]) == "C5"
    assert note_name(p.notes_in_register(1)[-1]) == "D6"
    assert note_name(p.notes_in_register(2)[0]) == "D#6"
    assert note_name(p.notes_in_register(3)[0]) == "C7"


@pytest.mark.parametrize(
    ("name", "sounding", "written"),
    [
        # common practice, from memory: soprano and sopranino sound an octave above written,
        # bass sounds an octave above its bass-clef part, alto and tenor at pitch.
        ("soprano", "C5", "C4"),
        ("sopranino", "F5", "F4"),
        ("alto", "F4", "F4"),
        ("tenor", "C4", "C4"),
        ("bass", "F3", "F2"),
    ],
)
def test_display_transposition(name, sounding, written):
    from bench.tuning.notes import parse_note

    assert get_profile(name).written_name(parse_note(sounding)) == written


def test_guess_profile():
    from bench.tuning.notes import parse_note

    assert guess_profile([parse_note(n) for n in ("F4", "G4", "A4", "C5")]).name == "alto"
    assert guess_profile([parse_note(n) for n in ("C5", "D5", "E5", "D7")]).name == "soprano"
    assert guess_profile([]).name == "alto"


def test_unknown_profile_name():
    with pytest.raises(SettingsError, match=r"profile 'oboe' is unknown; use one of sopranino"):
        get_profile("oboe")


GOOD = """\
# Hollin Lane Flute Works
[instrument]
name = "wren-alto"
title = "Wren alto in F"
lowest = "F4"
highest = "A6"
registers = ["F4", "A5", "F6"]
written_offset_semitones = 0
clef = "treble"
missing = ["G#6"]
"""


def test_custom_profile_file(tmp_path):
    path = tmp_path / "wren.toml"
    path.write_text(GOOD, encoding="utf-8")
    p = get_profile(str(path))
    assert p.name == "wren-alto" and p.title == "Wren alto in F"
    assert note_name(p.highest_midi) == "A6"
    assert [note_name(s) for s in p.register_starts] == ["F4", "A5", "F6"]
    assert not p.has_note(92) and 92 not in p.notes()  # G#6 missing
    assert p.register_of(80) == 1 and p.register_of(81) == 2
    assert p.source == str(path)


@pytest.mark.parametrize(
    ("text", "line", "pattern"),
    [
        ('[instrument]\nname = "x"\nlowest = F4\n', 3, r"not valid TOML"),
        ('[instrument]\nname = "x"\nlowest = "F4"\nhighest = "G6"\ncolour = "red"\n', 5, r"unknown key 'colour'; use one of"),
        ('[instrument]\nname = "x"\nlowest = "H4"\nhighest = "G6"\n', 3, r"lowest 'H4' is not a note"),
        ('[instrument]\nname = "x"\nlowest = "F4"\nhighest = "E4"\n', 4, r"highest 'E4' is not above lowest"),
        ('[instrument]\nname = "x"\nlowest = "F4"\nhighest = "G6"\nregisters = ["G4", "G5"]\n', 5, r"registers must start with the lowest note"),
        ('[instrument]\nname = "x"\nlowest = "F4"\nhighest = "G6"\nwritten_offset_semitones = "up"\n', 5, r"should be a whole number"),
        ('[instrument]\nname = "x"\nlowest = "F4"\nhighest = "G6"\nclef = "alto"\n', 5, r"clef 'alto' is unknown"),
        ('[instrument]\nname = "x"\nhighest = "G6"\n', 1, r"lowest is missing; add it under \[instrument\]"),
        ('name = "x"\n', 1, r"unexpected 'name' outside \[instrument\]"),
        ('[instrument]\nname = "x"\nlowest = "F4"\nhighest = "G6"\nmissing = ["C2"]\n', 5, r"missing note C2 lies outside the compass"),
    ],
    ids=["syntax", "unknown-key", "bad-note", "highest-below", "registers-start", "offset-type",
         "clef", "missing-key", "outside-table", "missing-outside"],
)
def test_bad_profile_file_gives_one_line_with_file_and_line(tmp_path, text, line, pattern):
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(SettingsError, match=pattern) as info:
        load_profile_file(path)
    msg = str(info.value)
    assert "\n" not in msg
    assert msg.startswith(f"{path}:{line}: "), msg


def test_missing_profile_file(tmp_path):
    with pytest.raises(SettingsError, match=r"no such profile file"):
        get_profile(str(tmp_path / "none.toml"))
