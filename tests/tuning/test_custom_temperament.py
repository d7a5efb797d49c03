"""Custom temperaments from TOML files: the format and its one-line errors."""

from __future__ import annotations

from pathlib import Path

import pytest

from bench.errors import SettingsError
from bench.tuning import get_temperament, load_temperament, offsets_on
from bench.tuning.custom import parse_temperament

# 5-limit just intonation on C as ratios (REFERENCES.md §2, Ellis's duodene).
JUST_AS_RATIOS = """\
# Hollin Lane Flute Works: just intonation for voicing the Kestrel soprano in C
id = "hollin-just"
name = "Hollin Lane just"
description = "Just intonation for drone work."

[pitches]
C = "1/1"
Db = "16/15"
D = "9/8"
Eb = "6/5"
E = "5/4"
F = "4/3"
"F#" = "45/32"
G = "3/2"
Ab = "8/5"
A = "5/3"
Bb = "9/5"
B = "15/8"
"""

# Werckmeister III as deviations from equal temperament, REFERENCES.md §2 (0.01 c).
WERCK_AS_DEVIATIONS = """\
id = "wren-wm3"

[deviations]
C = 0
"C#" = -9.78
D = -7.82
"D#" = -5.87
E = -9.78
F = -1.96
"F#" = -11.73
G = -3.91
"G#" = -7.82
A = -11.73
"A#" = -3.91
B = -7.82
"""


def _write(tmp_path: Path, text: str, name: str = "t.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def test_ratios_reproduce_just_intonation(tmp_path: Path) -> None:
    t = load_temperament(_write(tmp_path, JUST_AS_RATIOS))
    assert (t.id, t.name, t.description) == ("hollin-just", "Hollin Lane just", "Just intonation for drone work.")
    assert t.offsets_cents == pytest.approx(get_temperament("just").offsets_cents, abs=1e-9)
    assert t.source is not None and t.source.endswith("t.toml")


def test_deviations_reproduce_werckmeister(tmp_path: Path) -> None:
    t = load_temperament(_write(tmp_path, WERCK_AS_DEVIATIONS))
    assert t.name == "wren-wm3"  # name defaults to the id
    assert t.offsets_cents == pytest.approx(get_temperament("werckmeister3").offsets_cents, abs=0.006)
    # Transposes like the built-ins (REFERENCES.md §2 row on G).
    on_g = [-1.96, -11.73, -3.91, -7.82, -11.73, -3.91, -7.82, 0, -9.78, -7.82, -5.87, -9.78]
    assert offsets_on(t, 7) == pytest.approx(on_g, abs=0.006)


def test_cents_above_c(tmp_path: Path) -> None:
    text = 'id = "ten"\n[pitches]\n' + "\n".join(
        f'"{n}" = {100 * i + (5 if i else 0)}' for i, n in enumerate(
            ["C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B"]))
    t = load_temperament(_write(tmp_path, text))
    assert t.offsets_cents == (0.0,) + (5.0,) * 11


def _error(tmp_path: Path, text: str) -> str:
    path = _write(tmp_path, text, "bad.toml")
    with pytest.raises(SettingsError) as info:
        load_temperament(path)
    message = str(info.value)
    assert "\n" not in message
    assert str(path) in message
    return message


def _replace(text: str, old: str, new: str) -> str:
    assert old in text
    return text.replace(old, new)


def test_unquoted_sharp_key_names_line_and_fix(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(JUST_AS_RATIOS, '"F#" = "45/32"', 'F# = "45/32"'))
    assert ", line 13, column" in msg and "not valid TOML" in msg
    assert 'put a key with # in quotes, e.g. "F#" = 590.2' in msg


def test_toml_syntax_error(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(JUST_AS_RATIOS, 'G = "3/2"', 'G = "3/2'))
    assert ", line 14, column" in msg and "not valid TOML" in msg


def test_bad_ratio_names_its_line(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(JUST_AS_RATIOS, 'G = "3/2"', 'G = "three halves"'))
    assert "bad.toml, line 14: G = 'three halves' is not a number of cents or a ratio" in msg
    assert 'give cents above C (e.g. 90.2) or a ratio in quotes (e.g. "16/15")' in msg


def test_ratio_outside_octave(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(JUST_AS_RATIOS, 'G = "3/2"', 'G = "3/1"'))
    assert "line 14: ratio '3/1' for G is outside the octave" in msg


def test_note_too_far_from_equal(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, "D = -7.82", "D = -70"))
    assert "line 6: D lies -70.00 cents from equal temperament; keep every note within 50 cents" in msg


def test_missing_and_duplicate_notes(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, '"C#" = -9.78\n', ""))
    assert "line 3: [deviations] lacks C#; give all twelve pitch classes C to B" in msg
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, '"C#" = -9.78\n', '"C#" = -9.78\nDb = -9.78\n'))
    assert "line 6: 'Db' in [deviations] is the same pitch class as 'C#'" in msg


def test_bad_pitch_class_key(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, "B = -7.82", "H = -7.82"))
    assert "line 15: 'H' in [deviations] is not a pitch class" in msg


def test_tonic_must_be_zero(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, "C = 0", "C = 3"))
    assert "line 4: C = 3, but C is the tonic; set C = 0" in msg


def test_id_rules(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, 'id = "wren-wm3"', 'id = "wm3"'))
    assert "line 1: id 'wm3' is the name of a built-in temperament; choose another id" in msg
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, 'id = "wren-wm3"', 'id = "my temperament"'))
    assert "line 1: id 'my temperament' is not a plain identifier" in msg
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, 'id = "wren-wm3"\n', ""))
    assert 'the id is missing; add a line such as id = "my-temperament"' in msg


def test_unknown_key_and_table_choice(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, 'id = "wren-wm3"\n', 'id = "wren-wm3"\ntonic = "G"\n'))
    assert "line 2: unknown key 'tonic'; use only id, name, description, pitches, deviations" in msg
    msg = _error(tmp_path, 'id = "x"\n')
    assert "no [pitches] or [deviations] table" in msg


def test_not_rising(tmp_path: Path) -> None:
    text = _replace(WERCK_AS_DEVIATIONS, '"C#" = -9.78', '"C#" = 50')
    msg = _error(tmp_path, _replace(text, "D = -7.82", "D = -50"))
    assert "line 6: D (150.00 c) is not above C# (150.00 c); give the notes in rising order" in msg


def test_unreadable_file(tmp_path: Path) -> None:
    with pytest.raises(SettingsError, match=r"temperament file '.*nowhere\.toml' cannot be read \(No such file"):
        load_temperament(tmp_path / "nowhere.toml")


def test_parse_temperament_from_text() -> None:
    t = parse_temperament(WERCK_AS_DEVIATIONS, "inline")
    assert t.source == "inline" and t.id == "wren-wm3"


def test_deviation_must_be_a_number(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, "D = -7.82", 'D = "-7.82"'))
    assert "line 6: D = '-7.82' is not a number of cents; give cents from equal temperament" in msg
    msg = _error(tmp_path, _replace(WERCK_AS_DEVIATIONS, "D = -7.82", "D = true"))
    assert "line 6: D = True is not a number of cents" in msg


def test_cents_outside_the_octave(tmp_path: Path) -> None:
    msg = _error(tmp_path, _replace(JUST_AS_RATIOS, 'B = "15/8"', "B = 1250"))
    assert "line 18: B = 1250 cents is outside the octave; give cents above C from 0 to below 1200" in msg
