"""Custom temperament and instrument-profile TOML files with typos, junk and hostile content.

Whatever the file holds, loading it either succeeds or raises one ``SettingsError`` (a
``BenchError``) on one line that names the file (and the line, where the TOML parser gives one)
and says what to do -- never a traceback or another exception type.
"""

from __future__ import annotations

import re
import subprocess
import sys
import textwrap

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from bench.cli import main
from bench.errors import BenchError, SettingsError
from bench.tuning.custom import load_temperament, parse_temperament
from bench.workflow.profiles import load_profile_file, parse_profile_text

# Valid files to mutate. Temperament: 1/6-comma meantone deviations from equal temperament
# (cents, on C), rounded to 0.1 c -- values as tabulated in Barbour, "Tuning and Temperament"
# (1951), from memory; the loader only needs them to be a valid file.
VALID_TEMPERAMENT = textwrap.dedent(
    """\
    id = "hollin-lane-sixth"
    name = "Hollin Lane sixth-comma"
    description = "Voicing temperament for the Wren alto."

    [deviations]
    C = 0
    "C#" = -9.8
    D = -3.3
    Eb = 6.5
    E = -6.5
    F = 3.3
    "F#" = -11.7
    G = -1.6
    "G#" = -9.8
    A = -4.9
    Bb = 4.9
    B = -8.1
    """
)
VALID_PROFILE = textwrap.dedent(
    """\
    [instrument]
    name = "wren-alto"
    title = "Wren alto in F"
    lowest = "F4"
    highest = "G6"
    registers = ["F4", "G#5", "F6"]
    written_offset_semitones = 0
    clef = "treble"
    missing = []
    """
)

SOURCE = "workshop/wren.toml"
_TOML_ALPHABET = list('abcdefgCDEFGAB#b=[]{}"\'.,:-+_ 0123456789\n\t\\/') + ["nan", "inf", "true", "1e999", "\u00e9", "\x00"]

tried = {"temperament": 0, "profile": 0}  # inputs tried, for the report (printed at the end)


def _check_one_line(exc: BaseException, source: str) -> str:
    message = str(exc)
    assert isinstance(exc, SettingsError) and isinstance(exc, BenchError), type(exc)
    assert "\n" not in message and "\r" not in message, message
    assert source in message, message
    assert "Traceback" not in message
    # A fix follows the problem ("...; give ...", "... should be a list", "... must be ...").
    assert re.search(r"; | should | must | use | give | write | add | save ", message), message
    return message


def _load_temperament_text(text: str) -> None:
    tried["temperament"] += 1
    try:
        parse_temperament(text, source=SOURCE)
    except SettingsError as exc:
        message = _check_one_line(exc, SOURCE)
        if "not valid TOML" in message and "(at line" not in message:
            assert re.search(r", line \d+, column \d+", message) or "not valid TOML (" in message


def _load_profile_text(text: str) -> None:
    tried["profile"] += 1
    try:
        parse_profile_text(text, where=SOURCE)
    except SettingsError as exc:
        message = _check_one_line(exc, SOURCE)
        assert re.match(rf"{re.escape(SOURCE)}:\d+: ", message), message


@st.composite
def mutated(draw, valid: str):  # type: ignore[no-untyped-def]
    """``valid`` with 1-6 typos: characters deleted, inserted, replaced, lines dropped,
    duplicated, swapped, or the file cut short."""
    text = valid
    for _ in range(draw(st.integers(1, 6))):
        kind = draw(st.sampled_from(["delete", "insert", "replace", "drop_line", "dup_line", "swap", "cut"]))
        if not text:
            break
        i = draw(st.integers(0, len(text) - 1))
        lines = text.splitlines(keepends=True)
        j = draw(st.integers(0, len(lines) - 1))
        if kind == "delete":
            text = text[:i] + text[i + 1 :]
        elif kind == "insert":
            text = text[:i] + draw(st.sampled_from(_TOML_ALPHABET)) + text[i:]
        elif kind == "replace":
            text = text[:i] + draw(st.sampled_from(_TOML_ALPHABET)) + text[i + 1 :]
        elif kind == "drop_line":
            text = "".join(lines[:j] + lines[j + 1 :])
        elif kind == "dup_line":
            text = "".join(lines[: j + 1] + lines[j:])
        elif kind == "swap":
            k = draw(st.integers(0, len(lines) - 1))
            lines[j], lines[k] = lines[k], lines[j]
            text = "".join(lines)
        else:
            text = text[:i]
    return text


