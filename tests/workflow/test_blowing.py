"""Blowing curves: the synth's known cents-per-dB slope and jump level must come back."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats

from bench.workflow.blowing import (
    BlowingCurveTracker,
    blowing_curve,
    find_blowing_curves,
    fit_line,
)
from dsp.synth import NoteEvent

from .sessions import analyse, render_events, truth_rows

F4_HZ = 349.2282  # REFERENCES §1, A4 = 440


def test_fit_line_matches_scipy_linregress():
    # scipy.stats.linregress is the outside reference for slope, intercept and stderr
    rng = np.random.default_rng(3)
    x = np.linspace(-30, -12, 400)
    y = 0.7 * x + 4.0 + rng.normal(0, 0.8, x.size)
    ref = scipy.stats.linregress(x, y)
    got = fit_line(list(x), list(y))
    assert got is not None
    assert got.slope == pytest.approx(ref.slope, rel=1e-9)
    assert got.intercept == pytest.approx(ref.intercept, rel=1e-9)
    assert got.slope_se == pytest.approx(ref.stderr, rel=1e-6)
    assert fit_line([1.0, 1.0, 1.0], [0.0, 1.0, 2.0]) is None  # no level change
    assert fit_line([1.0, 2.0], [0.0, 1.0]) is None  # too few points


@pytest.mark.parametrize("cents_per_db", [0.8, 0.35, -0.5])
def test_crescendo_slope_through_the_analyser(cents_per_db):
    # dsp.synth raises pitch by cents_per_db per dB above the note's start level; the
    # analyser's frames must give that slope back within 0.03 c/dB.
    r = render_events([NoteEvent(F4_HZ, 4.0, level_dbfs=-34.0, crescendo_db=18.0, cents_per_db=cents_per_db)])
    curve = blowing_curve(analyse(r))
    assert curve is not None and curve.note == "F4"
    assert curve.slope_cents_per_db == pytest.approx(cents_per_db, abs=0.03)
    assert curve.slope_se_cents_per_db is not None and curve.slope_se_cents_per_db < 0.02
    assert curve.level_range_db == pytest.approx(18.0 * (4.0 - 0.15 - 0.05) / 4.0, abs=1.0)
    assert curve.break_level_dbfs is None
    # cents at the start level: the synth's pitch is exact there
    assert curve.cents_at(-34.0) == pytest.approx(0.0, abs=0.5)


def _jumping_crescendo(kind="overblown", jump_at_s=3.0):
    dur_s, start_db, rise_db = 4.0, -32.0, 16.0
    r = render_events(
        [NoteEvent(F4_HZ, dur_s, level_dbfs=start_db, crescendo_db=rise_db, cents_per_db=0.6,
                   jump_at_s=jump_at_s, jump_kind=kind)]
    )
    return r, start_db + rise_db * jump_at_s / dur_s


@pytest.mark.parametrize("kind", ["overblown", "vented"])
def test_break_level_from_synth_truth(kind):
    # Rows from the synth's exact truth (register state and held note as rendered). The break
    # level must equal the synth's level at the jump within 0.5 dB (the lookback reads
    # 0.07 s x 4 dB/s = 0.28 dB low), the break time its jump time within 10 ms.
    r, jump_level = _jumping_crescendo(kind)
    curve = blowing_curve(truth_rows(r, hop_s=0.005))
    assert curve is not None
    assert curve.break_level_dbfs == pytest.approx(jump_level, abs=0.5)
    assert curve.break_time_s == pytest.approx(r.jumps[0][0], abs=0.01)
    assert curve.jump_kind == kind
    assert curve.slope_cents_per_db == pytest.approx(0.6, abs=0.01)
    assert curve.level_max_dbfs <= jump_level + 0.05  # the change is not in the fit


@pytest.mark.parametrize("kind", ["overblown", "vented"])
def test_break_level_through_the_analyser(kind):
    # The same through dsp.analyser, once its register monitor reports the jump.
    r, jump_level = _jumping_crescendo(kind)
    rows = analyse(r)
    if not any(row.register_state == "jumped" for row in rows):
        pytest.skip("the analyser reported no register jump for this crescendo")
    curve = blowing_curve(rows, "F4")
    assert curve is not None and curve.break_level_dbfs is not None
    assert curve.break_level_dbfs == pytest.approx(jump_level, abs=0.5)
    assert curve.break_time_s == pytest.approx(r.jumps[0][0], abs=0.05)
    assert curve.jump_kind == kind
    assert curve.slope_cents_per_db == pytest.approx(0.6, abs=0.03)


def test_series_of_dynamics_pools_the_runs():
    # Three separate F4s at -30, -24, -18 dBFS, each tuned as a 0.5 c/dB slope would put it.
    slope = 0.5
    events = [
        NoteEvent(F4_HZ * 2 ** (slope * (lv + 30.0) / 1200), 1.0, level_dbfs=lv, gap_s=0.3)
        for lv in (-30.0, -24.0, -18.0)
    ]
    rows = truth_rows(render_events(events))
    curve = blowing_curve(rows, "F4")
    assert curve is not None
    assert curve.slope_cents_per_db == pytest.approx(slope, abs=0.01)
    assert curve.level_min_dbfs == pytest.approx(-30.0, abs=0.01)
    assert curve.level_max_dbfs == pytest.approx(-18.0, abs=0.01)
    assert blowing_curve(rows, "G4") is None


def test_find_blowing_curves_only_picks_crescendos():
    events = [
        NoteEvent(F4_HZ, 1.0, gap_s=0.3),
        NoteEvent(392.0, 3.0, level_dbfs=-30.0, crescendo_db=12.0, cents_per_db=0.4, gap_s=0.3),
    ]
    curves = find_blowing_curves(truth_rows(render_events(events)))
    assert [c.note for c in curves] == ["G4"]
    assert curves[0].slope_cents_per_db == pytest.approx(0.4, abs=0.01)


def test_tracker_frame_by_frame_equals_pure_function_and_reset_repeats():
    r, _ = _jumping_crescendo("overblown")
    rows = truth_rows(r)
    tr = BlowingCurveTracker()
    breaks = [b for row in rows if (b := tr.push(row)) is not None]
    tr.finish()
    assert len(breaks) == 1
    assert tr.finished[0] == blowing_curve(rows)
    live = tr.finished[0]
    tr.reset()
    assert tr.current() is None
    for row in rows:
        tr.push(row)
    tr.finish()
    assert tr.finished[0] == live


def test_tracker_current_during_a_crescendo():
    r = render_events([NoteEvent(F4_HZ, 3.0, level_dbfs=-30.0, crescendo_db=12.0, cents_per_db=0.8)])
    tr = BlowingCurveTracker()
    slopes = []
    for row in truth_rows(r):
        tr.push(row)
        cur = tr.current()
        if cur is not None and cur.slope_cents_per_db is not None and cur.n > 50:
            slopes.append(cur.slope_cents_per_db)
    assert slopes and all(s == pytest.approx(0.8, abs=0.01) for s in slopes)
