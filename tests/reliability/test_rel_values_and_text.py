"""Items 5, 6 and 7 of the reliability issue: one strict number syntax everywhere, temperament
aliases before paths, a byte order mark accepted, and text from files shown as text.

Reproduction (before): ``--temp-source`` read ``2.35e1`` as 2.35 degC, ``1e999`` as 1.00 and
``\u22125.0`` (Unicode minus) as +5.00; ``--temperament 1/4-comma`` was taken as a path;
``--a4 4_40`` and ``--temp 1_0`` were accepted; a temperament file starting with a UTF-8 BOM
was "not valid TOML"; a temperament ``name`` or profile ``title`` holding terminal escape
codes was printed raw.

Outside references: Unicode Standard, U+2212 MINUS SIGN; IEEE 754 binary64 (the largest finite
double is about 1.8e308, so 1e999 overflows); the Unicode Standard section 23.8 (U+FEFF as a
byte order mark at the start of a UTF-8 text); ECMA-48 (ESC, 0x1B, starts a control sequence;
"ESC [ 2 J" erases the display); quarter-comma meantone has pure major thirds, 5/4 =
1200 log2(5/4) = 386.31 cents, so E lies 13.69 cents below equal temperament (handbook
formula; REFERENCES, temperaments).
"""

from __future__ import annotations

import math

import pytest

from bench.airtemp import parse_temp_c
from bench.cli import main
from bench.errors import SettingsError
from bench.numbers import strict_float

PURE_THIRD_CENTS = 1200 * math.log2(5 / 4)  # 386.3137 c


@pytest.mark.parametrize(
    ("text", "temp_c"),
    [("2.35e1", 23.5), ("\u22125.0", -5.0), ("temp=\u22122.5 C", -2.5), ("21.5", 21.5), ("t=23125", 23.125)],
)
def test_sensor_numbers_are_read_in_full(text, temp_c):
    assert parse_temp_c(text, "sensor") == pytest.approx(temp_c)


def test_a_sensor_number_that_overflows_is_refused():
    with pytest.raises(SettingsError, match="1e999"):
        parse_temp_c("1e999", "sensor")


@pytest.mark.parametrize("text", ["4_40", "1_0", "inf", "-inf", "nan", "1e999", "0x1p3", "", "1.2.3", "\u0661"])
def test_strict_parser_refuses_what_is_no_decimal_number(text):
    assert strict_float(text) is None


@pytest.mark.parametrize(("text", "value"), [("440", 440.0), (".5", 0.5), ("4.4e2", 440.0), ("\u221210", -10.0), ("+3", 3.0)])
def test_strict_parser_reads_decimals(text, value):
    assert strict_float(text) == value


@pytest.mark.parametrize(
    "argv",
    [["notes", "--a4", "4_40"], ["notes", "--temp", "1_0"], ["notes", "--ref-temp", "2_0"], ["notes", "--rh", "4_5"]],
)
def test_underscored_numbers_are_refused_on_the_command_line(argv, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and argv[-1] in err and err.count("\n") == 1


def test_unicode_minus_on_the_command_line(capsys):
    assert main(["notes", "--temp", "\u22125", "--from", "A4", "--to", "A4"]) == 0
    assert "Measured air -5 °C" in capsys.readouterr().out


def test_the_quarter_comma_alias_is_not_a_path(capsys):
    assert main(["notes", "--temperament", "1/4-comma", "--from", "C4", "--to", "E4"]) == 0
    out = capsys.readouterr().out
    assert "(meantone4)" in out
    cents = {line.split()[0]: float(line.split()[-1]) for line in out.splitlines() if line[:2] in ("C4", "E4")}
    # C-E is a pure third: 386.31 c, 13.69 c narrower than the equal-tempered 400 c.
    assert cents["E4"] - cents["C4"] == pytest.approx(PURE_THIRD_CENTS - 400, abs=0.02)


DEVIATIONS = (
    '[deviations]\nC = 0\n"C#" = -10\nD = -4\nEb = -6\nE = -8\nF = 2\n"F#" = -10\nG = -2\nAb = -8\n'
    "A = -6\nBb = -4\nB = -10\n"
)


def test_a_temperament_with_a_byte_order_mark_is_read(tmp_path):
    from bench.tuning import load_temperament

    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + ('id = "hollin-bom"\n' + DEVIATIONS).encode("utf-8"))
    t = load_temperament(path)
    assert t.id == "hollin-bom" and t.offsets_cents[4] == -8.0


def test_escape_codes_in_a_temperament_name_are_shown_as_text(tmp_path, capsys):
    path = tmp_path / "evil.toml"
    path.write_text('id = "evil"\nname = "Evil\\u001b[2J\\u001b]0;owned\\u0007"\n' + DEVIATIONS, encoding="utf-8")
    assert main(["temperaments", "--temperament", str(path), "--describe"]) == 0
    assert main(["notes", "--temperament", str(path), "--from", "A4", "--to", "A4"]) == 0
    out = capsys.readouterr().out
    assert "\x1b" not in out and "\x07" not in out
    assert "Evil\\x1b[2J" in out


def test_escape_codes_in_a_profile_title_are_shown_as_text(tmp_path):
    from bench.workflow.profiles import load_profile_file

    path = tmp_path / "p.toml"
    path.write_text(
        '[instrument]\nname = "wren"\ntitle = "Wren\\u001b[31m red"\nlowest = "F4"\nhighest = "G6"\n', encoding="utf-8"
    )
    profile = load_profile_file(path)
    assert "\x1b" not in profile.title and "\x1b" not in profile.describe()
    assert profile.title == "Wren\\x1b[31m red"


def test_printable_escapes_every_control_character():
    from bench.textsafe import printable

    controls = "".join(chr(c) for c in [*range(0x20), 0x7F, *range(0x80, 0xA0), 0x202E])
    shown = printable(controls)
    assert all(0x20 <= ord(ch) < 0x7F for ch in shown)
