"""What-if: enlarging a hole, shortening the foot, the sensitivity table."""

from __future__ import annotations

import math

import numpy as np
import pytest

from bench.cli import main
from bench.errors import SettingsError
from bench.model.acoustics import air_at
from bench.model.geometry import builtin_geometry, parse_geometry_text
from bench.model.instrument import ModelOptions
from bench.model.whatif import (
    enlarge_hole,
    format_change,
    predict_change,
    sensitivity,
    shorten_foot,
)

AIR = air_at(25.0, 60.0)


def test_shortening_an_ideal_tube_follows_the_half_wave_law():
    # Fletcher & Rossing (1998), ch. 8: f = n c / 2L for an ideal open-open pipe, so cutting
    # 600 mm to 588 mm raises every mode by 1200 log2(600 / 588) cents.
    g = parse_geometry_text('[instrument]\nname = "t"\n[bore]\npoints_mm = [[0, 14.0], [600, 14.0]]\n[top]\nkind = "open"\n'
                            '[fingerings]\nplain = ""\n')
    change = predict_change(g, shorten_foot(g, 12.0), "cut", AIR, 3, ModelOptions(losses=False, radiation="ideal"))
    assert np.allclose(change.cents, 1200 * math.log2(600 / 588), atol=0.01)


def test_enlarging_a_hole_raises_the_notes_it_vents_and_barely_moves_the_others():
    # *common practice*: a larger open tone hole raises the note it ends; notes fingered with
    # the hole closed hardly move.
    g = builtin_geometry("wren-alto")
    change = predict_change(g, enlarge_hole(g, "h4", 7.4), "h4", AIR, registers=1)
    by_name = dict(zip(change.fingerings, change.cents[:, 0], strict=True))
    assert by_name["C5"] > 5.0  # h4 is the first open hole of C5
    assert abs(by_name["F4"]) < 1.0 and abs(by_name["A4"]) < 1.0  # h4 closed


def test_sensitivity_matches_a_direct_change_and_smaller_holes_fall():
    g = builtin_geometry("wren-alto")
    holes, names, table = sensitivity(g, AIR, registers=1)
    i, j = holes.index("h7"), names.index("G4")
    direct = predict_change(g, enlarge_hole(g, "h7", g.holes[i].outer_diameter_mm + 0.1), "d", AIR, 1)
    assert table[i, j, 0] == pytest.approx(direct.cents[j, 0], abs=1e-3)
    # *common practice*: the note falls as its hole shrinks, i.e. rises as it grows
    assert table[i, j, 0] > 0.5


@pytest.mark.parametrize(
    ("call", "match"),
    [
        (lambda g: enlarge_hole(g, "h9", 6.0), r"no hole 'h9' in wren-alto; use one of thumb, h1"),
        (lambda g: enlarge_hole(g, "h4", 30.0), r"diameter 30 mm for hole h4 is out of range"),
        (lambda g: shorten_foot(g, 200.0), r"cutting 200 mm off the foot is out of range"),
    ],
)
def test_bad_changes_are_one_line(call, match):
    with pytest.raises(SettingsError, match=match):
        call(builtin_geometry("wren-alto"))


def test_whatif_command_needs_something_to_try(capsys):
    assert main(["model", "whatif", "wren-alto"]) == 2
    assert "nothing to try" in capsys.readouterr().err
    assert main(["model", "whatif", "wren-alto", "--hole", "h4"]) == 2
    assert "--hole and --diameter go together" in capsys.readouterr().err


def _tube(length_mm: float = 600.0) -> str:
    return (f'[instrument]\nname = "t"\n[bore]\npoints_mm = [[0, 14.0], [{length_mm:g}, 14.0]]\n[top]\nkind = "open"\n'
            '[fingerings]\nplain = ""\n')


