"""The reference tone of a live session: the target note, sounded through an output device.

:class:`ReferenceTone` is owned by the session controller (:class:`bench.controller.SessionController`)
and fed by the engine as one of its consumers: each reading may move the tone to a new target.
It sounds, through a :class:`bench.sources.tone_out.TonePlayer` (its own output stream and
callback, never the input's), the target frequency of:

1. the note the target is locked to, when one is locked (at once);
2. otherwise the *home* note it was started with (``bench run --drone NOTE``), when it has one;
3. otherwise the nearest note sounding, held as follows (chosen for a player tuning by ear;
   released from a lock, the tone stays on the locked note until another holds):

   - the tone stays on its note through silences of any length (unvoiced readings change
     nothing), so it does not drop out between breaths;
   - it moves to another note only once that note has been the nearest note of every voiced
     reading for :data:`SWITCH_S` (0.25 s of input time): a one-frame blip, a note's attack
     passing through its neighbours, or a jitter across the half-way point between two notes
     leaves it where it is;
   - before any note has sounded for that long it is silent ("waiting for a note").

The target frequency is that of :func:`bench.tuning.target_hz_at_air` under the settings in
force (temperament, tonic, pitch standard, air and reference temperature), divided by
``1 + ppm/1e6`` for the output's clock error (the value ``bench calibrate`` stored for a device
of the output's name, as ``bench tone`` does), so it sounds true.

Keeping the analyser from reading the tone as the instrument: a capture is never taken with
the tone sounding. The capture key pauses the tone (a 20 ms fade), lets :data:`CAPTURE_QUIET_S`
of input pass (the fade, the output's latency and the room's echo), takes the capture from the
next half second, then fades the tone back in; automatic captures wait while the tone sounds.
The readings on screen and in the frame log do hear the tone: README (reference tone) gives the
pull measured at each level of the tone under the instrument at the microphone.

Nothing here imports textual; PortAudio is reached only when the tone starts.
"""

from __future__ import annotations

import math
import threading
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Protocol

from bench.errors import BenchError
from bench.reading import Reading
from bench.sources.tone_out import DEFAULT_LEVEL_DBFS, Timbre
from bench.tuning import TuningSettings, target_hz_at_air
from bench.tuning.notes import note_name

__all__ = [
    "CAPTURE_QUIET_S",
    "LEVEL_MAX_DBFS",
    "LEVEL_MIN_DBFS",
    "LEVEL_STEP_DB",
    "SWITCH_S",
    "ReferenceTone",
    "ToneState",
    "open_default_output",
]

SWITCH_S = 0.25
"""Input time a new nearest note must hold before the tone moves to it, seconds."""
CAPTURE_QUIET_S = 0.25
"""Input time let pass after the tone is paused before a capture's half second starts, seconds
(20 ms fade, an output latency of some tens of ms, and the echo of a small room)."""
LEVEL_STEP_DB = 3.0
"""Step of the level keys, dB."""
LEVEL_MIN_DBFS = -60.0
LEVEL_MAX_DBFS = -6.0
"""The level keys stay in [-60, -6] dBFS: full scale through headphones can hurt."""


class Player(Protocol):
    """What the tone needs of an output: a generator to steer, start and stop."""

    generator: Any

    def start(self) -> None: ...

    def stop(self, timeout_s: float = ...) -> None: ...


Opener = Callable[[float, float, Timbre], tuple[Player, str, float | None]]
"""``open(freq_hz, level_dbfs, timbre) -> (started player, output name, clock ppm or None)``;
raises :class:`bench.errors.BenchError` when there is no output."""


def open_default_output(freq_hz: float, level_dbfs: float, timbre: Timbre) -> tuple[Player, str, float | None]:
    """Start a silent tone on the default output; ``freq_hz`` is the true frequency wanted.

    The output's clock error is the stored calibration of a device of that name and host API
    (:func:`bench.clockfile.find_calibration`), or none.
    """
    from bench.clockfile import find_calibration
    from bench.sources.tone_out import ToneGenerator, TonePlayer, resolve_output_device

    device = resolve_output_device(None)
    stored = find_calibration(device.name, device.host_api)
    ppm = stored.clock_ppm if stored is not None else None
    generator = ToneGenerator(round(device.default_rate_hz), freq_hz / (1.0 + (ppm or 0.0) * 1e-6), level_dbfs, timbre)
    generator.fade_out()  # silent until it has a note
    player = TonePlayer(device, generator)
    player.start()
    return player, device.label(), ppm


