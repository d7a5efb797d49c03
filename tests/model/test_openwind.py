"""The model against OpenWInD (INRIA, PyPI ``openwind``, GPL-3), a reference library used by
the tests only: the same cylinder with three tone holes, the same air, every fingering.

OpenWInD computes the input impedance at the bore's entrance with no radiation there, so the
bore alone is compared (``include_top=False``): the frequencies of the first three minima of
``|Z|`` (the resonances of the bore with an ideally open top) must agree within 5 cents.
OpenWInD's tone holes use the Dubos et al. (1999) masses (its ``JunctionTjoint``), with the
matching volume when asked; ours are compared with both hole models.
"""

from __future__ import annotations

import itertools
import math
import warnings

import numpy as np
import pytest

from bench.model.acoustics import air_at
from bench.model.geometry import parse_geometry_text
from bench.model.instrument import ModelOptions, input_impedance, states_of

openwind = pytest.importorskip("openwind", reason="OpenWInD (pip install openwind) is the outside reference here")

TEMP_C, RH_PERCENT, CO2 = 20.0, 50.0, 4e-4
HOLES_MM = [(200.0, 6.0, 3.0), (230.0, 5.0, 3.5), (260.0, 6.0, 3.0)]  # position, diameter, chimney
FINGERINGS = {"all-closed": "xxx", "first": "oxx", "second": "xox", "third": "xxo", "two": "oox", "all-open": "ooo"}


def _our_geometry():
    holes = "".join(
        f"[[holes]]\nposition_mm = {p}\ndiameter_mm = {d}\nchimney_mm = {t}\n" for p, d, t in HOLES_MM
    )
    return parse_geometry_text(
        f'[instrument]\nname = "ref"\n[bore]\npoints_mm = [[0, 14.0], [300, 14.0]]\n[top]\nkind = "open"\n{holes}'
    )