def test_reaming_a_whole_ideal_tube_leaves_its_modes_alone():
    # Fletcher & Rossing (1998), ch. 8: f = n c / 2L for an ideal open-open pipe, whatever its
    # diameter, so widening the whole bore moves no mode.
    from bench.model.whatif import ream

    g = parse_geometry_text(_tube())
    changed = ream(g, 0.0, 600.0, 2.0)
    assert changed.diameter_at(300.0) == pytest.approx(16.0)
    change = predict_change(g, changed, "ream", AIR, 3, ModelOptions(losses=False, radiation="ideal"))
    assert np.allclose(change.cents, 0.0, atol=0.01)


def test_reaming_near_a_pressure_maximum_lowers_and_near_an_open_end_raises():
    # The bore-perturbation rule (Rayleigh; Benade, *Fundamentals of Musical Acoustics*, 1976,
    # the chapter on bore perturbations, from memory as to the chapter): widening the bore where
    # the mode's pressure is large (the middle of an open-open tube for mode 1) adds compliance
    # and lowers the mode; widening it where the flow is large (near an open end) lowers the
    # inertance and raises it.
    from bench.model.whatif import ream

    g = parse_geometry_text(_tube())
    opts = ModelOptions(losses=False, radiation="ideal")
    middle = predict_change(g, ream(g, 250.0, 350.0, 1.0), "m", AIR, 1, opts).cents[0, 0]
    end = predict_change(g, ream(g, 500.0, 600.0, 1.0), "e", AIR, 1, opts).cents[0, 0]
    assert middle < -1.0 and end > 1.0


def test_moving_a_hole_down_the_bore_lowers_the_note_it_vents():
    # *common practice*: a tone hole further from the blown end gives a lower note.
    from bench.model.whatif import move_hole

    g = builtin_geometry("wren-alto")
    change = predict_change(g, move_hole(g, "h3", 232.0), "move", AIR, registers=1)
    by_name = dict(zip(change.fingerings, change.cents[:, 0], strict=True))
    assert by_name["D5"] < -5.0  # h3 is D5's first open hole
    assert abs(by_name["C5"]) < 1.0  # h3 closed


@pytest.mark.parametrize(
    ("call", "match"),
    [
        (lambda g: __import__("bench.model.whatif", fromlist=["x"]).move_hole(g, "h3", 200.0),
         r"moving hole h3 to 200 mm is out of range; give a place between"),
        (lambda g: __import__("bench.model.whatif", fromlist=["x"]).ream(g, 300.0, 200.0, 0.2),
         r"reaming from 300 to 200 mm is out of range"),
        (lambda g: __import__("bench.model.whatif", fromlist=["x"]).ream(g, 200.0, 300.0, -0.2),
         r"reaming by -0.2 mm is out of range"),
    ],
)
def test_bad_moves_and_reams_are_one_line(call, match):
    with pytest.raises(SettingsError, match=match):
        call(builtin_geometry("wren-alto"))


def test_whatif_command_moves_and_reams(capsys):
    assert main(["model", "whatif", "wren-alto", "--move", "h3", "--to-mm", "230", "--registers", "1"]) == 0
    out = capsys.readouterr().out
    assert "hole h3 moved from 227 to 230 mm" in out
    assert main(["model", "whatif", "wren-alto", "--ream", "150", "250"]) == 2
    assert "--ream and --by-mm go together" in capsys.readouterr().err


def test_a_change_carries_the_spread_between_plausible_models():
    # The uncertainty is the departure under the other tone-hole model (Dubos et al. 1999 against
    # Lefebvre & Scavone 2012, which differ in their length corrections) or another window end
    # correction: it is small but not nil where the changed hole vents, and smaller than the change.
    g = builtin_geometry("wren-alto")
    change = predict_change(g, enlarge_hole(g, "h3", 6.5), "h3", AIR, registers=1, uncertainty=True)
    assert change.uncertainty_cents is not None
    j = change.fingerings.index("D5")
    assert 0.0 < change.uncertainty_cents[j, 0] < abs(change.cents[j, 0])
    assert np.all(change.uncertainty_cents[np.isfinite(change.uncertainty_cents)] >= 0.0)
    assert "+-" in format_change(change)


