"""The streaming analyser's contract: timing, streaming equivalence, reset, bounded memory,
argument checks. Pitch references: the exact frequency of the test tones; the synthetic
duct flute (dsp.synth) for realistic material with known truth."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from dsp.analyser import StreamingAnalyser
from dsp.frame import Frame
from dsp.synth import NoteEvent, render

SR = 48000


def _fields(frames: list[Frame]) -> dict[str, np.ndarray]:
    """Frame fields as arrays (None -> nan / ''), for exact comparison."""
    out: dict[str, list] = {f.name: [] for f in dataclasses.fields(Frame)}
    for fr in frames:
        for name in out:
            v = getattr(fr, name)
            if name == "harmonics_db":
                v = (np.nan,) * 8 if v is None else v
            elif name in ("register", "jump"):
                v = "" if v is None else v
            elif v is None:
                v = np.nan
            out[name].append(v)
    return {k: np.asarray(v) for k, v in out.items()}


@pytest.fixture(scope="module")
def flute_audio() -> np.ndarray:
    notes = [
        NoteEvent(523.251, 0.5, jump_at_s=0.3, jump_kind="overblown", gap_s=0.1),
        NoteEvent(349.228, 0.4, vibrato_cents=15, gap_s=0.05),
        NoteEvent(440.0, 0.5, jump_at_s=0.35, jump_kind="vented", weaken_s=0.1),
    ]
    return render(notes, SR, seed=2, reverb_s=0.3).audio


def test_contract_attributes():
    an = StreamingAnalyser(sample_rate=SR)
    assert an.sample_rate == SR
    assert an.frame_size == 4096
    assert 0 < an.hop_size <= 0.010 * SR
    assert an.process(np.zeros(0, dtype=np.float32)) == []


def test_random_block_sizes_give_the_same_frames_as_one_block(flute_audio):
    an = StreamingAnalyser(SR)
    whole = an.process(flute_audio)
    an2 = StreamingAnalyser(SR)
    rng = np.random.default_rng(11)
    parts: list[Frame] = []
    pos = 0
    while pos < flute_audio.size:
        n = int(rng.choice([0, 1, 7, 239, 240, 241, 1000, 4096, 5000]))
        parts.extend(an2.process(flute_audio[pos : pos + n]))
        pos += n
    a, b = _fields(whole), _fields(parts)
    assert len(whole) == len(parts) > 100
    for name in a:
        np.testing.assert_array_equal(a[name], b[name], err_msg=name)


def test_reset_repeats_exactly(flute_audio):
    an = StreamingAnalyser(SR)
    first = an.process(flute_audio)
    an.lock(440.0)
    an.process(flute_audio[:5000])
    an.reset()
    again = an.process(flute_audio)
    a, b = _fields(first), _fields(again)
    for name in a:
        np.testing.assert_array_equal(a[name], b[name], err_msg=name)


def test_times_count_from_the_first_sample_and_mark_the_window_centre():
    an = StreamingAnalyser(SR)
    frames = an.process(np.zeros(SR // 2))
    n, hop = an.frame_size, an.hop_size
    ready = np.array([f.ready_s for f in frames])
    centre = np.array([f.time_s for f in frames])
    np.testing.assert_allclose(ready, (n + hop * np.arange(len(frames))) / SR)
    np.testing.assert_allclose(ready - centre, n / 2 / SR)


def test_time_of_a_tone_step():
    # silence, then a steady 440 Hz tone from t0: the first voiced frame is centred near t0
    t0 = 0.25
    t = np.arange(SR) / SR
    x = np.where(t >= t0, 0.2 * np.sin(2 * np.pi * 440.0 * (t - t0)), 0.0)
    frames = StreamingAnalyser(SR).process(x)
    first = next(f for f in frames if f.f0_hz is not None)
    assert t0 - 0.005 <= first.time_s <= t0 + 0.025
    # a window that straddles the onset measures a truncated tone: a few cents off at most
    assert first.f0_hz == pytest.approx(440.0, rel=5e-3)
    later = [f.f0_hz for f in frames if f.time_s > t0 + 0.045]
    np.testing.assert_allclose(later, 440.0, rtol=1e-6)


def test_pitch_step_is_placed_at_the_frame_centre():
    t_step = 0.5
    t = np.arange(SR) / SR
    f = np.where(t < t_step, 440.0, 493.883)
    x = 0.2 * np.sin(2 * np.pi * np.cumsum(f) / SR)
    frames = StreamingAnalyser(SR).process(x)
    mid = np.sqrt(440.0 * 493.883)
    for fr in frames:
        assert fr.f0_hz is not None  # a slur is no silence
        if fr.time_s < t_step - 0.035:
            assert fr.f0_hz == pytest.approx(440.0, rel=1e-4)
        elif fr.time_s > t_step + 0.035:
            assert fr.f0_hz == pytest.approx(493.883, rel=1e-4)
        # the nearer note is followed from 15 ms either side of the step
        if fr.time_s < t_step - 0.015:
            assert fr.f0_hz < mid
        elif fr.time_s > t_step + 0.015:
            assert fr.f0_hz > mid


def test_synth_notes_within_targets(flute_audio):
    notes = [NoteEvent(f, 0.6, vibrato_cents=v, gap_s=0.1) for f, v in [(261.626, 0), (587.33, 0), (1396.91, 0)]]
    r = render(notes, SR, seed=4, breath_noise_db=-35.0, reverb_s=0.4)
    frames = StreamingAnalyser(SR).process(r.audio)
    times = np.array([f.time_s for f in frames])
    truth = r.truth(times)
    f0 = np.array([np.nan if f.f0_hz is None else f.f0_hz for f in frames])
    ok = truth.settled
    err = np.abs(1200 * np.log2(f0[ok] / truth.sounding_f0_hz[ok]))
    assert not np.isnan(err).any()
    assert np.median(err) <= 0.1
    assert np.percentile(err, 95) <= 2.0
    # nothing voiced well outside the notes
    quiet = ~truth.voiced & (np.abs(times - np.round(times * 10) / 10) >= 0)  # every unvoiced instant
    far = quiet & np.array([all(abs(t - s) > 0.06 and abs(t - e) > 0.06 for s, e, _ in r.notes) for t in times])
    assert np.all(np.isnan(f0[far]))


def test_memory_stays_bounded():
    an = StreamingAnalyser(SR)
    block = np.zeros(4096, dtype=np.float32)
    for _ in range(200):
        an.process(block)
    assert an._buf.size <= an.frame_size + 4096  # the internal buffer never grows
    assert an._store.size == an._store_size  # nor the store it lives in
    an.process(np.zeros(48000 * 20, dtype=np.float32))  # one long block grows the store ...
    assert an._store.size == an._store_size  # ... which is given back at once


def test_a_rejected_block_changes_nothing(flute_audio):
    an = StreamingAnalyser(SR)
    ref = an.process(flute_audio)
    an2 = StreamingAnalyser(SR)
    got = an2.process(flute_audio[:30000])
    bad = flute_audio[30000:31000].copy()
    bad[500] = np.inf
    with pytest.raises(ValueError, match="at sample 500"):
        an2.process(bad)
    got += an2.process(flute_audio[30000:])
    a, b = _fields(ref), _fields(got)
    for name in a:
        np.testing.assert_array_equal(a[name], b[name], err_msg=name)


def test_any_float_layout_reads_the_same(flute_audio):
    x = flute_audio[:20000].astype(np.float64)
    ref = _fields(StreamingAnalyser(SR).process(x))
    strided = np.repeat(x, 2)[::2]  # a non-contiguous view of the same samples
    for block in (strided, x.astype(np.float32), list(x)):  # the samples are float32 values: exact
        got = _fields(StreamingAnalyser(SR).process(block))
        for name in ref:
            np.testing.assert_array_equal(ref[name], got[name], err_msg=name)


@pytest.mark.parametrize(
    "kwargs, match",
    [
        (dict(sample_rate=8000), "sample_rate 8000 Hz is below 16000 Hz; resample"),
        (dict(sample_rate=192000), "sample_rate 192000 Hz is above 96000 Hz"),
        (dict(sample_rate=48000, hop_size=960), "hop_size 960 is outside 1..480"),
        (dict(sample_rate=48000, frame_size=512), "frame_size 512 cannot hold"),
    ],
)
def test_bad_construction(kwargs, match):
    with pytest.raises(ValueError, match=match):
        StreamingAnalyser(**kwargs)


def test_bad_blocks_and_targets():
    an = StreamingAnalyser(SR)
    with pytest.raises(ValueError, match="1-D array"):
        an.process(np.zeros((2, 100)))
    with pytest.raises(TypeError, match="not floating point"):
        an.process(np.zeros(100, dtype=np.int16))
    with pytest.raises(ValueError, match="at sample 3"):
        an.process(np.array([0.0, 0.0, 0.0, np.nan]))
    with pytest.raises(ValueError, match="target_hz 5 Hz is outside"):
        an.lock(5)
    an.lock(440.0)
    an.lock(None)