FAST = settings(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@FAST
@given(st.text(max_size=300))
def test_random_text_as_a_temperament_file(text):
    _load_temperament_text(text)


@FAST
@given(mutated(VALID_TEMPERAMENT))
def test_mutated_temperament_file(text):
    _load_temperament_text(text)


@FAST
@given(st.lists(st.sampled_from(_TOML_ALPHABET), max_size=120).map("".join))
def test_toml_like_junk_as_a_temperament_file(text):
    _load_temperament_text(text)


@FAST
@given(st.text(max_size=300))
def test_random_text_as_a_profile_file(text):
    _load_profile_text(text)


@FAST
@given(mutated(VALID_PROFILE))
def test_mutated_profile_file(text):
    _load_profile_text(text)


@FAST
@given(st.lists(st.sampled_from(_TOML_ALPHABET), max_size=120).map("".join))
def test_toml_like_junk_as_a_profile_file(text):
    _load_profile_text("[instrument]\n" + text)


def test_the_valid_files_load():
    assert parse_temperament(VALID_TEMPERAMENT, SOURCE).id == "hollin-lane-sixth"
    assert parse_profile_text(VALID_PROFILE, SOURCE).lowest_midi == 65  # F4 = MIDI 65 (MIDI 1.0)


def test_a_toml_syntax_error_names_file_line_and_column():
    text = VALID_TEMPERAMENT.replace('"F#" = -11.7', "F# = -11.7")
    with pytest.raises(SettingsError, match=rf"^{re.escape(SOURCE)}, line 12, column \d+: .*quotes"):
        parse_temperament(text, SOURCE)
    text = VALID_PROFILE.replace('lowest = "F4"', "lowest = F4")
    with pytest.raises(SettingsError, match=rf"^{re.escape(SOURCE)}:4: not valid TOML"):
        parse_profile_text(text, SOURCE)


@pytest.mark.parametrize("data", [b"\xff\xfe\x00junk", b"id = \"x\"\n\xc3\x28", b"", b"\x00" * 64])
def test_binary_or_empty_files_give_one_line(tmp_path, data):
    path = tmp_path / "typo.toml"
    path.write_bytes(data)
    for load in (load_temperament, load_profile_file):
        with pytest.raises(SettingsError) as info:
            load(path)
        _check_one_line(info.value, str(path))


@pytest.mark.parametrize("load", [load_temperament, load_profile_file])
def test_a_folder_or_missing_file_gives_one_line(tmp_path, load):
    for path in (tmp_path, tmp_path / "nope.toml"):
        with pytest.raises(SettingsError) as info:
            load(path)
        _check_one_line(info.value, str(path))


# Fixed nasty files the random search is unlikely to build.
NASTY_TEMPERAMENTS = {
    "nan": VALID_TEMPERAMENT.replace("D = -3.3", "D = nan"),
    "inf": VALID_TEMPERAMENT.replace("D = -3.3", "D = inf"),
    "huge": VALID_TEMPERAMENT.replace("D = -3.3", "D = 1e308"),
    "bigint": VALID_TEMPERAMENT.replace("D = -3.3", "D = 99999999999999999999999999999999"),
    "bool": VALID_TEMPERAMENT.replace("D = -3.3", "D = true"),
    "date": VALID_TEMPERAMENT.replace("D = -3.3", "D = 2026-12-01"),
    "array": VALID_TEMPERAMENT.replace("D = -3.3", "D = [1, 2]"),
    "table": VALID_TEMPERAMENT.replace("D = -3.3", "D = {cents = 1}"),
    "ratio_zero": VALID_TEMPERAMENT.replace("[deviations]", "[pitches]").replace("D = -3.3", 'D = "1/0"'),
    "dotted": VALID_TEMPERAMENT.replace("D = -3.3", "D.x = 1"),
    "bom": "\ufeff" + VALID_TEMPERAMENT,
    "crlf": VALID_TEMPERAMENT.replace("\n", "\r\n").replace("D = -3.3", "D = x"),
    "long_float": VALID_TEMPERAMENT.replace("D = -3.3", "D = 0." + "9" * 100_000),
    "id_formula": VALID_TEMPERAMENT.replace('"hollin-lane-sixth"', '"=cmd|calc"'),
    "pitches_array": 'id = "x"\npitches = [1, 2, 3]\n',
    "no_table": 'id = "x"\n',
}


@pytest.mark.parametrize("name", sorted(NASTY_TEMPERAMENTS))
def test_nasty_temperament_files(name):
    _load_temperament_text(NASTY_TEMPERAMENTS[name])


NASTY_PROFILES = {
    "nan_offset": VALID_PROFILE.replace("written_offset_semitones = 0", "written_offset_semitones = nan"),
    "huge_offset": VALID_PROFILE.replace("written_offset_semitones = 0", "written_offset_semitones = 99999999999999999999"),
    "note_number": VALID_PROFILE.replace('lowest = "F4"', "lowest = 65"),
    "note_far": VALID_PROFILE.replace('highest = "G6"', 'highest = "G99999"'),
    "registers_mixed": VALID_PROFILE.replace('["F4", "G#5", "F6"]', '["F4", 3, {a = 1}]'),
    "missing_table": VALID_PROFILE.replace("missing = []", "missing = {a = 1}"),
    "two_tables": VALID_PROFILE + "[instrument.extra]\nx = 1\n",
    "bom": "\ufeff" + VALID_PROFILE,
    "name_formula": VALID_PROFILE.replace('"wren-alto"', '"=HYPERLINK(1)"'),
}


@pytest.mark.parametrize("name", sorted(NASTY_PROFILES))
def test_nasty_profile_files(name):
    _load_profile_text(NASTY_PROFILES[name])


def test_an_integer_of_5000_digits_in_a_temperament_gives_one_line():
    _load_temperament_text(VALID_TEMPERAMENT.replace("D = -3.3", "D = " + "9" * 5000))


def test_an_integer_of_5000_digits_in_a_profile_gives_one_line():
    _load_profile_text(VALID_PROFILE.replace("written_offset_semitones = 0", "written_offset_semitones = " + "9" * 5000))


DEEP = 50_000


def test_deeply_nested_temperament_gives_one_line():
    _load_temperament_text('id = "x"\nname = ' + "[" * DEEP + "]" * DEEP + "\n")


def test_deeply_nested_profile_gives_one_line():
    _load_profile_text('[instrument]\nname = ' + "{a=" * DEEP + "1" + "}" * DEEP + "\n")


@pytest.mark.timeout(60)
def test_ratio_with_a_huge_exponent_is_refused_quickly(tmp_path):
    path = tmp_path / "hang.toml"
    path.write_text('id = "x"\n[pitches]\nC = 0\nD = "1e999999999"\n')
    code = "import sys; from bench.tuning import load_temperament; load_temperament(sys.argv[1])"
    try:  # a subprocess: the big-integer power cannot be interrupted inside this process
        r = subprocess.run([sys.executable, "-c", code, str(path)], capture_output=True, text=True, timeout=10)
    except subprocess.TimeoutExpired:
        pytest.fail("loading the file took over 10 s")
    assert "SettingsError" in r.stderr and "hang.toml" in r.stderr


def test_cli_reports_a_bad_temperament_file_in_one_line_with_status_2(tmp_path, capsys):
    path = tmp_path / "typo.toml"
    path.write_text(VALID_TEMPERAMENT.replace("D = -3.3", "D = -3.3.3"))  # line 8 of the file
    assert main(["analyze", "--temperament", str(path), "nothing.wav"]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: ") and "\n" not in err and str(path) in err and "line 8" in err


def test_inputs_tried_summary():
    # Runs last in this module (pytest keeps file order): the count for the report.
    print(f"\nTOML inputs tried: {tried['temperament']} temperament texts, {tried['profile']} profile texts")
    assert tried["temperament"] > 700 and tried["profile"] > 700
