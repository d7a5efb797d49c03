"""A synthetic duct-flute voice whose pitch, level and register are known exactly.

The synth is the project's test instrument: every sample comes from a phase that is
integrated from a known instantaneous frequency, so :meth:`Score.truth` reports the exact
sounding and fingered fundamentals at any instant, together with the register state.

Physics it follows (Fletcher & Rossing, *The Physics of Musical Instruments*, 2nd ed. 1998,
open-open pipe: ``f_n = n c / (2 L_eff)``, all harmonics present):

* first register: a strong fundamental and weaker odd *and* even harmonics with a falling
  slope;
* overblown or vented octave (mode 2): the fingered note's fundamental and its odd
  harmonics vanish, only multiples of ``2 f0`` remain; mode 3 (the twelfth) keeps only
  multiples of ``3 f0``;
* pitch rises with blowing pressure (``cents_per_db``); an overblown change raises the level
  by several dB within ~30 ms, a vented change keeps the level (or changes it a little,
  ``jump_level_db``);
* the breath may rise into an overblow (``rise_s``, ``rise_db``): the level climbs while the
  partials the new mode lacks fade, then the upper mode sounds;
* a cracked attack (``crack_mode``) speaks an upper mode for its first ``crack_s`` and then falls
  to the fingered register.

Sounds that are never a note: handling noise (thumps and clicks) and breath without a tone
(:class:`NoiseEvent`), mains hum, a noise floor set by its SNR against the tone, and a room
(T60 and direct-to-reverberant ratio). The truth (:meth:`Score.truth`) never calls them voiced;
a note's release and the reverberant tail after it are outside the note. Register events
(:class:`RegisterEvent`) list every change of the sounding mode: overblown, vented, cracked.

Everything is pure numpy/scipy; randomness comes only from ``numpy.random.Generator`` objects
built from ``seed``, so a rendering is reproducible bit for bit, and :func:`render_blocks`
gives the same samples as :func:`render` whatever the block size.
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Literal

import numpy as np
import scipy.signal
from numpy.typing import NDArray

__all__ = [
    "NoiseEvent",
    "NoteEvent",
    "RegisterEvent",
    "Rendering",
    "Score",
    "Truth",
    "nominal_tone_dbfs",
    "plan",
    "register_profile_db",
    "render",
    "render_blocks",
]

JumpKindName = Literal["overblown", "vented"]
NoiseKindName = Literal["thump", "click", "breath"]

_CHUNK = 1 << 15  # internal chunk (samples): noise grids and note chunks are aligned to it
_MAX_SOUNDING_HARMONICS = 20
_NYQUIST_SHARE = 0.45  # partials above this share of the sample rate are left out
_CRACK_TRANSITION_S = 0.01  # a cracked attack falls to the fingered register within 10 ms


@dataclass(frozen=True, slots=True)
class NoteEvent:
    """One note of the synthetic duct flute.

    Attributes
    ----------
    f0_hz : float > 0, Hz
        Fundamental of the fingered note (first register).
    duration_s : float > 0, seconds
        Length of the note, attack and release included.
    level_dbfs : float, dBFS
        RMS of the steady tone (breath noise excluded). A full-scale sine is -3.01 dBFS.
    mode : int >= 1
        Sounding mode at the start: 1 fundamental, 2 octave, 3 twelfth ...
    jump_at_s : float or None, seconds
        Time within the note of a register change (centre of the ~30 ms change).
    jump_kind : "overblown" | "vented" | None
        Kind of the change; required with ``jump_at_s``.
    jump_mode : int >= 1
        Sounding mode after the change.
    crescendo_db : float, dB
        Level change over the whole note (linear in dB).
    vibrato_cents : float >= 0, cents
        Peak deviation of a sinusoidal vibrato.
    vibrato_hz : float > 0, Hz
        Vibrato rate.
    cents_per_db : float, cents/dB
        Pitch rise per dB of level above ``level_dbfs`` (blowing harder sharpens).
    chiff : bool
        Add the attack transient (a short noisy, inharmonic burst).
    gap_s : float >= 0, seconds
        Silence after the note.
    h1_offset_db : float, dB
        Added to the sounding fundamental of every register; e.g. -15 makes the
        fundamental weaker than the 2nd harmonic (octave-error tests).
    weaken_s : float >= 0, seconds
        Length of a weakening phase before the jump: harmonics that the new mode lacks
        (the odd ones for 1 -> 2) fade by ``weaken_db`` before the change.
    weaken_db : float <= 0, dB
        Depth of that fade.
    jump_level_db : float or None, dB
        Level step at the change; None: +8 dB for "overblown", 0 dB for "vented".
    attack_s : float > 0, seconds
        Rise time of the tone (raised cosine). The attack counts as unvoiced in the truth.
    release_s : float > 0, seconds
        Fall time at the end of the note; counts as unvoiced in the truth.
    onset_cents : float, cents
        Pitch overshoot at the start of the note, decaying exponentially (a duct flute's
        pitch starts sharp while the jet and the air column settle; 0: none).
    onset_decay_s : float > 0, seconds
        Time constant of that decay.
    wander_cents : float >= 0, cents
        Peak of a slow wander of the pitch (an unsteady breath): two incommensurate slow
        sines, 0.6 and 0.4 of the peak, at ``wander_hz`` and 1.73 x ``wander_hz``.
    wander_hz : float > 0, Hz
        Rate of the slower of the two.
    wander_phase : float, radians
        Phase of the wander (different notes wander differently).
    rise_s : float >= 0, seconds
        The breath rises into the change: over ``rise_s`` before the change the level climbs
        by ``rise_db`` (linear in dB) and, unless ``weaken_s`` is given, the partials the new
        mode lacks fade by ``weaken_db`` over the same span (the truth calls it "weakening").
        0 with ``rise_db`` != 0: the rise happens within the change itself.
    rise_db : float, dB
        Level rise of that phase; it adds to ``jump_step_db``. Needs ``jump_at_s``.
    crack_mode : int, 0 or >= 2
        A cracked attack: the note first speaks this mode and falls to ``mode`` at
        ``crack_s`` (a 10 ms change; register event kind "cracked"). 0: none.
    crack_s : float > 0, seconds
        Time from the note's start to the centre of that fall.
    tremolo_db : float >= 0, dB
        Peak level swing in step with the vibrato (a breath vibrato moves the level too);
        with ``cents_per_db`` it also moves the pitch.
    """

    f0_hz: float
    duration_s: float
    level_dbfs: float = -20.0
    mode: int = 1
    jump_at_s: float | None = None
    jump_kind: JumpKindName | None = None
    jump_mode: int = 2
    crescendo_db: float = 0.0
    vibrato_cents: float = 0.0
    vibrato_hz: float = 5.0
    cents_per_db: float = 0.0
    chiff: bool = True
    gap_s: float = 0.0
    h1_offset_db: float = 0.0
    weaken_s: float = 0.0
    weaken_db: float = -20.0
    jump_level_db: float | None = None
    attack_s: float = 0.03
    release_s: float = 0.02
    onset_cents: float = 0.0
    onset_decay_s: float = 0.05
    wander_cents: float = 0.0
    wander_hz: float = 0.7
    wander_phase: float = 0.0
    rise_s: float = 0.0
    rise_db: float = 0.0
    crack_mode: int = 0
    crack_s: float = 0.05
    tremolo_db: float = 0.0

    @property
    def fade_s(self) -> float:
        """Length of the fade of the partials the new mode lacks before the change, seconds."""
        return self.weaken_s if self.weaken_s > 0.0 else self.rise_s

    @property
    def jump_transition_s(self) -> float:
        """Length of the register change, seconds (fixed 30 ms)."""
        return 0.03

    @property
    def jump_step_db(self) -> float:
        """Level step at the change, dB."""
        if self.jump_at_s is None:
            return 0.0
        if self.jump_level_db is not None:
            return self.jump_level_db
        return 8.0 if self.jump_kind == "overblown" else 0.0


@dataclass(frozen=True, slots=True)
class RegisterEvent:
    """One change of the sounding mode inside a note.

    Attributes
    ----------
    time_s : float, seconds
        Centre of the change, from the rendering's first sample.
    kind : "overblown" | "vented" | "cracked"
        "cracked": a cracked attack falling from ``mode_before`` to the fingered register.
    mode_before, mode_after : int >= 1
        Sounding mode before and after.
    sounding_after_hz : float, Hz
        Sounding fundamental once the change is over.
    """

    time_s: float
    kind: str
    mode_before: int
    mode_after: int
    sounding_after_hz: float


@dataclass(frozen=True, slots=True)
class NoiseEvent:
    """A sound that is not a note: handling noise or breath without a tone (never voiced).

    Attributes
    ----------
    kind : "thump" | "click" | "breath"
        "thump": a low damped burst (a knock on the instrument or the stand: a damped
        40-120 Hz resonance plus noise under 300 Hz, decay ~25 ms); "click": a short broadband
        impulse (a key or a fingernail, ~1 ms); "breath": band noise 400 Hz - 9 kHz with 50 ms
        raised-cosine edges (blowing with no tone).
    time_s : float >= 0, seconds
        Start, from the rendering's first sample.
    level_dbfs : float, dBFS
        RMS over ``duration_s`` (the event is scaled so, exactly).
    duration_s : float > 0, seconds
        Span of the event: 0.15 s suits a thump, 0.003 s a click, any length breath.
    """

    kind: NoiseKindName
    time_s: float
    level_dbfs: float
    duration_s: float = 0.15


@dataclass(frozen=True, slots=True)
class Truth:
    """Exact state of a rendering at given instants (all arrays of the query's shape).

    Attributes
    ----------
    times_s : ndarray of float, seconds
    sounding_f0_hz : ndarray of float, Hz
        Fundamental of the sounding note; nan when silent, in the attack or the release.
    held_f0_hz : ndarray of float, Hz
        Instantaneous fundamental of the fingered note (first register), vibrato and
        level drift included; nan where ``sounding_f0_hz`` is nan.
    voiced : ndarray of bool
    mode : ndarray of int
        Sounding mode; 0 where unvoiced.
    jump : ndarray of str
        "overblown" / "vented" while in a jumped state, "cracked" in the upper mode of a
        cracked attack, else "".
    register : ndarray of str
        "steady", "weakening", "jumped" (also the cracked part), or "" where unvoiced.
    level_dbfs : ndarray of float, dBFS
        RMS level of the tone; -inf where no note plays.
    settled : ndarray of bool
        Voiced and at least ``settle_s`` away from onset, release, weakening and change.
    """

    times_s: NDArray[np.float64]
    sounding_f0_hz: NDArray[np.float64]
    held_f0_hz: NDArray[np.float64]
    voiced: NDArray[np.bool_]
    mode: NDArray[np.int64]
    jump: NDArray[np.str_]
    register: NDArray[np.str_]
    level_dbfs: NDArray[np.float64]
    settled: NDArray[np.bool_]


def register_profile_db(mode: int, n_harmonics: int) -> NDArray[np.float64]:
    """Harmonic levels of the sounding note in a register, dB re its fundamental.

    Parameters
    ----------
    mode : int >= 1
        Sounding mode (1 first register, 2 octave, ...).
    n_harmonics : int >= 1
        Number of harmonics of the *sounding* note.

    Returns
    -------
    ndarray of float, shape (n_harmonics,), dB
        Falling slope, all harmonics present (open pipe); higher registers fall faster.

    Examples
    --------
    >>> register_profile_db(1, 4).round(1).tolist()
    [0.0, -9.0, -15.5, -21.0]
    """
    k = np.arange(1, n_harmonics + 1, dtype=np.float64)
    slope_db = {1: 3.0, 2: 4.5}.get(mode, 6.0)
    return 0.0 - (k - 1.0) * slope_db - 6.0 * np.log2(k)


def _raised_cosine(x: NDArray[np.float64]) -> NDArray[np.float64]:
    """0 -> 1 smooth step over x in [0, 1], clipped outside."""
    c = np.clip(x, 0.0, 1.0)
    return 0.5 - 0.5 * np.cos(np.pi * c)


@dataclass(frozen=True, slots=True)
class _Controls:
    """Control signals of a note at local times."""

    fingered_hz: NDArray[np.float64]
    level_dbfs: NDArray[np.float64]
    crossfade: NDArray[np.float64]  # 0 = start mode, 1 = jump mode
    weaken_gain: NDArray[np.float64]  # gain of the partials the new mode lacks
    envelope: NDArray[np.float64]  # attack/release amplitude 0..1
    crack: NDArray[np.float64] | None = None  # weight of the cracked attack's mode 1..0; None: no crack


def _controls(ev: NoteEvent, t: NDArray[np.float64]) -> _Controls:
    """Control signals of ``ev`` at local times ``t`` (seconds from the note's start)."""
    level = ev.level_dbfs + ev.crescendo_db * (t / ev.duration_s)
    crossfade = np.zeros_like(t)
    weaken = np.ones_like(t)
    if ev.jump_at_s is not None:
        half = 0.5 * ev.jump_transition_s
        crossfade = _raised_cosine((t - (ev.jump_at_s - half)) / ev.jump_transition_s)
        level = level + ev.jump_step_db * crossfade
        if ev.rise_db:
            if ev.rise_s > 0.0:
                level = level + ev.rise_db * np.clip((t - (ev.jump_at_s - half - ev.rise_s)) / ev.rise_s, 0.0, 1.0)
            else:
                level = level + ev.rise_db * crossfade
        fade_s = ev.fade_s
        if fade_s > 0.0:
            w0 = ev.jump_at_s - half - fade_s
            frac = np.clip((t - w0) / fade_s, 0.0, 1.0)
            weaken = 10.0 ** (ev.weaken_db * frac / 20.0)
    if ev.tremolo_db:
        level = level + ev.tremolo_db * np.sin(2.0 * np.pi * ev.vibrato_hz * t)
    cents = ev.cents_per_db * (level - ev.level_dbfs)
    if ev.vibrato_cents:
        cents = cents + ev.vibrato_cents * np.sin(2.0 * np.pi * ev.vibrato_hz * t)
    if ev.onset_cents:
        cents = cents + ev.onset_cents * np.exp(-t / ev.onset_decay_s)
    if ev.wander_cents:
        w = 2.0 * np.pi * ev.wander_hz * t
        cents = cents + ev.wander_cents * (
            0.6 * np.sin(w + ev.wander_phase) + 0.4 * np.sin(1.73 * w + 2.0 * ev.wander_phase + 1.0)
        )
    fingered = ev.f0_hz * 2.0 ** (cents / 1200.0)
    env = _raised_cosine(t / ev.attack_s) * _raised_cosine((ev.duration_s - t) / ev.release_s)
    crack = None
    if ev.crack_mode:
        crack = 1.0 - _raised_cosine((t - (ev.crack_s - 0.5 * _CRACK_TRANSITION_S)) / _CRACK_TRANSITION_S)
    return _Controls(fingered, level, crossfade, weaken, env, crack)


def _max_fingered_hz(ev: NoteEvent) -> float:
    """Highest fingered frequency the note reaches, Hz."""
    lo = min(0.0, ev.crescendo_db) + min(0.0, ev.jump_step_db) + min(0.0, ev.rise_db) - ev.tremolo_db
    hi = max(0.0, ev.crescendo_db) + max(0.0, ev.jump_step_db) + max(0.0, ev.rise_db) + ev.tremolo_db
    drift = max(ev.cents_per_db * lo, ev.cents_per_db * hi)
    extra = abs(ev.vibrato_cents) + max(0.0, drift) + max(0.0, ev.onset_cents) + ev.wander_cents
    return float(ev.f0_hz * 2.0 ** (extra / 1200.0))


def _validate(ev: NoteEvent, index: int, sample_rate: float) -> None:
    """Raise ValueError naming the bad field of note ``index``."""
    where = f"note {index}"
    if not (np.isfinite(ev.f0_hz) and ev.f0_hz > 0):
        raise ValueError(f"{where}: f0_hz {ev.f0_hz!r} must be a finite frequency > 0 Hz")
    if not (np.isfinite(ev.duration_s) and ev.duration_s > 0):
        raise ValueError(f"{where}: duration_s {ev.duration_s!r} must be > 0 seconds")
    if not (np.isfinite(ev.gap_s) and ev.gap_s >= 0):
        raise ValueError(f"{where}: gap_s {ev.gap_s!r} must be >= 0 seconds")
    if not np.isfinite(ev.level_dbfs):
        raise ValueError(f"{where}: level_dbfs {ev.level_dbfs!r} must be finite; use gap_s for silence")
    for name, value in (("mode", ev.mode), ("jump_mode", ev.jump_mode)):
        if int(value) != value or value < 1:
            raise ValueError(f"{where}: {name} {value!r} must be an integer >= 1")
    if ev.attack_s <= 0 or ev.release_s <= 0 or ev.attack_s + ev.release_s > ev.duration_s:
        raise ValueError(
            f"{where}: attack_s {ev.attack_s} + release_s {ev.release_s} must be > 0 and fit in "
            f"duration_s {ev.duration_s}"
        )
    if ev.vibrato_cents < 0 or ev.vibrato_hz <= 0:
        raise ValueError(
            f"{where}: vibrato_cents {ev.vibrato_cents} must be >= 0 and vibrato_hz "
            f"{ev.vibrato_hz} > 0"
        )
    if not (np.isfinite(ev.onset_cents) and ev.onset_decay_s > 0):
        raise ValueError(f"{where}: onset_cents {ev.onset_cents} must be finite and onset_decay_s {ev.onset_decay_s} > 0")
    if not (ev.wander_cents >= 0 and ev.wander_hz > 0 and np.isfinite(ev.wander_phase)):
        raise ValueError(
            f"{where}: wander_cents {ev.wander_cents} must be >= 0, wander_hz {ev.wander_hz} > 0 "
            f"and wander_phase {ev.wander_phase} finite"
        )
    if ev.weaken_s < 0 or ev.weaken_db > 0:
        raise ValueError(f"{where}: weaken_s {ev.weaken_s} must be >= 0 and weaken_db {ev.weaken_db} <= 0")
    if not (ev.rise_s >= 0 and np.isfinite(ev.rise_s) and np.isfinite(ev.rise_db)):
        raise ValueError(f"{where}: rise_s {ev.rise_s} must be >= 0 seconds and rise_db {ev.rise_db} finite")
    if (ev.rise_s > 0 or ev.rise_db != 0) and ev.jump_at_s is None:
        raise ValueError(f"{where}: rise_s/rise_db describe the breath rising into a change; give jump_at_s too")
    if not (ev.tremolo_db >= 0 and np.isfinite(ev.tremolo_db)):
        raise ValueError(f"{where}: tremolo_db {ev.tremolo_db} must be >= 0 dB")
    if ev.crack_mode:
        if int(ev.crack_mode) != ev.crack_mode or ev.crack_mode < 2 or ev.crack_mode == ev.mode:
            raise ValueError(f"{where}: crack_mode {ev.crack_mode!r} must be 0 or an integer >= 2 other than mode")
        room_end = ev.duration_s - ev.release_s
        if ev.jump_at_s is not None:
            room_end = ev.jump_at_s - 0.5 * ev.jump_transition_s - ev.fade_s
        half_crack = 0.5 * _CRACK_TRANSITION_S
        if not (ev.attack_s + half_crack <= ev.crack_s <= room_end - half_crack):
            raise ValueError(
                f"{where}: crack_s {ev.crack_s} must leave the attack ({ev.attack_s} s) and "
                f"{half_crack} s before it, and end before any change or the release"
            )
    if (ev.jump_at_s is None) != (ev.jump_kind is None):
        raise ValueError(f"{where}: give jump_at_s and jump_kind together (got {ev.jump_at_s!r}, {ev.jump_kind!r})")
    if ev.jump_kind is not None and ev.jump_kind not in ("overblown", "vented"):
        raise ValueError(f"{where}: jump_kind {ev.jump_kind!r} must be 'overblown' or 'vented'")
    if ev.jump_at_s is not None:
        half = 0.5 * ev.jump_transition_s
        if not (ev.attack_s + ev.fade_s + half <= ev.jump_at_s <= ev.duration_s - ev.release_s - half):
            raise ValueError(
                f"{where}: jump_at_s {ev.jump_at_s} must leave attack, weakening and release "
                f"room inside duration_s {ev.duration_s}"
            )
        if ev.jump_mode == ev.mode:
            raise ValueError(f"{where}: jump_mode {ev.jump_mode} equals mode; a change needs another mode")
    top_mode = max(ev.mode, ev.jump_mode if ev.jump_at_s is not None else ev.mode, ev.crack_mode)
    sounding = top_mode * _max_fingered_hz(ev)
    if sounding >= _NYQUIST_SHARE * sample_rate:
        raise ValueError(
            f"{where}: sounding pitch {sounding:.1f} Hz is above {_NYQUIST_SHARE:.2f} x sample_rate "
            f"{sample_rate}; lower f0_hz or raise sample_rate"
        )


@dataclass(frozen=True, slots=True)
class Score:
    """The timing of a list of notes, and the exact truth about them.

    Attributes
    ----------
    sample_rate : float, Hz
    n_samples : int
        Length of the rendering in samples.
    notes : list of (start_s, end_s, NoteEvent)
        Start and end on the sample grid, seconds.
    jumps : list of (time_s, kind, sounding_f0_after_hz)
        Overblown and vented changes (centre of each change) and the sounding pitch once it
        is over.
    events : tuple of RegisterEvent
        Every change of the sounding mode, cracked attacks included, in time order.
    noises : tuple of NoiseEvent
        Handling noise and toneless breath laid over the notes (never voiced).
    """

    sample_rate: float
    n_samples: int
    notes: list[tuple[float, float, NoteEvent]]
    jumps: list[tuple[float, str, float]]
    note_starts: NDArray[np.int64] = field(repr=False)
    note_ends: NDArray[np.int64] = field(repr=False)
    events: tuple[RegisterEvent, ...] = ()
    noises: tuple[NoiseEvent, ...] = ()

    @property
    def duration_s(self) -> float:
        """Length, seconds."""
        return self.n_samples / self.sample_rate

    def truth(self, times_s: NDArray[np.float64] | Sequence[float], settle_s: float = 0.1) -> Truth:
        """Exact state at ``times_s``.

        Parameters
        ----------
        times_s : array_like of float, seconds
            Instants from the first sample (sample n is at n / sample_rate).
        settle_s : float >= 0, seconds
            Margin that defines ``Truth.settled``.

        Returns
        -------
        Truth
        """
        t = np.asarray(times_s, dtype=np.float64)
        shape = t.shape
        t = t.ravel()
        sounding = np.full(t.shape, np.nan)
        held = np.full(t.shape, np.nan)
        mode = np.zeros(t.shape, dtype=np.int64)
        jump = np.full(t.shape, "", dtype="<U9")
        register = np.full(t.shape, "", dtype="<U9")
        level = np.full(t.shape, -np.inf)
        settled = np.zeros(t.shape, dtype=bool)
        for start_s, end_s, ev in self.notes:
            inside = (t >= start_s) & (t < end_s)
            if not inside.any():
                continue
            idx = np.flatnonzero(inside)
            local = t[idx] - start_s
            c = _controls(ev, local)
            level[idx] = c.level_dbfs
            voiced = (local >= ev.attack_s) & (local <= ev.duration_s - ev.release_s)
            m = np.full(local.shape, ev.mode, dtype=np.int64)
            reg = np.full(local.shape, "steady", dtype="<U9")
            jk = np.full(local.shape, "", dtype="<U9")
            calm = (local >= ev.attack_s + settle_s) & (local <= ev.duration_s - ev.release_s - settle_s)
            if ev.jump_at_s is not None:
                after = local >= ev.jump_at_s
                m[after] = ev.jump_mode
                reg[after] = "jumped"
                jk[after] = str(ev.jump_kind)
                half = 0.5 * ev.jump_transition_s
                if ev.fade_s > 0:
                    w0 = ev.jump_at_s - half - ev.fade_s
                    reg[(local >= w0) & ~after] = "weakening"
                    lo = w0
                else:
                    lo = ev.jump_at_s - half
                calm &= (local < lo - settle_s) | (local > ev.jump_at_s + half + settle_s)
            if ev.crack_mode:
                cracked = local < ev.crack_s
                m[cracked] = ev.crack_mode
                reg[cracked] = "jumped"
                jk[cracked] = "cracked"
                calm &= local > ev.crack_s + 0.5 * _CRACK_TRANSITION_S + settle_s
            sounding[idx] = np.where(voiced, m * c.fingered_hz, np.nan)
            held[idx] = np.where(voiced, c.fingered_hz, np.nan)
            mode[idx] = np.where(voiced, m, 0)
            jump[idx] = np.where(voiced, jk, "")
            register[idx] = np.where(voiced, reg, "")
            settled[idx] = calm & voiced
        return Truth(
            times_s=t.reshape(shape),
            sounding_f0_hz=sounding.reshape(shape),
            held_f0_hz=held.reshape(shape),
            voiced=np.isfinite(sounding).reshape(shape),
            mode=mode.reshape(shape),
            jump=jump.reshape(shape),
            register=register.reshape(shape),
            level_dbfs=level.reshape(shape),
            settled=settled.reshape(shape),
        )


@dataclass(frozen=True, slots=True)
class Rendering:
    """Audio of a score plus its exact truth.

    Attributes
    ----------
    audio : ndarray of float32, shape (n_samples,)
    sample_rate : float, Hz
    score : Score
    """

    audio: NDArray[np.float32]
    sample_rate: float
    score: Score

    @property
    def notes(self) -> list[tuple[float, float, NoteEvent]]:
        """(start_s, end_s, NoteEvent) of every note."""
        return self.score.notes

    @property
    def jumps(self) -> list[tuple[float, str, float]]:
        """(time_s, kind, sounding_f0_after_hz) of every overblown or vented change."""
        return self.score.jumps

    @property
    def events(self) -> tuple[RegisterEvent, ...]:
        """Every change of the sounding mode (cracked attacks included)."""
        return self.score.events

    def truth(self, times_s: NDArray[np.float64] | Sequence[float], settle_s: float = 0.1) -> Truth:
        """Exact state at ``times_s``; see :meth:`Score.truth`."""
        return self.score.truth(times_s, settle_s)


def plan(events: Sequence[NoteEvent], sample_rate: float, noises: Sequence[NoiseEvent] = ()) -> Score:
    """Lay notes end to end on the sample grid and validate them.

    Parameters
    ----------
    events : sequence of NoteEvent
    sample_rate : float > 0, Hz
    noises : sequence of NoiseEvent
        Handling noise and toneless breath at their own times; the rendering is made long
        enough to hold them.

    Returns
    -------
    Score

    Raises
    ------
    ValueError
        For an empty list, a bad sample rate or a bad note (named by its index).

    Examples
    --------
    >>> s = plan([NoteEvent(440.0, 0.5, gap_s=0.5)], 48000)
    >>> s.n_samples, s.notes[0][:2]
    (48000, (0.0, 0.5))
    """
    if not (np.isfinite(sample_rate) and sample_rate >= 1000):
        raise ValueError(f"sample_rate {sample_rate!r} must be >= 1000 Hz")
    if len(events) == 0:
        raise ValueError("no notes given; pass at least one NoteEvent")
    starts, ends, notes, jumps = [], [], [], []
    reg_events: list[RegisterEvent] = []
    clock_s = 0.0
    for i, ev in enumerate(events):
        if not isinstance(ev, NoteEvent):
            raise TypeError(f"event {i} is {type(ev).__name__}, expected NoteEvent")
        _validate(ev, i, sample_rate)
        n0 = int(round(clock_s * sample_rate))  # noqa: RUF046  a 0-d array passes the checks; int() keeps the count an int
        n1 = n0 + int(round(ev.duration_s * sample_rate))  # noqa: RUF046  a 0-d array passes the checks; int() keeps the count an int
        starts.append(n0)
        ends.append(n1)
        start_s, end_s = n0 / sample_rate, n1 / sample_rate
        notes.append((start_s, end_s, ev))
        if ev.crack_mode:
            t_after = np.array([ev.crack_s + 0.5 * _CRACK_TRANSITION_S])
            f_after = float(ev.mode * _controls(ev, t_after).fingered_hz[0])
            reg_events.append(RegisterEvent(start_s + ev.crack_s, "cracked", ev.crack_mode, ev.mode, f_after))
        if ev.jump_at_s is not None:
            t_after = np.array([ev.jump_at_s + 0.5 * ev.jump_transition_s])
            f_after = float(ev.jump_mode * _controls(ev, t_after).fingered_hz[0])
            jumps.append((start_s + ev.jump_at_s, str(ev.jump_kind), f_after))
            reg_events.append(RegisterEvent(start_s + ev.jump_at_s, str(ev.jump_kind), ev.mode, ev.jump_mode, f_after))
        clock_s += ev.duration_s + ev.gap_s
    n_total = int(round(clock_s * sample_rate))  # noqa: RUF046  a 0-d array passes the checks; int() keeps the count an int
    n_total = max(n_total, ends[-1])
    for i, nz in enumerate(noises):
        if not isinstance(nz, NoiseEvent):
            raise TypeError(f"noise {i} is {type(nz).__name__}, expected NoiseEvent")
        if nz.kind not in ("thump", "click", "breath"):
            raise ValueError(f"noise {i}: kind {nz.kind!r} must be 'thump', 'click' or 'breath'")
        if not (np.isfinite(nz.time_s) and nz.time_s >= 0 and np.isfinite(nz.level_dbfs)):
            raise ValueError(f"noise {i}: time_s {nz.time_s} must be >= 0 s and level_dbfs {nz.level_dbfs} finite")
        if not (np.isfinite(nz.duration_s) and nz.duration_s * sample_rate >= 2):
            raise ValueError(f"noise {i}: duration_s {nz.duration_s} must span at least 2 samples")
        if nz.kind == "breath" and nz.duration_s < 0.1:
            raise ValueError(f"noise {i}: toneless breath needs duration_s >= 0.1 s (50 ms edges)")
        n_total = max(n_total, int(round((nz.time_s + nz.duration_s) * sample_rate)))  # noqa: RUF046  int() keeps the count an int
    return Score(
        sample_rate=float(sample_rate),
        n_samples=n_total,
        notes=notes,
        jumps=jumps,
        note_starts=np.array(starts, dtype=np.int64),
        note_ends=np.array(ends, dtype=np.int64),
        events=tuple(reg_events),
        noises=tuple(noises),
    )


class _GridNoise:
    """Sequential coloured Gaussian noise, the same whatever the sizes taken."""

    def __init__(self, seed_words: Sequence[int], sos: NDArray[np.float64] | None) -> None:
        self._words = list(seed_words)
        self._sos = sos
        self._zi = None if sos is None else np.zeros((sos.shape[0], 2))
        self._gain = 1.0 if sos is None else _noise_gain(sos)
        self._chunk_index = 0
        self._buffer = np.zeros(0)

    def take(self, n: int) -> NDArray[np.float64]:
        parts = [self._buffer]
        have = self._buffer.size
        while have < n:
            rng = np.random.default_rng([*self._words, self._chunk_index])
            self._chunk_index += 1
            white = rng.standard_normal(_CHUNK)
            if self._sos is not None:
                white, self._zi = scipy.signal.sosfilt(self._sos, white, zi=self._zi)
            parts.append(white / self._gain)
            have += _CHUNK
        joined = np.concatenate(parts)
        self._buffer = joined[n:]
        return joined[:n]


def _noise_gain(sos: NDArray[np.float64]) -> float:
    """RMS gain of a filter for unit white noise (root energy of its impulse response)."""
    return _noise_gain_cached(sos.tobytes(), sos.shape[0])


@lru_cache(maxsize=16)
def _noise_gain_cached(sos_bytes: bytes, n_sections: int) -> float:
    """Cached body of _noise_gain."""
    sos = np.frombuffer(sos_bytes, dtype=np.float64).reshape(n_sections, 6).copy()
    impulse = np.zeros(1 << 16)
    impulse[0] = 1.0
    h = scipy.signal.sosfilt(sos, impulse)
    return float(np.sqrt(np.sum(h * h)))


@lru_cache(maxsize=8)
def _breath_sos(sample_rate: float) -> NDArray[np.float64]:
    """Band of the breath noise: 400 Hz to 9 kHz (or 0.42 fs), 2nd order each side."""
    hi = min(9000.0, 0.42 * sample_rate)
    return np.asarray(scipy.signal.butter(2, [400.0, hi], btype="bandpass", fs=sample_rate, output="sos"))


@lru_cache(maxsize=8)
def _room_sos(sample_rate: float) -> NDArray[np.float64]:
    """Room noise colour: low-passed at 800 Hz (air handling, traffic)."""
    return np.asarray(scipy.signal.butter(2, 800.0, btype="lowpass", fs=sample_rate, output="sos"))


class _NoteVoice:
    """Renders one note in consecutive pieces, carrying phase and noise state."""

    def __init__(self, ev: NoteEvent, index: int, sample_rate: float, seed: int, breath_noise_db: float,
                 max_harmonics: int) -> None:
        self.ev = ev
        self.sample_rate = sample_rate
        self._pos = 0  # samples rendered so far
        self._phase = 0.0  # radians of the fingered fundamental at the next sample
        self._last_hz: float | None = None
        rng = np.random.default_rng([seed, index, 0])
        top_hz = _max_fingered_hz(ev)
        n_max = int(_NYQUIST_SHARE * sample_rate // top_hz)
        modes = {ev.mode} | ({ev.jump_mode} if ev.jump_at_s is not None else set()) | ({ev.crack_mode} - {0})
        n_max = min(n_max, max_harmonics * max(modes))
        self._n_max = max(n_max, 1)
        phases = rng.uniform(0.0, 2.0 * np.pi, self._n_max + 1)
        self._layers = self._build_layers(phases)
        self._breath_db = breath_noise_db
        self._breath = _GridNoise([seed, index, 1], _breath_sos(sample_rate))
        self._chiff = self._build_chiff(np.random.default_rng([seed, index, 2])) if ev.chiff else None

    def _mode_amplitudes(self, mode: int) -> NDArray[np.float64]:
        """Amplitude per partial index n = 0..n_max (partial n at n x fingered f0)."""
        amp = np.zeros(self._n_max + 1)
        k_max = self._n_max // mode
        if k_max < 1:
            return amp
        prof_db = register_profile_db(mode, k_max)
        prof_db[0] += self.ev.h1_offset_db
        a = 10.0 ** (prof_db / 20.0)
        a /= np.sqrt(np.sum(a * a))  # sum of squares 1 -> RMS of the sum is 1/sqrt(2)
        amp[mode * np.arange(1, k_max + 1)] = a
        return amp

    def _build_layers(self, phases: NDArray[np.float64]) -> list[tuple[str, NDArray[np.complex128]]]:
        """Polynomial coefficients per layer: 'a' kept, 'a_weak' fading, 'b' after the jump."""
        rot = np.exp(1j * phases)
        a = self._mode_amplitudes(self.ev.mode)
        crack = [("c", self._mode_amplitudes(self.ev.crack_mode) * rot)] if self.ev.crack_mode else []
        if self.ev.jump_at_s is None:
            return [("a", a * rot), *crack]
        b = self._mode_amplitudes(self.ev.jump_mode)
        kept = np.zeros_like(a)
        kept[:: self.ev.jump_mode] = a[:: self.ev.jump_mode]
        weak = a - kept
        return [("a", kept * rot), ("a_weak", weak * rot), ("b", b * rot), *crack]

    def _build_chiff(self, rng: np.random.Generator) -> NDArray[np.float64]:
        """Attack burst: decaying band noise plus two inharmonic partials, ~40 ms."""
        sr = self.sample_rate
        n = int(round(min(0.04, self.ev.duration_s) * sr))  # noqa: RUF046  a 0-d array passes the checks; int() keeps the count an int
        t = np.arange(n) / sr
        env = (1.0 - np.exp(-t / 0.002)) * np.exp(-t / 0.008)
        noise = scipy.signal.sosfilt(_breath_sos(sr), rng.standard_normal(n)) / _noise_gain(_breath_sos(sr))
        burst = noise
        for ratio in (2.41, 4.13):
            f = ratio * self.ev.f0_hz * self.ev.mode
            if f < _NYQUIST_SHARE * sr:
                burst = burst + 0.7 * np.sin(2.0 * np.pi * f * t + rng.uniform(0, 2 * np.pi))
        level = 10.0 ** ((self.ev.level_dbfs - 6.0) / 20.0)  # chiff peaks ~6 dB under the tone
        return np.asarray(level * env * burst / np.sqrt(np.mean(burst * burst) + 1e-30))

    def render(self, n: int) -> NDArray[np.float64]:
        """Next ``n`` samples of the note."""
        sr = self.sample_rate
        local = (self._pos + np.arange(n)) / sr
        c = _controls(self.ev, local)
        # trapezoidal phase integration of the instantaneous frequency
        f = c.fingered_hz
        prev = f[0] if self._last_hz is None else self._last_hz
        inc = np.empty(n)
        inc[0] = np.pi * (prev + f[0]) / sr
        inc[1:] = np.pi * (f[:-1] + f[1:]) / sr
        if self._last_hz is None:
            inc[0] = 0.0
        phase = self._phase + np.cumsum(inc)
        self._phase = float(phase[-1])
        self._last_hz = float(f[-1])
        z = np.exp(1j * phase)
        envs = {
            "a": 1.0 - c.crossfade,
            "a_weak": (1.0 - c.crossfade) * c.weaken_gain,
            "b": c.crossfade,
        }
        if c.crack is not None:  # the cracked mode first, then the note's own layers
            envs = {k: (1.0 - c.crack) * v for k, v in envs.items()}
            envs["c"] = c.crack
        tone = np.zeros(n)
        for name, coef in self._layers:
            e = envs[name]
            if not np.any(e):
                continue
            tone += e * _horner_imag(coef, z)
        rms = 10.0 ** (c.level_dbfs / 20.0) * c.envelope
        out = np.sqrt(2.0) * rms * tone
        if np.isfinite(self._breath_db):
            out += rms * 10.0 ** (self._breath_db / 20.0) * self._breath.take(n)
        if self._chiff is not None and self._pos < self._chiff.size:
            m = min(n, self._chiff.size - self._pos)
            out[:m] += self._chiff[self._pos : self._pos + m]
        self._pos += n
        return np.asarray(out, dtype=np.float64)


def _horner_imag(coef: NDArray[np.complex128], z: NDArray[np.complex128]) -> NDArray[np.float64]:
    """Im(sum_n coef[n] z**n) by Horner's rule (coef[0] is the constant term)."""
    nz = np.flatnonzero(coef)
    if nz.size == 0:
        return np.zeros(z.shape)
    top = int(nz[-1])
    acc = np.full(z.shape, coef[top], dtype=np.complex128)
    for k in range(top - 1, -1, -1):
        acc *= z
        if coef[k] != 0:
            acc += coef[k]
    return np.asarray(acc.imag)


def _hum_block(n0: int, n: int, sample_rate: float, hum_hz: float, hum_dbfs: float) -> NDArray[np.float64]:
    """Mains hum with harmonics (rectifier buzz) at absolute samples n0..n0+n."""
    idx = (n0 + np.arange(n)).astype(np.float64)
    amps = np.array([1.0, 0.6, 0.45, 0.3, 0.2, 0.12])
    amps /= np.sqrt(np.sum(amps * amps) / 2.0)  # RMS of the sum = 1
    out = np.zeros(n)
    for h, a in enumerate(amps, start=1):
        if h * hum_hz < _NYQUIST_SHARE * sample_rate:
            out += a * np.sin(2.0 * np.pi * h * hum_hz * idx / sample_rate + 0.3 * h)
    return np.asarray(out * 10.0 ** (hum_dbfs / 20.0))


def _reverb_ir(sample_rate: float, reverb_s: float, seed: int, wet_db: float) -> NDArray[np.float64]:
    """Direct path plus an exponentially decaying noise tail; ``reverb_s`` is the T60, s."""
    rng = np.random.default_rng([seed, 0x5EB])
    n = max(int(round(1.2 * reverb_s * sample_rate)), 2)  # noqa: RUF046  a 0-d array passes the checks; int() keeps the count an int
    t = np.arange(n) / sample_rate
    tail = rng.standard_normal(n) * 10.0 ** (-3.0 * t / reverb_s)  # -60 dB at reverb_s
    tail[: int(0.005 * sample_rate)] = 0.0  # first reflections come after ~5 ms
    tail *= 10.0 ** (wet_db / 20.0) / np.sqrt(np.sum(tail * tail))
    tail[0] = 1.0
    return tail


@lru_cache(maxsize=8)
def _thump_sos(sample_rate: float) -> NDArray[np.float64]:
    """Thump noise colour: low-passed at 300 Hz."""
    return np.asarray(scipy.signal.butter(2, 300.0, btype="lowpass", fs=sample_rate, output="sos"))


def _noise_event_samples(nz: NoiseEvent, index: int, sample_rate: float, seed: int) -> tuple[int, NDArray[np.float64]]:
    """First sample and samples of one handling noise or toneless breath, RMS = its level."""
    rng = np.random.default_rng([seed, 0x4E, index])
    n0 = int(round(nz.time_s * sample_rate))  # noqa: RUF046  int() keeps the count an int
    n = max(int(round(nz.duration_s * sample_rate)), 2)  # noqa: RUF046  int() keeps the count an int
    t = np.arange(n) / sample_rate
    if nz.kind == "thump":
        f_res = rng.uniform(40.0, 120.0)
        body = np.sin(2.0 * np.pi * f_res * t + rng.uniform(0, 2 * np.pi)) * np.exp(-t / 0.025)
        rumble = scipy.signal.sosfilt(_thump_sos(sample_rate), rng.standard_normal(n)) * np.exp(-t / 0.015)
        x = body + 0.5 * rumble / (np.std(rumble) + 1e-30) * np.std(body)
        x *= 1.0 - np.exp(-t / 0.001)  # no step at the start
    elif nz.kind == "click":
        x = rng.standard_normal(n) * np.exp(-t / 0.0005)
    else:
        x = scipy.signal.sosfilt(_breath_sos(sample_rate), rng.standard_normal(n))
        edge = 0.05
        x *= _raised_cosine(t / edge) * _raised_cosine((nz.duration_s - t) / edge)
    x *= 10.0 ** (nz.level_dbfs / 20.0) / np.sqrt(np.mean(x * x) + 1e-300)
    return n0, np.asarray(x, dtype=np.float64)


def nominal_tone_dbfs(score: Score) -> float:
    """The tone's nominal RMS level: the notes' ``level_dbfs`` power-averaged over their lengths.

    Crescendos, level steps and inaudible notes (below -150 dBFS) are left out; this is
    the reference of ``snr_db`` in :func:`render`.

    Returns
    -------
    float, dBFS
        -inf when no note is audible.

    Examples
    --------
    >>> round(nominal_tone_dbfs(plan([NoteEvent(440.0, 1.0, level_dbfs=-20.0),
    ...                               NoteEvent(440.0, 1.0, level_dbfs=-30.0)], 48000)), 3)
    -22.596
    """
    power = weight = 0.0
    for start_s, end_s, ev in score.notes:
        if ev.level_dbfs < -150.0:
            continue
        power += (end_s - start_s) * 10.0 ** (ev.level_dbfs / 10.0)
        weight += end_s - start_s
    return float(10.0 * np.log10(power / weight)) if weight > 0 else -np.inf


def _dry_chunks(score: Score, seed: int, breath_noise_db: float, max_harmonics: int) -> Iterator[NDArray[np.float64]]:
    """The dry signal (notes and breath) in consecutive pieces of at most _CHUNK samples."""
    pos = 0
    for i, (start_s, end_s, ev) in enumerate(score.notes):
        n0, n1 = int(score.note_starts[i]), int(score.note_ends[i])
        while pos < n0:  # silence before the note
            step = min(_CHUNK, n0 - pos)
            yield np.zeros(step)
            pos += step
        voice = _NoteVoice(ev, i, score.sample_rate, seed, breath_noise_db, max_harmonics)
        while pos < n1:
            step = min(_CHUNK, n1 - pos)
            yield voice.render(step)
            pos += step
    while pos < score.n_samples:
        step = min(_CHUNK, score.n_samples - pos)
        yield np.zeros(step)
        pos += step


def render_blocks(
    events: Sequence[NoteEvent] | Score,
    sample_rate: float,
    block_size: int = 4096,
    *,
    seed: int = 0,
    breath_noise_db: float = -35.0,
    reverb_s: float = 0.0,
    reverb_wet_db: float = -6.0,
    hum_hz: float | None = None,
    hum_dbfs: float = -60.0,
    room_noise_dbfs: float | None = None,
    max_harmonics: int = _MAX_SOUNDING_HARMONICS,
    snr_db: float | None = None,
) -> Iterator[NDArray[np.float32]]:
    """Render a score block by block (for long inputs; memory stays bounded).

    Yields float32 blocks of ``block_size`` samples (the last may be shorter). The
    concatenation equals ``render(...).audio`` for the same arguments, whatever
    ``block_size``. Parameters as in :func:`render` (handling noise comes with a Score made by
    :func:`plan`).
    """
    score = events if isinstance(events, Score) else plan(events, sample_rate)
    if score.sample_rate != float(sample_rate):
        raise ValueError(f"sample_rate {sample_rate} differs from the score's {score.sample_rate}")
    if int(block_size) != block_size or block_size < 1:
        raise ValueError(f"block_size {block_size!r} must be an integer >= 1")
    if reverb_s < 0:
        raise ValueError(f"reverb_s {reverb_s!r} must be >= 0 seconds")
    if hum_hz is not None and not (0 < hum_hz < _NYQUIST_SHARE * sample_rate):
        raise ValueError(f"hum_hz {hum_hz!r} must be > 0 Hz and below {_NYQUIST_SHARE} x sample_rate")
    if max_harmonics < 1:
        raise ValueError(f"max_harmonics {max_harmonics!r} must be >= 1")
    if snr_db is not None and not np.isfinite(snr_db):
        raise ValueError(f"snr_db {snr_db!r} must be a finite number of dB, or None for no noise floor")
    floor = None
    floor_gain = 0.0
    if snr_db is not None:
        tone_dbfs = nominal_tone_dbfs(score)
        if np.isfinite(tone_dbfs):
            floor = _GridNoise([seed, 0x5B], None)
            floor_gain = 10.0 ** ((tone_dbfs - snr_db) / 20.0)
    extras = [_noise_event_samples(nz, i, sample_rate, seed) for i, nz in enumerate(score.noises)]
    ir = _reverb_ir(sample_rate, reverb_s, seed, reverb_wet_db) if reverb_s > 0 else None
    tail = np.zeros(0)
    room = _GridNoise([seed, 0xA1], _room_sos(sample_rate)) if room_noise_dbfs is not None else None
    pending: list[NDArray[np.float64]] = []
    pending_n = 0
    pos = 0
    for dry in _dry_chunks(score, seed, breath_noise_db, max_harmonics):
        n = dry.size
        for n0, x in extras:  # handling noise and toneless breath sound in the room like the notes
            lo, hi = max(n0, pos), min(n0 + x.size, pos + n)
            if lo < hi:
                dry[lo - pos : hi - pos] += x[lo - n0 : hi - n0]
        if ir is not None:
            wet = scipy.signal.fftconvolve(dry, ir)
            wet[: tail.size] += tail  # tail (len(ir) - 1) is never longer than wet
            chunk, tail = wet[:n], wet[n:]
        else:
            chunk = dry
        if hum_hz is not None:
            chunk = chunk + _hum_block(pos, n, sample_rate, hum_hz, hum_dbfs)
        if room is not None and room_noise_dbfs is not None:
            chunk = chunk + 10.0 ** (room_noise_dbfs / 20.0) * room.take(n)
        if floor is not None:
            chunk = chunk + floor_gain * floor.take(n)
        pos += n
        pending.append(chunk)
        pending_n += n
        while pending_n >= block_size:
            joined = np.concatenate(pending)
            yield joined[:block_size].astype(np.float32)
            rest = joined[block_size:]
            pending, pending_n = [rest], rest.size
    if pending_n:
        yield np.concatenate(pending).astype(np.float32)


def render(
    events: Sequence[NoteEvent],
    sample_rate: float,
    *,
    noises: Sequence[NoiseEvent] = (),
    seed: int = 0,
    breath_noise_db: float = -35.0,
    reverb_s: float = 0.0,
    reverb_wet_db: float = -6.0,
    hum_hz: float | None = None,
    hum_dbfs: float = -60.0,
    room_noise_dbfs: float | None = None,
    max_harmonics: int = _MAX_SOUNDING_HARMONICS,
    snr_db: float | None = None,
) -> Rendering:
    """Render notes laid end to end into one float32 signal with its exact truth.

    Parameters
    ----------
    events : sequence of NoteEvent
    sample_rate : float >= 1000, Hz
    noises : sequence of NoiseEvent
        Handling noise (thumps, clicks) and breath without a tone; they sound in the room
        like the notes; never voiced in the truth.
    seed : int
        Seeds every random part (harmonic phases, breath, chiff, reverb, room noise).
    breath_noise_db : float, dB
        Breath noise RMS relative to the tone's RMS; ``-inf`` for none.
    reverb_s : float >= 0, seconds
        T60 of a seeded exponentially decaying noise impulse response (0: dry).
    reverb_wet_db : float, dB
        Energy of the reverberant tail relative to the direct sound: the direct-to-reverberant
        ratio is ``-reverb_wet_db`` dB.
    hum_hz : float or None, Hz
        Mains hum fundamental (50 or 60) with harmonics up to the 6th; None for none.
    hum_dbfs : float, dBFS
        RMS of the hum.
    room_noise_dbfs : float or None, dBFS
        RMS of a low-passed room noise floor under everything; None for none.
    max_harmonics : int >= 1
        Most harmonics of the sounding note rendered (fewer near Nyquist).
    snr_db : float or None, dB
        Add white Gaussian noise whose RMS is ``snr_db`` under the tone's nominal level
        (:func:`nominal_tone_dbfs`); None for none.

    Returns
    -------
    Rendering

    Raises
    ------
    ValueError
        For a bad option or note.

    Examples
    --------
    >>> r = render([NoteEvent(440.0, 0.3, chiff=False)], 48000, breath_noise_db=-np.inf)
    >>> r.audio.shape, r.audio.dtype
    ((14400,), dtype('float32'))
    >>> float(r.truth([0.15]).sounding_f0_hz[0])
    440.0
    """
    score = plan(events, sample_rate, noises)
    blocks = list(
        render_blocks(
            score,
            sample_rate,
            block_size=_CHUNK,
            seed=seed,
            breath_noise_db=breath_noise_db,
            reverb_s=reverb_s,
            reverb_wet_db=reverb_wet_db,
            hum_hz=hum_hz,
            hum_dbfs=hum_dbfs,
            room_noise_dbfs=room_noise_dbfs,
            max_harmonics=max_harmonics,
            snr_db=snr_db,
        )
    )
    audio = np.concatenate(blocks) if blocks else np.zeros(0, dtype=np.float32)
    return Rendering(audio=audio.astype(np.float32, copy=False), sample_rate=float(sample_rate), score=score)