@dataclass(frozen=True, slots=True)
class ToneState:
    """What the screen shows of the tone.

    Attributes
    ----------
    on : bool
        The tone is wanted (it may still be opening its output, or waiting for a note).
    note : str or None
        Note sounded, None while waiting for one.
    freq_hz : float or None, Hz
        Its true frequency (before the clock correction).
    level_dbfs : float, dBFS
    timbre : "sine" or "reed"
    paused : bool
        Paused for a capture.
    no_output : bool
        The last start found no output to play on (the session line says so until the next).
    """

    on: bool
    note: str | None
    freq_hz: float | None
    level_dbfs: float
    timbre: Timbre
    paused: bool = False
    no_output: bool = False

    def describe(self, *, short: bool = False) -> str:
        """``tone A4 440.00 Hz -18 dB`` (``short``: ``tone A4 -18 dB``); '' when off."""
        if not self.on:
            return "tone: no output" if self.no_output else ""
        if self.paused:
            return "tone paused"
        if self.note is None or self.freq_hz is None:
            return f"tone waits {self.level_dbfs:.0f} dB"
        hz = "" if short else f" {self.freq_hz:.2f} Hz"
        return f"tone {self.note}{hz} {self.level_dbfs:.0f} dB"


class ReferenceTone:
    """The session's reference tone (see the module docstring).

    Parameters
    ----------
    settings : TuningSettings
        Settings in force at the start (each reading brings its own afterwards).
    report : callable(str, str)
        ``report(text, severity)``: one line for the person, called from any thread (the
        output opens in a thread of its own; a lost output is told once).
    opener : callable, optional
        Opens the output (:func:`open_default_output` by default; the tests give a stand-in).
    background : bool
        Open the output in a thread (the screen never waits on PortAudio); False opens it in
        the caller's thread.
    """

    def __init__(
        self,
        settings: TuningSettings,
        *,
        report: Callable[[str, str], None],
        opener: Opener | None = None,
        background: bool = True,
    ) -> None:
        self._lock = threading.RLock()
        self._report = report
        self._opener: Opener = opener or open_default_output
        self._background = background
        self._settings = settings
        self._locked: int | None = None
        self.home: int | None = None
        """The drone's own note (``--drone``), sounded when no note is locked; None: follow."""
        self._current: int | None = None  # note sounded
        self._candidate: tuple[int, float] | None = None  # (a new nearest note, input time first seen)
        self._last_time_s: float | None = None
        self.level_dbfs = DEFAULT_LEVEL_DBFS
        self.timbre: Timbre = "sine"
        self.on = False
        self._player: Player | None = None
        self._clock_factor = 1.0
        self._opening = False
        self._pause_until_s: float | None = None  # input time the capture may be asked for
        self._pause_requested = False
        self._after_pause: Callable[[], None] | None = None
        self._paused = False
        self._hz_sent: float | None = None
        self._no_output = False

    # -- keys ----------------------------------------------------------------------------------

    def start(self, home: int | None = None) -> None:
        """Sound the target (``home``: the drone's own note while none is locked)."""
        with self._lock:
            if home is not None:
                self.home = home
            if self.on:
                self._retarget()
                return
            self.on = True
            self._no_output = False
            self._retarget()
            if self._player is None and not self._opening:
                self._opening = True
                if self._background:
                    threading.Thread(target=self._open, name="bench-tone-open", daemon=True).start()
                else:
                    self._open()

    def _open(self) -> None:
        freq_hz = self._target_hz() or 440.0
        try:
            player, name, ppm = self._opener(freq_hz, self.level_dbfs, self.timbre)
        except BenchError as exc:
            with self._lock:
                self._opening, self.on, self._no_output = False, False, True
            self._report(f"reference tone off: {exc}", "error")
            return
        with self._lock:
            self._opening = False
            if not self.on:  # switched off while opening
                stop = player
            else:
                stop = None
                self._player = player
                self._clock_factor = 1.0 + (ppm or 0.0) * 1e-6
                self._hz_sent = None
                self._apply()
        if stop is not None:
            stop.stop()
            return
        clock = f", output clock {ppm:+.2f} ppm taken out" if ppm is not None else ""
        self._report(f"tone on: keep it 20 dB under the instrument at the mic; output {name}{clock}", "information")

    def stop(self) -> None:
        """Silence the tone and close its output."""
        with self._lock:
            self.on = False
            player, self._player = self._player, None
            self._pause_until_s = None
            self._pause_requested = False
            self._paused = False
            self._after_pause = None
        if player is not None:
            player.stop()

    def toggle(self) -> bool:
        """On, or off; returns whether it is on now."""
        if self.on:
            self.stop()
        else:
            self.start()
        return self.on

    def step_level(self, step_db: float) -> float:
        """Level ``step_db`` up or down, kept in [:data:`LEVEL_MIN_DBFS`, :data:`LEVEL_MAX_DBFS`]; the new level."""
        with self._lock:
            self.level_dbfs = min(LEVEL_MAX_DBFS, max(LEVEL_MIN_DBFS, self.level_dbfs + step_db))
            if self._player is not None:
                self._player.generator.set_level(self.level_dbfs)
            return self.level_dbfs

    def next_timbre(self) -> Timbre:
        """Sine <-> reed-like; the new timbre (kept when the note is too high for the reed's harmonics)."""
        with self._lock:
            timbre: Timbre = "reed" if self.timbre == "sine" else "sine"
            if self._player is not None:
                self._player.generator.set_timbre(timbre)  # SettingsError: too high for it
            self.timbre = timbre
            return timbre

    # -- the target ------------------------------------------------------------------------

    def follow(self, settings: TuningSettings, locked_midi: int | None) -> None:
        """The settings or the lock changed by a key: move the tone at once."""
        with self._lock:
            self._settings = settings
            self._set_lock(locked_midi)
            self._retarget()

    def take(self, reading: Reading) -> None:
        """The engine's consumer call (engine thread): follow the reading's lock, settings and note."""
        after = None
        with self._lock:
            self._settings = reading.settings
            self._set_lock(reading.locked_midi)
            time_s = reading.stream_time_s
            self._last_time_s = time_s
            mapping = reading.mapping
            if mapping is not None:
                midi = mapping.midi
                if midi == self._current:
                    self._candidate = None
                elif self._candidate is None or self._candidate[0] != midi:
                    self._candidate = (midi, time_s)
                elif time_s - self._candidate[1] >= SWITCH_S:  # held long enough: the tone moves
                    self._current, self._candidate = midi, None
            if self._pause_requested:  # the first reading after the key: the quiet starts now
                self._pause_requested = False
                self._pause_until_s = time_s + CAPTURE_QUIET_S
            elif self._pause_until_s is not None and time_s >= self._pause_until_s + 0.5:
                after, self._after_pause, self._pause_until_s = self._after_pause, None, None
            self._retarget()
        if after is not None:
            after()  # the workflow captures at its next reading (the last half second: all quiet)
            with self._lock:
                self._paused = False
                if self._player is not None and self.on and self._current_target() is not None:
                    self._player.generator.fade_in()

    def close(self) -> None:
        """The engine stopped: silence the tone."""
        self.stop()

    def pause_for_capture(self, capture: Callable[[], None]) -> bool:
        """Pause the tone, let :data:`CAPTURE_QUIET_S` and half a second of input pass, call
        ``capture`` (on the engine thread), then sound again. False (and nothing done) when
        the tone is not sounding."""
        with self._lock:
            if self._player is None or not self.on or self._paused:
                return False
            self._paused = True
            self._pause_requested = True
            self._after_pause = capture
            self._player.generator.fade_out()
            return True

    @property
    def sounding(self) -> bool:
        """The tone is on its output and not paused (captures must wait)."""
        with self._lock:
            return self._player is not None and self.on and not self._paused

    @property
    def state(self) -> ToneState:
        with self._lock:
            midi = self._current_target()
            hz = self._target_hz()
            note = None if midi is None else note_name(midi, flats=self._settings.flats)
            return ToneState(self.on, note, hz, self.level_dbfs, self.timbre, self._paused, self._no_output)

    # -- internals -------------------------------------------------------------------------

    def _set_lock(self, locked_midi: int | None) -> None:
        if locked_midi is None and self._locked is not None and self.home is None:
            self._current, self._candidate = self._locked, None  # released: the note goes on till another holds
        self._locked = locked_midi

    def _current_target(self) -> int | None:
        if self._locked is not None:
            return self._locked
        if self.home is not None:
            return self.home
        return self._current

    def _target_hz(self) -> float | None:
        midi = self._current_target()
        if midi is None:
            return None
        try:
            return target_hz_at_air(midi, self._settings)
        except BenchError:
            return None

    def _retarget(self) -> None:
        if self.on:
            self._apply()

    def _apply(self) -> None:
        player = self._player
        if player is None:
            return
        hz = self._target_hz()
        if hz is None:
            player.generator.fade_out()  # waiting for a note
            return
        sent = hz / self._clock_factor
        if sent != self._hz_sent:
            try:
                player.generator.set_frequency(sent)
            except BenchError:
                return  # out of the output's reach: the last note goes on
            self._hz_sent = sent
        if not self._paused and math.isfinite(sent):
            player.generator.fade_in()