def _openwind_minima(note: str, count: int = 3) -> list[float]:
    bore = [[0.0, 0.300, 0.007, 0.007, "linear"]]
    holes = [["label", "position", "length", "radius"]] + [
        [f"h{i}", p / 1000, t / 1000, d / 2000] for i, (p, d, t) in enumerate(HOLES_MM)
    ]
    chart = [["label", *FINGERINGS]] + [
        [f"h{i}", *(pat[i] for pat in FINGERINGS.values())] for i in range(len(HOLES_MM))
    ]
    grid = np.arange(100.0, 2600.0, 2.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ic = openwind.ImpedanceComputation(
            grid, bore, holes, chart, note=note, temperature=TEMP_C, humidity=RH_PERCENT / 100,
            carbon=CO2, compute_method="TMM", radiation_category="unflanged",
            matching_volume=True, discontinuity_mass=False,
        )
        mag = np.abs(ic.impedance)
        idx = [i for i in range(1, len(grid) - 1) if mag[i] < mag[i - 1] and mag[i] <= mag[i + 1]][:count]
        found = []
        for i in idx:  # 0.01 Hz around each grid minimum
            fine = np.linspace(grid[i] - 2.0, grid[i] + 2.0, 401)
            ic.recompute_impedance_at(fine)
            found.append(float(fine[np.argmin(np.abs(ic.impedance))]))
    return found


@pytest.mark.parametrize("hole_model", ["dubos-1999", "lefebvre-scavone-2012"])
@pytest.mark.parametrize("note", list(FINGERINGS))
def test_bore_resonances_match_openwind_within_5_cents(note, hole_model):
    reference = _openwind_minima(note)
    assert len(reference) == 3
    geometry = _our_geometry()
    air = air_at(TEMP_C, RH_PERCENT, CO2)
    options = ModelOptions(hole_model=hole_model)
    states = states_of([FINGERINGS[note]])
    # the minimum of |Z_bore| alone, on a 0.001 Hz grid around the reference
    ours = []
    for f_ref in reference:
        fine = np.linspace(f_ref - 6.0, f_ref + 6.0, 12001)
        mag = np.abs(input_impedance(geometry, states, fine, air, options, include_top=False))[0]
        ours.append(float(fine[np.argmin(mag)]))
    deviations = [1200 * math.log2(o / r) for o, r in zip(ours, reference, strict=True)]
    print(note, hole_model, [f"{d:+.2f}" for d in deviations])
    assert max(abs(d) for d in deviations) < 5.0


ALTO_BORE_MM = [[0, 19.0], [25, 19.0], [120, 18.2], [220, 16.6], [320, 14.4], [400, 12.6], [425, 12.0], [440, 12.4]]


def _openwind_bore(points_mm):
    return [
        [z0 / 1000, z1 / 1000, d0 / 2000, d1 / 2000, "linear"]
        for (z0, d0), (z1, d1) in itertools.pairwise(points_mm)
    ]


def _minima(ic, grid, count):
    mag = np.abs(ic.impedance)
    idx = [i for i in range(1, len(grid) - 1) if mag[i] < mag[i - 1] and mag[i] <= mag[i + 1]][:count]
    found = []
    for i in idx:
        fine = np.linspace(grid[i] - 2.0, grid[i] + 2.0, 401)
        ic.recompute_impedance_at(fine)
        found.append(float(fine[np.argmin(np.abs(ic.impedance))]))
    return found


def _ours(geometry, pattern, reference, options):
    states = states_of([pattern]) if pattern else np.zeros((1, 0), dtype=np.int8)
    air = air_at(TEMP_C, RH_PERCENT, CO2)
    out = []
    for f_ref in reference:
        fine = np.linspace(f_ref - 6.0, f_ref + 6.0, 12001)
        mag = np.abs(input_impedance(geometry, states, fine, air, options, include_top=False))[0]
        out.append(float(fine[np.argmin(mag)]))
    return out


def test_conical_bore_matches_openwind_spherical_waves_within_1_cent():
    # The Wren alto's reversed taper (seven cones and cylinders, no holes), OpenWInD's finite
    # elements with spherical waves against our cone matrices.
    grid = np.arange(150.0, 2500.0, 2.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ic = openwind.ImpedanceComputation(
            grid, _openwind_bore(ALTO_BORE_MM), temperature=TEMP_C, humidity=RH_PERCENT / 100, carbon=CO2,
            radiation_category="unflanged", discontinuity_mass=False, spherical_waves=True,
        )
        reference = _minima(ic, grid, 4)
    geometry = parse_geometry_text(
        f'[instrument]\nname = "cone"\n[bore]\npoints_mm = {ALTO_BORE_MM}\n[top]\nkind = "open"\n'
    )
    ours = _ours(geometry, "", reference, ModelOptions())
    deviations = [1200 * math.log2(o / r) for o, r in zip(ours, reference, strict=True)]
    print("cone", [f"{d:+.2f}" for d in deviations])
    assert len(reference) == 4
    assert max(abs(d) for d in deviations) < 1.0


@pytest.mark.parametrize("pattern", ["xxxxxxxx", "xxxxxxxo", "xxxxxxoo", "xxxxoooo", "xxxooooo", "xooooooo"])
def test_alto_bore_with_holes_matches_openwind_within_5_cents(pattern):
    # The built-in alto's bore and eight holes (undercuts made plain: OpenWInD's chimneys are
    # cylinders), Dubos et al. (1999) holes with the matching volume on both sides.
    from dataclasses import replace

    from bench.model.geometry import builtin_geometry

    alto = builtin_geometry("wren-alto")
    holes = tuple(replace(h, inner_diameter_mm=h.outer_diameter_mm) for h in alto.holes)
    geometry = replace(alto, holes=holes, top=replace(alto.top, kind="open"))
    ow_holes = [["label", "position", "length", "radius"]] + [
        [h.label, h.position_mm / 1000, h.chimney_mm / 1000, h.outer_diameter_mm / 2000] for h in holes
    ]
    chart = [["label", "note"]] + [[h.label, pattern[i]] for i, h in enumerate(holes)]
    grid = np.arange(150.0, 2500.0, 2.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ic = openwind.ImpedanceComputation(
            grid, _openwind_bore(geometry.bore_mm), ow_holes, chart, note="note", temperature=TEMP_C,
            humidity=RH_PERCENT / 100, carbon=CO2, radiation_category="unflanged", matching_volume=True,
            discontinuity_mass=False, spherical_waves=True,
        )
        reference = _minima(ic, grid, 3)
    ours = _ours(geometry, pattern, reference, ModelOptions(hole_model="dubos-1999"))
    deviations = [1200 * math.log2(o / r) for o, r in zip(ours, reference, strict=True)]
    print("alto", pattern, [f"{d:+.2f}" for d in deviations])
    assert len(reference) == 3
    assert max(abs(d) for d in deviations) < 5.0
