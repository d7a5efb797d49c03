"""Before/after: a session against itself, a known shift of one note, temperature."""

from __future__ import annotations

import csv

import pytest

from bench.cli import main
from bench.tuning import TuningSettings
from bench.workflow.captures import captures_from_readings, write_captures
from bench.workflow.compare import (
    COMPARISON_COLUMNS,
    compare_captures,
    format_comparison,
    plot_comparison,
    write_comparison_csv,
)
from bench.workflow.profiles import get_profile

from .sessions import analyse, render_events, scale_events

ALTO = get_profile("alto")
SCALE = [65, 67, 69, 70, 72, 74, 76, 77]  # F major, F4-F5
BASE = {65: 2.0, 67: -3.0, 69: 1.0, 70: 4.0, 72: -1.0, 74: 0.0, 76: -6.0, 77: 3.0}
ADJUSTED = 72  # C5


def _pass(offsets, seed, settings=None, vibrato=False):
    events = scale_events(SCALE, offsets, duration_s=0.8)
    if vibrato:  # a little player's unsteadiness, so the spread is not zero
        import dataclasses

        events = [dataclasses.replace(e, vibrato_cents=0.8, vibrato_hz=4.5) for e in events]
    rows = analyse(render_events(events, seed=seed), settings)
    return captures_from_readings(rows, profile=ALTO)


@pytest.fixture(scope="module")
def before():
    return _pass(BASE, seed=11, vibrato=True)


@pytest.fixture(scope="module")
def after():
    # the same instrument after "undercutting" one tone hole: C5 rises by 8 c
    return _pass({**BASE, ADJUSTED: BASE[ADJUSTED] + 8.0}, seed=12, vibrato=True)


def test_session_against_itself_is_all_zero(before):
    cmp = compare_captures(before, before, ALTO)
    assert len(cmp.both()) == len(SCALE)
    assert all(c.delta_cents == 0.0 and c.delta_spread_cents == 0.0 for c in cmp.changes)
    assert all(c.delta_odd_even_db == 0.0 for c in cmp.changes)
    assert cmp.moved() == []
    assert cmp.warnings == ()
    assert format_comparison(cmp).splitlines()[-1] == f"{len(SCALE)} notes in both sessions; 0 moved"


def test_known_shift_of_one_note_shows_only_on_that_note(before, after):
    # Synth truth: only C5 was rendered 8 c higher in the second pass (analyser in between)
    cmp = compare_captures(before, after, ALTO)
    assert [c.midi for c in cmp.moved()] == [ADJUSTED]
    moved = cmp.moved()[0]
    assert moved.delta_cents == pytest.approx(8.0, abs=0.5)
    for c in cmp.both():
        if c.midi != ADJUSTED:
            assert abs(c.delta_cents) < 0.5
            assert abs(c.delta_cents) <= max(c.noise_cents, cmp.min_cents)
    text = format_comparison(cmp)
    assert "Compared on temperature-corrected cents" in text
    assert sum("MOVED" in line for line in text.splitlines()) == 1
    assert next(line for line in text.splitlines() if line.startswith("C5 ")).endswith("MOVED")


def test_noise_rule(before, after):
    # noise = 2 sqrt(s_b^2 + s_a^2); a 1 c floor
    cmp = compare_captures(before, after, ALTO)
    for c in cmp.both():
        assert c.noise_cents == pytest.approx(
            2.0 * (c.before.cents_spread ** 2 + c.after.cents_spread ** 2) ** 0.5
        )
        assert c.moved == (abs(c.delta_cents) > max(c.noise_cents, 1.0))
    strict = compare_captures(before, after, ALTO, min_cents=9.0)
    assert strict.moved() == []


def test_warm_room_is_corrected_away(before):
    # REFERENCES §3 worked example: tuned at 20 degC, played at 26 degC -> +17.5 c (Cramer
    # 17.49). Render the whole scale that much sharp, analyse it as played at 26 degC with a
    # 20 degC reference: after correction nothing moved.
    warm = {m: c + 17.49 for m, c in BASE.items()}
    after_warm = _pass(warm, seed=13, settings=TuningSettings(temp_c=26.0, ref_temp_c=20.0), vibrato=True)
    assert after_warm[0].cents_raw == pytest.approx(BASE[65] + 17.49, abs=0.5)
    cmp = compare_captures(before, after_warm, ALTO)
    assert cmp.moved() == []
    assert all(abs(c.delta_cents) < 0.6 for c in cmp.both())
    text = format_comparison(cmp)
    assert "played at 26.0 °C, corrected to 20.0 °C" in text
    assert "temperature-corrected" in text


def test_different_reference_temperature_is_warned(before):
    other = _pass(BASE, seed=14, settings=TuningSettings(temp_c=20.0, ref_temp_c=22.0))
    cmp = compare_captures(before, other, ALTO)
    assert any("different reference temperatures" in w for w in cmp.warnings)


def test_different_temperament_compares_the_pitch_itself():
    # The same instrument measured against equal temperament and against 1/4-comma meantone
    # on C. Per-note cents change by the temperament's deviations (REFERENCES §2 table; the
    # differences between notes do not depend on where A is put), but the instrument did not
    # move, so the comparison marks nothing.
    meantone4 = {65: 3.42, 67: -3.42, 69: -10.26, 70: 6.84, 72: 0.0, 74: -6.84, 76: -13.69, 77: 3.42}
    a = _pass(BASE, seed=15)
    b = _pass(BASE, seed=15, settings=TuningSettings(temperament="meantone4", tonic="C"))
    shift = {ca.midi: cb.cents - ca.cents for ca, cb in zip(a, b, strict=True)}
    for m in SCALE:
        assert shift[m] - shift[65] == pytest.approx(-(meantone4[m] - meantone4[65]), abs=0.1)
    cmp = compare_captures(a, b, ALTO)
    assert cmp.moved() == []
    assert all(abs(c.delta_cents) < 0.05 for c in cmp.both())
    assert any("temperament, tonic or pitch standard differ" in w for w in cmp.warnings)


def test_two_labelled_passes_in_one_session(before, after):
    import dataclasses

    one = [dataclasses.replace(c, label="as made") for c in before] + [
        dataclasses.replace(c, index=c.index + 100, label="after undercutting hole 3") for c in after
    ]
    cmp = compare_captures(one, one, ALTO, before_label="as made", after_label="after undercutting hole 3")
    assert [c.midi for c in cmp.moved()] == [ADJUSTED]


def test_outputs(tmp_path, before, after):
    cmp = compare_captures(before, after, ALTO)
    path = write_comparison_csv(cmp, tmp_path / "cmp.csv")
    with open(path, encoding="utf-8", newline="") as f:
        table = list(csv.DictReader(f))
    assert list(table[0]) == list(COMPARISON_COLUMNS)
    assert [r["note"] for r in table if r["moved"] == "1"] == ["C5"]
    png = plot_comparison(cmp, tmp_path / "cmp.png")
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_bench_compare_command(tmp_path, before, after, capsys):
    b = write_captures(tmp_path / "b.captures.csv", before)
    a = write_captures(tmp_path / "a.captures.csv", after)
    assert main(["compare", str(b), str(a), "--out", str(tmp_path / "c.svg"), "--csv", str(tmp_path / "c.csv")]) == 0
    out = capsys.readouterr().out
    assert f"{len(SCALE)} notes in both sessions; 1 moved: C5 R1 +" in out
    assert (tmp_path / "c.svg").exists()
    assert main(["compare", str(b), str(a), "--out", str(tmp_path / "c.gif")]) == 2
    assert "error: --out" in capsys.readouterr().err
