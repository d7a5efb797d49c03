"""Instrument-model figures: time to predict a whole compass, and a fit.

Prints figures and asserts nothing. Each time is also given as a ratio against a reference
measured in the same run -- a plain numpy complex FFT of 2**16 points -- so figures from
different machines can be compared:

* predict: every fingering of the built-in Wren alto (27 fingerings x 3 registers), the
  coarse grid and the refinement together;
* grid: the impedance of the 27 fingerings on the coarse grid, rows shared between fingerings
  whose holes agree from the foot up, against the same computed with a row of frequencies per
  fingering (the plain path the refinement takes) in the same run;
* fit: ``bench model fit``'s fitting on 12 captures synthesised from the model (every
  parameter free), timed once;
* suggest: ``bench model suggest``'s search (enlarge or wax, every hole) on the 8 notes of the
  demo alto (two holes put off, bench.model.demo), the geometry as given, timed once.

    python benchmarks/bench_model.py            # predict timed 5 times (median)
    python benchmarks/bench_model.py --repeat 3
"""

from __future__ import annotations

import argparse
import math
import statistics
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from bench.model.acoustics import air_at
from bench.model.demo import demo_notes
from bench.model.fit import FitTarget, fit_model
from bench.model.geometry import builtin_geometry
from bench.model.instrument import (
    ModelOptions,
    input_impedance,
    playing_frequencies,
    states_of,
)
from bench.model.predict import predict
from bench.model.suggest import Limits, suggest
from bench.tuning import TuningSettings

FIT_NOTES = ["F4", "G4", "A4", "Bb4", "C5", "D5", "E5", "F#5", "G#5", "A5", "C6", "D6"]


def _median_time(func: object, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        func()  # type: ignore[operator]
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    rng = np.random.default_rng(1)
    block = rng.standard_normal(2**16) + 1j * rng.standard_normal(2**16)
    ref_s = _median_time(lambda: np.fft.fft(block), max(args.repeat, 20))

    geometry = builtin_geometry("wren-alto")
    air = air_at(25.0, 60.0)
    preds = predict(geometry, air, 3)
    predict_s = _median_time(lambda: predict(geometry, air, 3), args.repeat)

    states = states_of([f.holes for f in geometry.fingerings])
    grid = np.geomspace(98.0, 4300.0, 380)
    tiled = np.tile(grid, (len(states), 1))
    shared_s = _median_time(lambda: input_impedance(geometry, states, grid, air), args.repeat)
    plain_s = _median_time(lambda: input_impedance(geometry, states, tiled, air), args.repeat)

    truth = replace(geometry, top=replace(geometry.top, end_correction_mm=geometry.top.end_correction_mm + 1.5))
    fings = [geometry.fingering(n) for n in FIT_NOTES]
    res = playing_frequencies(truth, [f.holes for f in fings], air_at(25.0, 60.0), 3,
                              ModelOptions(hole_diameter_scale=(1.0, 0.97, 1.03, 1.0, 0.95, 1.0, 1.02, 1.0)))
    targets = [FitTarget(f.name, f.register, float(res.freq_hz[i, f.register - 1]), 21.0, 60.0, 2.0)
               for i, f in enumerate(fings)]
    t0 = time.perf_counter()  # one fit only: it takes seconds
    result = fit_model(geometry, targets)
    fit_s = time.perf_counter() - t0

    demo = {n.name: n.freq_hz for n in demo_notes()}
    tuned = ["F4", "G4", "A4", "Bb4", "C5", "D5", "E5", "F#5"]
    demo_targets = [FitTarget(n, 1, demo[n], 20.0, 60.0, 2.0) for n in tuned]
    t0 = time.perf_counter()
    advice = suggest(geometry, demo_targets, TuningSettings(rh_percent=60.0), Limits(allow=("enlarge", "wax")))
    suggest_s = time.perf_counter() - t0

    print(f"reference: numpy FFT of 2**16 complex points: {ref_s * 1e3:.3f} ms")
    print(f"predict: {len(geometry.fingerings)} fingerings x 3 registers ({len(preds)} rows): "
          f"{predict_s * 1e3:.0f} ms = {predict_s / ref_s:.0f} x reference "
          f"({predict_s / len(preds) * 1e3:.2f} ms per note and register)")
    print(f"grid: {len(states)} fingerings x {len(grid)} frequencies: shared rows {shared_s * 1e3:.1f} ms, "
          f"each fingering alone {plain_s * 1e3:.1f} ms: {plain_s / shared_s:.2f} x faster")
    rms = math.sqrt(float(np.mean(result.after_cents**2)))
    print(f"fit: {len(targets)} captures, {len(result.parameters)} parameters: {fit_s:.2f} s = "
          f"{fit_s / ref_s:.0f} x reference (residual rms after {rms:.2f} c)")
    cuts = ", ".join(f"{c.label} {c.kind} {c.steps} x {c.step_mm:g} mm" for c in advice.cuts)
    print(f"suggest: {len(demo_targets)} notes: {suggest_s:.2f} s = {suggest_s / ref_s:.0f} x reference ({cuts})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
