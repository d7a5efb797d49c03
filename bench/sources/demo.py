"""The built-in demo instrument: a synthetic player working through the scale of the
"Wren", an alto recorder in F from the (invented) Hollin Lane Flute Works.

The loop is rendered once by :mod:`dsp.synth` when the source starts, then handed out
block by block at real-time pace, over and over. Every pitch comes from the instrument's
geometry through bench's own model (:mod:`bench.model.demo`): the Wren with two tone holes
deliberately off (h3 bored too small, so D5 is flat; h5 too large, so Bb4 is sharp), which
``bench model suggest`` on the demo's captures finds. The player climbs the notes the holes
were placed for (F4 to F#5, the first register), blows one note in a crescendo until it breaks
into the octave (the blowing curve then shows a slope and a break level) and vents one note
into its octave.

Each member of the family plays its own instrument: the soprano plays the built-in Wren soprano
(its scale starts on C5) through the model, the alto the Wren alto; a member with no built-in
geometry (tenor, bass ...) plays the alto's model pitches moved to its lowest note.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np
from numpy.typing import NDArray

from bench.errors import DeviceError
from bench.sources.base import (
    DEFAULT_BLOCK_SIZE,
    MAX_LAG_S,
    Clock,
    PacedBlocks,
    SystemClock,
)

if TYPE_CHECKING:
    from bench.workflow.profiles import InstrumentProfile
    from dsp.synth import NoteEvent

INSTRUMENT = "Hollin Lane Flute Works 'Wren' alto in F"
"""What the demo plays (an invented instrument from the project's invented workshop)."""


@dataclass(frozen=True, slots=True)
class DemoNote:
    """One note of the demo loop (its pitch comes from the model: :func:`demo_pitches_hz`).

    Attributes
    ----------
    midi : int
        Fingered note (MIDI number) on the alto; the fingering of that name is played.
    duration_s : float, seconds
    jump : "overblown" | "vented" | None
        A register jump part-way through the note.
    level_dbfs : float, dBFS
        Level the note starts at.
    crescendo_db : float, dB
        Level rise over the note (a crescendo; an overblown note breaks at its top).
    """

    midi: int
    duration_s: float = 1.1
    jump: Literal["overblown", "vented"] | None = None
    level_dbfs: float = -20.0
    crescendo_db: float = 0.0


# The notes the alto's holes were placed for (first register), lowest note F4 (MIDI 65), then
# a short way down. The model plays the other fingerings of the Wren (forked ones, the second
# register) well off their names, so the demo leaves them out: its faults are the two holes.
DEMO_SCALE: tuple[DemoNote, ...] = (
    DemoNote(65),  # F4: every hole closed, in tune
    DemoNote(67),  # G4
    DemoNote(69),  # A4
    DemoNote(70),  # Bb4: sharp, h5 is too large
    DemoNote(72),  # C5
    DemoNote(72, duration_s=3.0, jump="overblown", level_dbfs=-26.0, crescendo_db=12.0),  # C5 crescendo: breaks
    DemoNote(74),  # D5: flat, h3 is too small
    DemoNote(76),  # E5
    DemoNote(78),  # F#5
    DemoNote(74),  # D5 again: still flat
    DemoNote(70),  # Bb4 again: still sharp
    DemoNote(67, duration_s=1.6, jump="vented"),  # G4 vented into its octave
    DemoNote(65, duration_s=1.6),  # F4
)


def _profile(profile: str | InstrumentProfile) -> InstrumentProfile:
    from bench.workflow.profiles import get_profile

    return get_profile(profile) if isinstance(profile, str) else profile


def demo_transpose(profile: str | InstrumentProfile | None) -> int:
    """Semitones the Wren's scale moves for ``profile`` (its lowest note minus F4; 0 for None).

    >>> demo_transpose("soprano"), demo_transpose("tenor"), demo_transpose(None)
    (7, -5, 0)
    """
    if profile is None:
        return 0
    return _profile(profile).lowest_midi - DEMO_SCALE[0].midi


def demo_geometry_name(profile: str | InstrumentProfile | None) -> str:
    """The built-in geometry whose model pitches the demo plays for ``profile`` (the alto's when
    the profile has none of its own).

    >>> demo_geometry_name("soprano"), demo_geometry_name("tenor"), demo_geometry_name(None)
    ('wren-soprano', 'wren-alto', 'wren-alto')
    """
    from bench.model.demo import DEMO_GEOMETRY
    from bench.model.geometry import geometry_for_profile

    if profile is None:
        return DEMO_GEOMETRY
    return geometry_for_profile(_profile(profile).name) or DEMO_GEOMETRY


def demo_pitches_hz(profile: str | InstrumentProfile | None = None) -> list[float]:
    """Frequency of each note of :data:`DEMO_SCALE` on ``profile``'s instrument, Hz, from the model.

    The fingering named by the note (moved to the profile's compass) of the profile's built-in
    geometry, with the demo's holes put off, in its own register, bore at 25 degC
    (:func:`bench.model.demo.demo_notes`). A profile with no built-in geometry plays the alto's
    pitches moved by :func:`demo_transpose` semitones (12-TET ratios).
    """
    from bench.model.demo import demo_notes
    from bench.tuning.notes import parse_note

    name = demo_geometry_name(profile)
    shift = demo_transpose(profile)
    by_midi = {parse_note(n.name): n.freq_hz for n in demo_notes(geometry=name)}
    if name == "wren-alto":
        ratio = 2.0 ** (shift / 12.0)
        return [by_midi[n.midi] * ratio for n in DEMO_SCALE]
    return [by_midi[n.midi + shift] for n in DEMO_SCALE]


def demo_events(a4_hz: float = 440.0, profile: str | InstrumentProfile | None = None) -> list[NoteEvent]:
    """The demo loop as :class:`dsp.synth.NoteEvent` objects, played on the family member
    ``profile`` (a name or a profile; None: the alto). The instrument is built for A4 = 440 Hz;
    another ``a4_hz`` scales every pitch by ``a4_hz / 440``."""
    from dsp.synth import NoteEvent

    events = []
    for i, (note, f0_hz) in enumerate(zip(DEMO_SCALE, demo_pitches_hz(profile), strict=True)):
        events.append(
            NoteEvent(
                f0_hz * a4_hz / 440.0,
                note.duration_s,
                level_dbfs=note.level_dbfs,
                vibrato_cents=4.0 if i % 3 == 2 and not note.crescendo_db else 0.0,
                gap_s=0.18,
                crescendo_db=note.crescendo_db,
                # blowing harder sharpens a duct flute (common practice; ~0.5 c/dB from memory)
                cents_per_db=0.5 if note.crescendo_db else 0.0,
                jump_at_s=None if note.jump is None else note.duration_s * (0.8 if note.crescendo_db else 0.45),
                jump_kind=note.jump,
                weaken_s=0.12 if note.crescendo_db else 0.0,
            )
        )
    return events


def render_demo_loop(
    sample_rate: int, seed: int = 7, profile: str | InstrumentProfile | None = None
) -> NDArray[np.float32]:
    """Render one pass of the demo loop (mono float32 at ``sample_rate`` Hz, ~30 s)."""
    from dsp.synth import render

    audio = np.asarray(render(demo_events(profile=profile), sample_rate, seed=seed).audio, dtype=np.float32)
    return np.ascontiguousarray(audio.reshape(-1))


def demo_instrument(profile: str | InstrumentProfile | None = None) -> str:
    """What the demo plays for ``profile`` (the Wren alto for None)."""
    if profile is None:
        return INSTRUMENT
    prof = _profile(profile)
    return f"Hollin Lane Flute Works 'Wren' {prof.title}"


class DemoSource:
    """The demo instrument as an input, looping forever at real-time pace.

    Parameters
    ----------
    sample_rate : int, Hz
        8000..192000.
    block_size : int >= 16, samples
    realtime : bool
        False hands blocks out as fast as they are read (benchmarks, tests).
    clock : Clock, optional
        Time source for pacing; the system clock by default.
    loops : int or None
        Passes to play before ``ended`` turns True; None loops forever.
    profile : str, InstrumentProfile or None
        Family member to play (its own compass); None: the alto.
    """

    def __init__(
        self,
        sample_rate: int = 48000,
        *,
        block_size: int = DEFAULT_BLOCK_SIZE,
        realtime: bool = True,
        clock: Clock | None = None,
        loops: int | None = None,
        profile: str | InstrumentProfile | None = None,
    ) -> None:
        if not 8000 <= sample_rate <= 192000:
            raise DeviceError(f"demo sample rate {sample_rate} Hz is out of range; use 8000-192000")
        if block_size < 16:
            raise DeviceError(f"block size {block_size} is too small; use 16 samples or more")
        self.sample_rate = int(sample_rate)
        self.block_size = int(block_size)
        self.realtime = bool(realtime)
        self.loops = loops
        self.dropped_blocks = 0
        self.input_latency_s = 0.0
        self.ended = False
        self.profile = profile
        self.description = f"demo: {demo_instrument(profile)}, {self.sample_rate} Hz"
        self._pacer = PacedBlocks(
            self.sample_rate, self.block_size, realtime=realtime, clock=clock or SystemClock()
        )
        self._audio: NDArray[np.float32] | None = None
        self._pos = 0
        self._pass = 0
        self._running = False

    @property
    def loop_duration_s(self) -> float:
        """Length of one pass, seconds (renders the loop if needed)."""
        return len(self._rendered()) / self.sample_rate

    def _rendered(self) -> NDArray[np.float32]:
        if self._audio is None:
            self._audio = render_demo_loop(self.sample_rate, profile=self.profile)
        return self._audio

    def start(self) -> None:
        self._rendered()
        self._pos = 0
        self._pass = 0
        self.ended = False
        self._running = True
        self._pacer.start()

    def read(self, timeout_s: float) -> NDArray[np.float32] | None:
        if not self._running or self.ended:
            return None
        audio = self._rendered()
        skip = self._pacer.overdue_blocks(MAX_LAG_S)
        if skip:
            self.dropped_blocks += skip
            self._pacer.delivered(skip * self.block_size)
            self._pos = (self._pos + skip * self.block_size) % len(audio)
        n = min(self.block_size, len(audio) - self._pos)
        if not self._pacer.wait_due(n, timeout_s):
            return None
        block = audio[self._pos : self._pos + n].copy()
        self._pacer.delivered(n)
        self._pos += n
        if self._pos >= len(audio):
            self._pos = 0
            self._pass += 1
            if self.loops is not None and self._pass >= self.loops:
                self.ended = True
        return block

    def stop(self) -> None:
        self._running = False

