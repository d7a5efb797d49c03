"""``bench notes`` and ``bench temperaments`` through the command line."""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import pytest
from CoolProp.CoolProp import PropsSI

from bench.cli import main

# REFERENCES.md §2 Werckmeister III on C (published table, 0.01 c).
WERCK = [0, -9.78, -7.82, -5.87, -9.78, -1.96, -11.73, -3.91, -7.82, -11.73, -3.91, -7.82]
NAMES = ["C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B"]


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    try:
        code = main(list(argv))
    except SystemExit as exc:  # argparse errors
        code = int(exc.code or 0)
    out, err = capsys.readouterr()
    return code, out, err


def _rows(out: str) -> dict[str, list[str]]:
    rows = {}
    for line in out.splitlines():
        cells = line.split()
        if cells and cells[0][:1] in "ABCDEFG" and len(cells) >= 4 and cells[0][-1].isdigit():
            rows[cells[0]] = cells
    return rows


def test_werckmeister_table_at_415(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, err = _run(capsys, "notes", "--a4", "415", "--temperament", "werckmeister3",
                          "--tonic", "C", "--temp", "17")
    assert code == 0 and err == ""
    rows = _rows(out)
    assert list(rows)[0] == "C2" and list(rows)[-1] == "C8" and len(rows) == 73
    # Header names the settings and the air.
    assert "A4 = 415.00 Hz (baroque 415)" in out and "Werckmeister III" in out
    assert "Measured air 17 °C" in out and "flat" in out
    # Expected: 12-TET at 415 (C4 246.7605 Hz, REFERENCES.md §1) moved by the published
    # Werckmeister offsets with A = 0 (§2); the air column scales by CoolProp's speed-of-sound
    # ratio c(17 degC) / c(20 degC) ('Air', dry).
    c_ratio = PropsSI("A", "T", 290.15, "P", 101325, "Air") / PropsSI("A", "T", 293.15, "P", 101325, "Air")
    for midi in range(36, 109):
        pc = midi % 12
        name = f"{NAMES[pc]}{midi // 12 - 1}"
        equal = 246.7605 * 2 ** ((midi - 60) / 12)
        offset = WERCK[pc] - WERCK[9]
        cells = rows[name]
        assert float(cells[1]) == pytest.approx(equal, abs=0.0005 + 2e-7 * equal), name
        target = equal * 2 ** (offset / 1200)
        # Printed to 1 mHz; the published offsets are rounded to 0.01 c (2.9e-6 relative).
        assert float(cells[2]) == pytest.approx(target, abs=0.0005 + 3e-6 * target), name
        # Difference of two published values (each +-0.005 c), printed to 0.01 c.
        assert float(cells[3]) == pytest.approx(offset, abs=0.0151), name
        # CoolProp and Cramer differ by about 0.006 c over 17-20 degC (3.5e-6 relative).
        assert float(cells[4]) == pytest.approx(target * c_ratio, abs=0.0005 + 7e-6 * target), name
    assert rows["A4"][1:4] == ["415.000", "415.000", "+0.00"]
    assert rows["C4"][3] == "+11.73"


def test_range_flats_and_no_air_column(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = _run(capsys, "notes", "--from", "Bb3", "--to", "d4", "--flats")
    assert code == 0
    rows = _rows(out)
    assert list(rows) == ["Bb3", "B3", "C4", "Db4", "D4"]
    assert rows["C4"][1:4] == ["261.626", "261.626", "+0.00"]  # REFERENCES.md §1: 261.6256
    assert all(len(r) == 4 for r in rows.values())  # no air column at the reference
    assert "Measured air" not in out


def test_custom_file_on_the_command_line(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "hollin.toml"
    path.write_text('id = "hollin-wm3"\nname = "Hollin Lane WM3"\n[deviations]\n'
                    + "\n".join(f'"{n}" = {d}' for n, d in zip(NAMES, WERCK)) + "\n", encoding="utf-8")
    code, out, _ = _run(capsys, "notes", "--temperament", str(path), "--from", "C4", "--to", "C4")
    assert code == 0 and "Hollin Lane WM3 (hollin-wm3)" in out
    assert _rows(out)["C4"][3] == "+11.73"
    code, out, _ = _run(capsys, "temperaments", "--temperament", str(path))
    assert code == 0 and "*hollin-wm3" in out


def test_temperaments_listing_on_g(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = _run(capsys, "temperaments", "--tonic", "G", "--describe")
    assert code == 0
    lines = out.splitlines()
    row = next(line for line in lines if line.split()[:1] in (["werckmeister3"], ["*werckmeister3"]))
    # REFERENCES.md §2: Werckmeister III on G.
    want = [-1.96, -11.73, -3.91, -7.82, -11.73, -3.91, -7.82, 0, -9.78, -7.82, -5.87, -9.78]
    # Published to 0.01 c, printed to 0.01 c.
    assert [float(x) for x in row.split()[1:13]] == pytest.approx(want, abs=0.0101)
    for tid in ("equal", "pythagorean", "meantone4", "meantone5", "meantone6", "kirnberger3",
                "vallotti", "young", "kellner", "just"):
        assert any(line.split() and line.split()[0].lstrip("*") == tid for line in lines), tid
    assert "narrowed by 1/4 Pythagorean comma" in out


def test_temperaments_from_a(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = _run(capsys, "temperaments", "--from-a")
    assert code == 0
    row = next(line for line in out.splitlines() if line.split()[:1] in (["kellner"], ["*kellner"]))
    # REFERENCES.md §2: Kellner with A = 0.
    want = [8.21, -1.56, 2.74, 2.35, -2.74, 6.26, -3.52, 5.47, 0.39, 0, 4.30, -0.78]
    # Published to 0.01 c, printed to 0.01 c.
    assert [float(x) for x in row.split()[1:13]] == pytest.approx(want, abs=0.0101)


@pytest.mark.parametrize(
    ("argv", "needle"),
    [
        (["notes", "--a4", "600"], "A4 = 600.0 Hz is outside 300-500 Hz"),
        (["notes", "--a4", "concert"], "pitch standard 'concert' is neither a frequency nor a preset"),
        (["notes", "--temperament", "wm4"], "temperament 'wm4' is unknown; use one of equal"),
        (["notes", "--temperament", "missing.toml"], "temperament file 'missing.toml' cannot be read"),
        (["notes", "--tonic", "H"], "tonic 'H' is not a pitch class"),
        (["notes", "--temp", "warm"], "--temp 'warm' is not a number"),
        (["notes", "--temp", "99"], "air temperature 99.0 degC is outside -10 to 45 degC"),
        (["notes", "--ref-temp", "-30"], "reference temperature -30.0 degC is outside"),
        (["notes", "--rh", "150"], "relative humidity 150.0 % is outside 0-100 %"),
        (["notes", "--from", "C9", "--to", "C4"], "--from C9 lies above --to C4"),
        (["notes", "--from", "X4"], "note 'X4' is not a note name"),
        (["temperaments", "--tonic", "Z"], "tonic 'Z' is not a pitch class"),
        (["notes", "--bogus"], "unrecognized arguments: --bogus"),
    ],
)
def test_bad_values_exit_2_with_one_line(capsys: pytest.CaptureFixture[str], argv: list[str], needle: str) -> None:
    code, out, err = _run(capsys, *argv)
    assert code == 2
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and needle in lines[0]


def test_the_documented_command_runs() -> None:
    proc = subprocess.run(
        [sys.executable, "-m", "bench", "notes", "--a4", "415", "--temperament", "werckmeister3",
         "--tonic", "C", "--temp", "17"],
        capture_output=True, text=True, timeout=60, check=False,
    )
    assert proc.returncode == 0, proc.stderr
    assert "werckmeister3" in proc.stdout
    assert math.isclose(float(_rows(proc.stdout)["A4"][2]), 415.0)
