"""The frozen result the streaming analyser emits once per hop."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

RegisterState = Literal["steady", "weakening", "jumped"]
JumpKind = Literal["overblown", "vented", "cracked"]


@dataclass(frozen=True, slots=True)
class Frame:
    """One analysis frame.

    Attributes
    ----------
    time_s : float, seconds
        Input time of the instant the frame describes (centre of what the estimate
        measured), counted from the first sample fed after construction or ``reset()``.
    ready_s : float, seconds
        Input time at which the frame could first be emitted (end of the last sample it used).
    f0_hz : float or None, Hz
        Fundamental of the sounding note; None when unvoiced.
    clarity : float, 0..1
        Confidence that a periodic tone is present.
    level_dbfs : float, dBFS
        RMS level; a full-scale sine reads -3.01 dBFS. -inf for digital silence.
    clipped : bool
        True when a sample in the frame reached full scale.
    harmonics_db : tuple of 8 floats or None, dB
        H1..H8 of the sounding note relative to the strongest (max is 0 dB); None when unvoiced.
    odd_even_db : float or None, dB
        ``10*log10(sum odd H^2 / sum even H^2)`` over H1..H8; None when unvoiced.
    register : "steady" | "weakening" | "jumped" | None
        Register monitor state for the held note; None when unvoiced.
    jump : "overblown" | "vented" | "cracked" | None
        Kind of register jump while ``register == "jumped"``; "cracked" on the first
        frames (``crack_show_s``, 0.25 s) of a note that spoke its octave or twelfth at its
        attack before settling on its fundamental (``register`` is then "steady", the
        held note the fundamental: the note is not broken; see :mod:`dsp.register`);
        else None.
    held_f0_hz : float or None, Hz
        Fundamental of the held (fingered) note the register monitor follows.
    """

    time_s: float
    ready_s: float
    f0_hz: float | None
    clarity: float
    level_dbfs: float
    clipped: bool
    harmonics_db: tuple[float, ...] | None
    odd_even_db: float | None
    register: RegisterState | None
    jump: JumpKind | None
    held_f0_hz: float | None = None
