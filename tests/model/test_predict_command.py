"""``bench model predict``: the table, the CSV, and nothing overwritten unasked."""

from __future__ import annotations

import csv
import math

import pytest

from bench.cli import main
from bench.model.acoustics import air_at
from bench.model.geometry import builtin_geometry
from bench.model.predict import PREDICTION_COLUMNS, predict
from bench.workflow.profiles import get_profile
from tests.model.test_geometry import MINIMAL


def test_predict_writes_the_csv_and_refuses_to_overwrite(tmp_path, capsys):
    geo = tmp_path / "tube.toml"
    geo.write_text(MINIMAL, encoding="utf-8")
    out = tmp_path / "pred.csv"
    assert main(["model", "predict", str(geo), "--temp", "20", "--rh", "0", "--csv", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "closed" in printed and "predicted Hz" in printed
    with out.open(newline="", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    assert tuple(rows[0]) == PREDICTION_COLUMNS
    assert [(r["fingering"], r["register"]) for r in rows] == [
        ("closed", "1"), ("closed", "2"), ("closed", "3"), ("open", "1"), ("open", "2"), ("open", "3")
    ]
    # an open hole shortens the tube: the first register rises
    assert float(rows[3]["predicted_hz"]) > float(rows[0]["predicted_hz"])
    before = out.read_bytes()
    assert main(["model", "predict", str(geo), "--csv", str(out)]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: ") and "--overwrite" in err and err.count("\n") == 1
    assert out.read_bytes() == before
    assert main(["model", "predict", str(geo), "--temp", "30", "--csv", str(out), "--overwrite"]) == 0
    assert out.read_bytes() != before
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_bad_geometry_is_one_error_line(tmp_path, capsys):
    geo = tmp_path / "bad.toml"
    geo.write_text(MINIMAL.replace("chimney_mm = 3.0\n", ""), encoding="utf-8")
    assert main(["model", "predict", str(geo)]) == 2
    err = capsys.readouterr().err
    assert err == f"error: {geo}: holes[0].chimney_mm: missing; add it (a number of millimetres)\n"


@pytest.mark.parametrize(("name", "profile"), [("wren-alto", "alto"), ("wren-soprano", "soprano")])
def test_builtin_geometries_cover_their_compass_with_note_names(name, profile):
    # Fingerings are keyed by the note names of the family profiles (bench.workflow.profiles):
    # one per note of the compass, each in the register the profile puts its note in.
    from bench.tuning.notes import parse_note

    g = builtin_geometry(name)
    prof = get_profile(profile)
    assert sorted(parse_note(f.name) for f in g.fingerings) == prof.notes()
    for f in g.fingerings:
        assert f.register == prof.register_of(parse_note(f.name))
    preds = predict(g, air_at(25.0, 60.0), registers=3)
    assert all(math.isfinite(p.predicted_hz) for p in preds)


def test_warmer_air_raises_every_prediction():
    # A warmer bore has a faster speed of sound, so every resonance rises (Fletcher & Rossing
    # 1998, ch. 8: f proportional to c); about +3 c per degree near 20 degC (*common practice*).
    g = builtin_geometry("wren-alto")
    cold = predict(g, air_at(20.0, 50.0), registers=1)
    warm = predict(g, air_at(21.0, 50.0), registers=1)
    for a, b in zip(cold, warm, strict=True):
        rise = 1200 * math.log2(b.predicted_hz / a.predicted_hz)
        assert 2.5 < rise < 3.5


@pytest.mark.parametrize("args", [["--registers", "0"], ["--a4", "100"], ["--temp", "99"], ["--rh", "120"]])
def test_out_of_range_options(args, capsys):
    assert main(["model", "predict", "wren-alto", *args]) == 2
    assert capsys.readouterr().err.startswith("error: ")


def test_a_geometry_without_fingerings_says_what_to_add(tmp_path, capsys):
    geo = tmp_path / "bare.toml"
    geo.write_text(MINIMAL.split("[fingerings]")[0], encoding="utf-8")
    assert main(["model", "predict", str(geo)]) == 2
    assert capsys.readouterr().err == f'error: {geo}: [fingerings]: none given; add a [fingerings] table, e.g. closed = "x"\n'
