"""Scoring a pitch track against the synth's exact truth.

Pitch accuracy and voicing use mir_eval.melody (Salamon et al., IEEE SPM 31(2), 2014):
raw pitch accuracy is the share of reference-voiced frames within 50 c; voicing recall and
false alarm as defined there. Frames are scored at each method's own times (the truth is exact
at any instant, so no resampling). Frames near a voicing boundary or a register change
(within 30 ms plus half the method's window) are left out: there the window straddles two
states and neither answer is wrong. Gross error: |error| > 50 c; octave error: within 50 c of
a whole number (not 0) of octaves.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import mir_eval
import numpy as np

from bench.engine import EVENT_GAP_S
from corpus import Item
from methods import Track

GUARD_S = 0.03


def _boundaries(item: Item) -> tuple[np.ndarray, np.ndarray, list[tuple[float, float]]]:
    """Voicing boundary times, register-change times, and reverberant-tail spans.

    A tail span runs from a note's end for ``tail_guard_s``, or to the next note's start.
    """
    vb, tails = [], []
    notes = item.rendering.notes
    for i, (start_s, end_s, ev) in enumerate(notes):
        if ev.level_dbfs < -150:
            continue
        vb += [start_s + ev.attack_s, end_s - ev.release_s]
        if item.tail_guard_s:
            next_s = notes[i + 1][0] if i + 1 < len(notes) else np.inf
            tails.append((end_s, min(end_s + item.tail_guard_s, next_s)))
    jumps = [t for t, _, _ in item.rendering.jumps]
    return np.array(vb), np.array(jumps), tails


def _far_from(times: np.ndarray, marks: np.ndarray, guard: float) -> np.ndarray:
    if marks.size == 0:
        return np.ones(times.shape, dtype=bool)
    marks = np.sort(marks)
    i = np.clip(np.searchsorted(marks, times), 1, marks.size - 1) if marks.size > 1 else np.zeros(times.shape, int)
    d = np.abs(times - marks[i])
    if marks.size > 1:
        d = np.minimum(d, np.abs(times - marks[i - 1]))
    return d > guard


@dataclass
class Pool:
    """Frames of one method and category, pooled over items."""

    steady_err_cents: list[np.ndarray] = field(default_factory=list)
    all_err_cents: list[np.ndarray] = field(default_factory=list)
    ref_voiced: list[np.ndarray] = field(default_factory=list)
    est_voiced: list[np.ndarray] = field(default_factory=list)
    ref_cent: list[np.ndarray] = field(default_factory=list)
    est_cent: list[np.ndarray] = field(default_factory=list)

    def add(self, item: Item, track: Track) -> None:
        t = track.times_s
        keep = (t >= 0) & (t < item.rendering.score.duration_s)
        t, f0 = t[keep], track.f0_hz[keep]
        truth = item.rendering.truth(t, settle_s=0.1)
        ref = truth.sounding_f0_hz.copy()
        if item.never_voiced:
            ref[:] = np.nan
        vb, jumps, tails = _boundaries(item)
        guard = GUARD_S + 0.5 * track.window_s
        scored = _far_from(t, vb, guard) & _far_from(t, jumps, guard)
        for a, b in tails:
            scored &= ~((t > a) & (t < b + guard))
        ref_v = np.isfinite(ref)
        est_v = np.isfinite(f0)
        self.ref_voiced.append(ref_v[scored])
        self.est_voiced.append(est_v[scored])
        self.ref_cent.append(mir_eval.melody.hz2cents(np.where(ref_v, ref, 0.0))[scored])
        self.est_cent.append(mir_eval.melody.hz2cents(np.where(est_v, f0, 0.0))[scored])
        both = scored & ref_v & est_v
        err = 1200.0 * np.log2(f0[both] / ref[both])
        self.all_err_cents.append(err)
        settled = both & truth.settled & (not item.never_voiced)
        self.steady_err_cents.append(1200.0 * np.log2(f0[settled] / ref[settled]))

    def summary(self) -> dict[str, float]:
        cat = lambda xs: np.concatenate(xs) if xs else np.zeros(0)  # noqa: E731
        rv, ev = cat(self.ref_voiced).astype(bool), cat(self.est_voiced).astype(bool)
        rc, ec = cat(self.ref_cent), cat(self.est_cent)
        err, st = cat(self.all_err_cents), np.abs(cat(self.steady_err_cents))
        out: dict[str, float] = {"frames": float(rv.size), "ref_voiced": float(rv.sum())}
        out["median_c"] = float(np.median(st)) if st.size else np.nan
        out["p95_c"] = float(np.percentile(st, 95)) if st.size else np.nan
        if err.size:
            gross = np.abs(err) > 50.0
            octs = np.round(err / 1200.0)
            octave = (octs != 0) & (np.abs(err - 1200.0 * octs) < 50.0)
            out["gross_pct"] = 100.0 * float(gross.mean())
            out["octave_pct"] = 100.0 * float(octave.mean())
        else:
            out["gross_pct"] = out["octave_pct"] = np.nan
        if rv.any():
            out["rpa"] = float(mir_eval.melody.raw_pitch_accuracy(rv.astype(float), rc, ev.astype(float), ec))
            out["v_recall_pct"] = 100.0 * float(mir_eval.melody.voicing_recall(rv.astype(float), ev.astype(float)))
        else:
            out["rpa"] = out["v_recall_pct"] = np.nan
        if (~rv).any():
            out["v_false_pct"] = 100.0 * float(mir_eval.melody.voicing_false_alarm(rv.astype(float), ev.astype(float)))
        else:
            out["v_false_pct"] = np.nan
        return out


@dataclass
class RegisterScore:
    """Register-change figures of our analyser, pooled over items."""

    follow_delays_s: list[float] = field(default_factory=list)  # time_s of the following frame - change
    follow_ready_s: list[float] = field(default_factory=list)  # its ready_s - change
    not_followed: int = 0
    true_jumps: dict[str, int] = field(default_factory=lambda: {"overblown": 0, "vented": 0})
    matched: dict[str, int] = field(default_factory=lambda: {"overblown": 0, "vented": 0})
    detections: dict[str, int] = field(default_factory=lambda: {"overblown": 0, "vented": 0})
    detect_delays_s: dict[str, list[float]] = field(default_factory=lambda: {"overblown": [], "vented": []})
    weakening_true: int = 0
    weakening_seen: int = 0
    false_by_category: dict[str, int] = field(default_factory=dict)  # unmatched detections
    missed: dict[str, int] = field(default_factory=dict)  # "kind, weakening yes/no" -> count

    def add(self, item: Item, track: Track, match_window_s: float = 0.3) -> None:
        frames = track.frames
        if not frames:
            return
        ready = np.array([fr.ready_s for fr in frames])
        times = track.times_s
        f0 = track.f0_hz
        kinds = [fr.jump for fr in frames]
        regs = [fr.register for fr in frames]
        # a detection: a jump kind beginning on a voiced frame after one with no jump or
        # another kind; unvoiced frames are skipped when the last voiced one is under
        # EVENT_GAP_S back (0.1 s), as the live screen's event list counts them
        onsets: list[tuple[float, str]] = []
        prev, last_voiced_s = None, -np.inf
        for fr, k in zip(frames, kinds):
            if fr.f0_hz is None:
                continue
            if fr.time_s - last_voiced_s > EVENT_GAP_S:
                prev = None
            if k is not None and k != prev:
                onsets.append((fr.ready_s, k))
            prev, last_voiced_s = k, fr.time_s
        for _, k in onsets:
            self.detections[k] = self.detections.get(k, 0) + 1
        used: set[int] = set()
        after = item.rendering.truth(times).sounding_f0_hz
        for start_s, end_s, ev in item.rendering.notes:
            if ev.jump_at_s is None:
                continue
            tj = start_s + ev.jump_at_s
            kind = str(ev.jump_kind)
            self.true_jumps[kind] += 1
            # followed: the first frame centred at or after the change from which the reported
            # pitch stays within 50 c of the sounding one for 50 ms (on the track's own time
            # axis); its ready_s says when a display could first show it
            span = np.flatnonzero((times >= tj) & (times < min(end_s - ev.release_s, tj + 0.3)) & np.isfinite(after))
            est = np.where(np.isfinite(f0[span]), f0[span], 1.0)
            on_new = np.isfinite(f0[span]) & (np.abs(1200 * np.log2(est / after[span])) < 50.0)
            hold = max(1, int(round(0.05 / max(float(np.median(np.diff(times))), 1e-6))))
            found = next((j for j in range(on_new.size - hold + 1) if on_new[j : j + hold].all()), None)
            if found is None:
                self.not_followed += 1
            else:
                self.follow_delays_s.append(float(times[span[found]] - tj))
                self.follow_ready_s.append(float(ready[span[found]] - tj))
            best = None
            for j, (r, k) in enumerate(onsets):
                if j in used or k != kind:
                    continue
                if tj - 0.02 <= r <= tj + match_window_s:
                    best = j
                    break
            if best is not None:
                used.add(best)
                self.matched[kind] += 1
                self.detect_delays_s[kind].append(onsets[best][0] - tj)
            else:
                key = f"{kind}, {'with' if ev.weaken_s > 0 else 'no'} weakening"
                self.missed[key] = self.missed.get(key, 0) + 1
            if ev.weaken_s > 0:
                self.weakening_true += 1
                w0 = tj - ev.jump_transition_s / 2 - ev.weaken_s
                span = (ready >= w0) & (ready <= tj + 0.1)
                if any(regs[i] == "weakening" for i in np.flatnonzero(span)):
                    self.weakening_seen += 1
        n_false = len(onsets) - len(used)
        if n_false:
            self.false_by_category[item.category] = self.false_by_category.get(item.category, 0) + n_false
