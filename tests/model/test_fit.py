"""The fit recovers known parameters from captures synthesised from the model itself.

The model is its own outside truth here only in the sense of a closed loop (a known answer
planted in synthetic data); what is checked is the fitting machinery: least squares, the
Jacobian's uncertainties, the rule that never fits more parameters than captures.
"""

from __future__ import annotations

import math
from dataclasses import replace

import pytest

from bench.model.acoustics import air_at
from bench.model.fit import fit_model, targets_from_captures
from bench.model.geometry import builtin_geometry, load_geometry
from bench.model.instrument import ModelOptions, playing_frequencies
from bench.tuning.notes import parse_note
from bench.workflow.captures import Capture, read_captures, write_captures

ROOM_C, RH = 21.0, 50.0
TRUE_EC_MM, TRUE_WARMING_C = 7.3, 4.0
TRUE_SCALES = (1.0, 0.96, 1.05, 1.0, 0.92, 1.0, 1.04, 1.0)
NOTES = ["F4", "G4", "A4", "Bb4", "C5", "D5", "E5", "F#5", "G#5", "A5", "C6", "D6"]


def _capture(index: int, name: str, register: int, f0_hz: float) -> Capture:
    midi = parse_note(name)
    target = 440.0 * 2.0 ** ((midi - 69) / 12)  # 12-TET on A4 = 440 Hz (ISO 16)
    return Capture(
        index=index, label="", source="manual", note=name, midi=midi, register=register, mode=None, jump="",
        start_s=0.0, end_s=1.0, frames=50, cents=0.0, cents_spread=1.0,
        cents_raw=1200 * math.log2(f0_hz / target), f0_hz=f0_hz, target_hz=target, level_dbfs=-20.0,
        level_min_dbfs=-21.0, level_max_dbfs=-19.0, odd_even_db=None, harmonics_db=(None,) * 8,
        register_margin_db=None, break_level_dbfs=None, temperament="equal", tonic="C", a4_hz=440.0,
        temp_c=ROOM_C, ref_temp_c=20.0, rh_percent=RH,
    )


@pytest.fixture(scope="module")
def synthetic(tmp_path_factory):
    g = builtin_geometry("wren-alto")
    truth = replace(g, top=replace(g.top, end_correction_mm=TRUE_EC_MM))
    fings = [g.fingering(n) for n in NOTES]
    res = playing_frequencies(
        truth, [f.holes for f in fings], air_at(ROOM_C + TRUE_WARMING_C, RH), 3,
        ModelOptions(hole_diameter_scale=TRUE_SCALES),
    )
    caps = [_capture(i + 1, f.name, f.register, float(res.freq_hz[i, f.register - 1])) for i, f in enumerate(fings)]
    # an older, wrong capture of F4 that the latest one must replace
    caps.insert(0, _capture(0, "F4", 1, 300.0))
    path = tmp_path_factory.mktemp("fit") / "synthetic.captures.csv"
    write_captures(path, caps)
    return g, read_captures(path)


def test_latest_capture_per_note_is_used(synthetic):
    g, caps = synthetic
    targets = targets_from_captures(caps, g)
    assert len(targets) == len(NOTES)
    assert min(t.measured_hz for t in targets) > 340.0  # the 300 Hz capture was replaced


def test_fit_recovers_end_correction_and_hole_diameters(synthetic):
    g, caps = synthetic
    targets = targets_from_captures(caps, g)
    result = fit_model(g, targets, fixed={"warming_c": TRUE_WARMING_C, "offset_r1_cents": 0.0, "offset_r2_cents": 0.0})
    params = {p.name: p for p in result.parameters}
    assert params["end_correction_mm"].value == pytest.approx(TRUE_EC_MM, abs=0.05)
    assert params["end_correction_mm"].pinned
    for hole, true_scale in zip(g.holes, TRUE_SCALES, strict=True):
        name = f"scale_{hole.label}"
        if name in params and params[name].pinned:
            assert params[name].value == pytest.approx(true_scale, abs=0.01), name
    assert max(abs(c) for c in result.after_cents) < 0.3
    assert max(abs(c) for c in result.before_cents) > 5.0


def test_never_more_parameters_than_captures(synthetic):
    g, caps = synthetic
    targets = targets_from_captures(caps, g)[:3]
    result = fit_model(g, targets)
    assert len(result.parameters) <= 3
    assert result.left_out  # the rest are named as not fitted


def test_degenerate_parameters_are_reported_not_pinned(synthetic):
    g, caps = synthetic
    # warming and a first-register offset both move every note alike: with first-register
    # notes only, the captures cannot tell them apart
    targets = [t for t in targets_from_captures(caps, g) if t.mode == 1]
    result = fit_model(g, targets)
    params = {p.name: p for p in result.parameters}
    assert not params["warming_c"].pinned or not params["offset_r1_cents"].pinned
    # 8 captures, so only 8 parameters: the lowest holes' diameters stay at their prior and
    # the true h6 (x 1.04) leaves a few cents
    assert "scale_h6" in result.left_out
    assert max(abs(c) for c in result.after_cents) < 5.0 < max(abs(c) for c in result.before_cents)


def test_fit_command_prints_residuals_and_parameters(synthetic, tmp_path, capsys):
    from bench.cli import main

    _, caps = synthetic
    path = tmp_path / "few.captures.csv"
    write_captures(path, [c for c in caps if c.note in ("F4", "A4", "C5", "E5")])
    assert main(["model", "fit", "wren-alto", str(path)]) == 0
    out = capsys.readouterr().out
    assert "end_correction_mm" in out and "rms:" in out
    assert "not fitted (fewer captures than parameters)" in out
    saved = tmp_path / "fitted.toml"
    assert main(["model", "fit", "wren-alto", str(path), "--save", str(saved)]) == 0
    fitted = load_geometry(saved)
    assert fitted.fingerings == builtin_geometry("wren-alto").fingerings
    assert main(["model", "fit", "wren-alto", str(path), "--save", str(saved)]) == 2
    assert "--overwrite" in capsys.readouterr().err
    assert main(["model", "fit", "wren-alto", str(tmp_path / "missing.csv")]) == 2
    assert capsys.readouterr().err.startswith("error: no such captures file")
