"""Properties that hold for any captures (hypothesis)."""

from __future__ import annotations

import dataclasses

import numpy as np
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st

from bench.workflow.captures import Capture, scaled_mad
from bench.workflow.compare import compare_captures
from bench.workflow.profiles import get_profile

ALTO = get_profile("alto")

BASE = Capture(
    index=1, label="", source="auto", note="F4", midi=65, register=1, mode=1, jump="",
    start_s=0.0, end_s=1.0, frames=100, cents=0.0, cents_spread=0.5, cents_raw=0.0,
    f0_hz=349.2282, target_hz=349.2282, level_dbfs=-20.0, level_min_dbfs=-21.0,
    level_max_dbfs=-19.0, odd_even_db=3.0, harmonics_db=(0.0,) * 8, register_margin_db=None,
    break_level_dbfs=None, temperament="equal", tonic="C", a4_hz=440.0, temp_c=20.0,
    ref_temp_c=20.0, rh_percent=None,
)  # fmt: skip

notes = st.lists(
    st.tuples(st.integers(65, 91), st.floats(-30, 30), st.floats(0, 5)), min_size=1, max_size=27,
    unique_by=lambda t: t[0],
)


def _caps(items):
    out = []
    for i, (midi, cents, spread) in enumerate(items, start=1):
        hz = 440.0 * 2 ** ((midi - 69) / 12)
        out.append(dataclasses.replace(BASE, index=i, midi=midi, note=f"n{midi}", cents=cents,
                                       cents_spread=spread, target_hz=hz,
                                       f0_hz=hz * 2 ** (cents / 1200)))
    return out


@settings(max_examples=60, deadline=None)
@given(notes)
def test_self_comparison_never_moves(items):
    caps = _caps(items)
    cmp = compare_captures(caps, caps, ALTO)
    assert cmp.moved() == []
    assert all(c.delta_cents == 0.0 for c in cmp.changes)


@settings(max_examples=60, deadline=None)
@given(notes, st.integers(0, 26), st.floats(1.5, 40.0), st.sampled_from([1, -1]))
def test_one_shift_beyond_noise_moves_only_that_note(items, pick, shift, sign):
    caps = _caps(items)
    k = pick % len(caps)
    noise = 2.0 * np.hypot(caps[k].cents_spread, caps[k].cents_spread)
    shift = max(shift, noise + 0.01)
    after = list(caps)
    after[k] = dataclasses.replace(caps[k], cents=caps[k].cents + sign * shift)
    cmp = compare_captures(caps, after, ALTO)
    assert [c.midi for c in cmp.moved()] == [caps[k].midi]


@given(st.lists(st.floats(-100, 100), min_size=2, max_size=200))
def test_scaled_mad_equals_scipy(values):
    # scipy.stats.median_abs_deviation(scale="normal") divides by 0.67449 (1/1.4826)
    ref = scipy.stats.median_abs_deviation(np.array(values), scale="normal")
    assert abs(scaled_mad(values) - ref) <= 1e-3 * max(1.0, ref)