def test_uncertainty_propagated_from_the_fit_agrees_with_monte_carlo():
    # The first-order propagation sqrt(diag(J Sigma J^T)) (JCGM 100:2008, GUM sec. 5.1.2) is
    # checked against its Monte Carlo counterpart (JCGM 101:2008, GUM Supplement 1): the change
    # predicted for parameters drawn from the fit's normal distribution, whose standard deviation
    # must match. The fit is to the demo's notes (the alto with h3 and h5 put off, bench.model.demo).
    from dataclasses import replace as dc_replace

    from bench.model.demo import demo_notes
    from bench.model.fit import FitTarget, fit_model
    from bench.model.instrument import with_end_correction

    names = ["F4", "G4", "A4", "Bb4", "C5", "D5", "E5", "F#5"]
    demo = {n.name: n.freq_hz for n in demo_notes()}
    g = builtin_geometry("wren-alto")
    fit = fit_model(g, [FitTarget(n, 1, demo[n], 20.0, 60.0, 2.0) for n in names])
    air = air_at(20.0 + fit.warming_c, 60.0)
    changed = enlarge_hole(fit.geometry, "h3", 6.5)
    change = predict_change(fit.geometry, changed, "h3", air, registers=1, fit=fit)
    assert change.uncertainty_kind == "fit" and "propagated from the fit" in format_change(change)
    j = change.fingerings.index("D5")
    assert change.cents[j, 0] > 3.0  # D5 vents through h3: it rises
    # Monte Carlo over the fitted parameters (offsets leave a change alone and are drawn too)
    rng = np.random.default_rng(5)
    names_p = [p.name for p in fit.parameters]
    draws = rng.multivariate_normal([p.value for p in fit.parameters], fit.covariance, size=40)
    labels = [h.label for h in g.holes]
    d5 = []
    for draw in draws:
        vals = dict(zip(names_p, draw, strict=True))
        scales = tuple(vals.get(f"scale_{lab}", s) for lab, s in zip(labels, fit.options.hole_diameter_scale, strict=True))
        ec = vals["end_correction_mm"]
        opts = dc_replace(fit.options, hole_diameter_scale=scales)
        a = air_at(20.0 + vals["warming_c"], 60.0)
        c = predict_change(with_end_correction(fit.geometry, ec), with_end_correction(changed, ec), "mc", a, 1, opts)
        d5.append(c.cents[j, 0])
    mc_sd = float(np.std(d5, ddof=1))
    print(f"D5: change {change.cents[j, 0]:.2f} c, propagated sd {change.uncertainty_cents[j, 0]:.3f} c, Monte Carlo sd {mc_sd:.3f} c")
    # 40 draws: the sample standard deviation is within about +-25 % (2 sigma) of the true one
    assert change.uncertainty_cents[j, 0] == pytest.approx(mc_sd, rel=0.35)
    assert float(np.mean(d5)) == pytest.approx(change.cents[j, 0], abs=2 * mc_sd / math.sqrt(40) + 0.05)


def test_whatif_command_says_which_uncertainty(tmp_path, capsys):
    from bench.model.demo import demo_notes
    from bench.workflow.captures import write_captures
    from tests.model.test_fit import _capture

    demo = {n.name: n for n in demo_notes()}
    caps = [_capture(i + 1, n, 1, demo[n].freq_hz) for i, n in enumerate(["F4", "G4", "A4", "Bb4", "C5", "D5", "E5", "F#5"])]
    path = tmp_path / "a.captures.csv"
    write_captures(path, caps)
    assert main(["model", "whatif", "wren-alto", "--hole", "h3", "--diameter", "6.5", "--registers", "1",
                 "--captures", str(path)]) == 0
    out = capsys.readouterr().out
    assert "the model fitted to 8 captured notes" in out and "propagated from the fit's covariance" in out
    assert main(["model", "whatif", "wren-alto", "--hole", "h3", "--diameter", "6.5", "--registers", "1"]) == 0
    out = capsys.readouterr().out
    assert "spread between model variants" in out and "propagated" not in out
