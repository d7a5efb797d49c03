"""End to end: the live demo plays the model, and the model's advice on its captures fixes it.

The demo source (bench.sources.demo) plays the built-in Wren alto with h3 0.3 mm too small and
h5 0.4 mm too large, every pitch from the model (bench.model.demo). Here the real engine and
analyser listen to one pass of the demo (not paced in real time), the session's captures are
written beside its log as on the screen, and ``bench model fit`` / ``bench model suggest`` are
run on that file. The fit must find h3 smaller and h5 larger than drawn, suggest must name
exactly those holes, and the advice applied to the demo's geometry must bring every captured
note within 3 c of its target.

Truth here is the model itself (a closed loop through the synthesiser, the analyser and the
capture workflow): what is checked is that the pitches survive the whole chain and that the
search finds the holes put off. The targets are 12-TET on A4 = 440 Hz (ISO 16:1975) in tune at
20 degC; the demo's bore air is 25 degC (bench.model.demo.DEMO_BORE_C).
"""

from __future__ import annotations

import time

import numpy as np
import pytest

from bench.cli import main
from bench.engine import Engine
from bench.model.acoustics import air_at
from bench.model.demo import DEMO_BORE_C, DEMO_HOLES_OFF_MM, demo_geometry
from bench.model.fit import FitTarget, fit_model, fitted_geometry, targets_from_captures
from bench.model.geometry import builtin_geometry
from bench.model.instrument import playing_frequencies
from bench.model.suggest import Limits, apply_cut, measured_errors_cents, suggest
from bench.sources.demo import DemoSource
from bench.tuning import TuningSettings
from bench.workflow.captures import captures_path_for, read_captures
from bench.workflow.live import LiveWorkflow

SETTINGS = TuningSettings(rh_percent=60.0)  # 12-TET, A4 = 440 Hz, air and tuned-at 20 degC


@pytest.fixture(scope="module")
def demo_captures(tmp_path_factory):
    log = tmp_path_factory.mktemp("demo") / "session.csv"
    workflow = LiveWorkflow(profile="alto")
    engine = Engine(DemoSource(48000, realtime=False, loops=1), SETTINGS, log_path=log, consumers=[workflow])
    engine.start()
    deadline = time.monotonic() + 300.0
    while engine.stats.state not in ("ended", "error") and time.monotonic() < deadline:
        time.sleep(0.1)
    engine.stop()
    assert engine.stats.state == "ended"
    path = captures_path_for(log)
    return path, read_captures(path)


def test_the_demo_captures_are_the_model_s_pitches(demo_captures):
    from bench.model.demo import demo_notes

    _, caps = demo_captures
    model = {n.name: n.freq_hz for n in demo_notes()}
    targets = targets_from_captures(caps, builtin_geometry("wren-alto"), 60.0)
    assert {t.fingering for t in targets} == {"F4", "G4", "A4", "Bb4", "C5", "D5", "E5", "F#5"}
    for t in targets:  # through the synthesiser, the analyser and the capture: within 0.5 c
        assert 1200 * np.log2(t.measured_hz / model[t.fingering]) == pytest.approx(0.0, abs=0.5)


def test_fit_and_suggest_on_the_demo_name_the_holes_put_off(demo_captures, capsys):
    path, _ = demo_captures
    assert main(["model", "fit", "wren-alto", str(path)]) == 0
    fit_out = capsys.readouterr().out
    scales = {line.split()[0]: float(line.split()[1]) for line in fit_out.splitlines() if line.startswith("scale_")}
    assert scales["scale_h3"] < 0.97 and scales["scale_h5"] > 1.03  # h3 acts smaller, h5 larger
    assert all(abs(v - 1.0) < 0.02 for k, v in scales.items() if k not in ("scale_h3", "scale_h5"))
    assert main(["model", "suggest", "wren-alto", str(path), "--allow", "enlarge", "--allow", "wax", "--rh", "60"]) == 0
    out = capsys.readouterr().out
    assert "hole h3: enlarge" in out and "hole h5: wax" in out
    named = {line.split()[2].rstrip(":") for line in out.splitlines() if line[:1].isdigit() and ". hole " in line}
    assert named == set(DEMO_HOLES_OFF_MM)


def test_the_advice_applied_to_the_demo_brings_its_notes_within_3_cents(demo_captures):
    _, caps = demo_captures
    g = builtin_geometry("wren-alto")
    targets = targets_from_captures(caps, g, 60.0)
    result = fit_model(g, targets)
    advice = suggest(fitted_geometry(result), targets, SETTINGS, Limits(allow=("enlarge", "wax")), result.warming_c)
    assert {c.label for c in advice.cuts} == set(DEMO_HOLES_OFF_MM)
    before = measured_errors_cents(targets, SETTINGS)
    assert np.max(np.abs(before)) > 5.0  # the holes put off put some notes clearly off
    fixed = demo_geometry()
    labels = [h.label for h in fixed.holes]
    for cut in advice.cuts:  # the advice's change of diameter, on the demo instrument itself
        fixed = apply_cut(fixed, labels.index(cut.label), cut.kind, cut.steps * cut.step_mm)
    fings = [fixed.fingering(t.fingering) for t in targets]
    res = playing_frequencies(fixed, [f.holes for f in fings], air_at(DEMO_BORE_C, 60.0), 1)
    played = [FitTarget(t.fingering, 1, float(res.freq_hz[i, 0]), t.temp_c, t.rh_percent, 2.0)
              for i, t in enumerate(targets)]
    after = measured_errors_cents(played, SETTINGS)
    assert np.max(np.abs(after)) < 3.0
