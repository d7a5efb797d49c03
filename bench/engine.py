"""The engine: source -> analyser -> mapping -> Reading -> consumers, in a thread of its own.

The engine thread reads blocks from an :class:`~bench.sources.base.AudioSource`, feeds
them to the streaming analyser, maps each frame onto the tuning in force (or onto the locked
note) with :func:`bench.reading.make_reading`, writes a session-log row per reading, hands
every reading to the attached consumers (held notes, captures, blowing curve: anything with
``take`` and ``close``, see :class:`ReadingConsumer`) and publishes the newest
:class:`~bench.reading.Reading` by swapping one reference. The screen polls
:meth:`Engine.latest` and :meth:`Engine.history` and sends commands
(:meth:`Engine.update_settings`, :meth:`Engine.lock`, :meth:`Engine.start_log`); rare events
(register jump, source ended, device lost...) go to the ``on_event`` callback, called from the
engine thread (the screen turns them into messages without waiting).

Threads: the engine thread owns the analyser, the lock state and its generation, and runs
the consumers; :meth:`update_settings` and :meth:`lock` may be called from any thread (the
screen, a temperature sensor) and are atomic.

The engine never imports textual or sounddevice.
"""

from __future__ import annotations

import collections
import dataclasses
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Literal, Protocol

import numpy as np
from numpy.typing import NDArray

from bench.errors import DeviceError, LogError, SettingsError
from bench.framelog import CsvFrameLog, new_log_path
from bench.reading import Reading, make_reading, map_or_none, mode_of
from bench.sources.base import AudioSource, Clock
from bench.tuning import TuningSettings, map_frequency
from bench.tuning.mapping import target_hz_at_air
from dsp.frame import Frame

EventKind = Literal[
    "jump",
    "weakening",
    "source_ended",
    "device_lost",
    "device_back",
    "source_error",
    "log_error",
    "log_started",
    "log_stopped",
    "consumer_error",
]
EngineState = Literal["idle", "running", "device_lost", "ended", "stopped", "error"]

HISTORY_S = 60.0
"""Seconds of readings kept for :meth:`Engine.history`."""

READ_TIMEOUT_S = 0.05
BATCH_S = 0.02
"""Input gathered before one analyser call, seconds. The analyser's cost per call is mostly
fixed (about 1 ms), so two 512-sample blocks per call nearly halve the DSP thread's load; the
frames are the same whatever the split, and 20 ms adds at most 20 ms to the latency."""
"""Longest the engine waits for a block before checking for stop and flushing the log."""

RETRY_DELAYS_S = (0.5, 1.0, 2.0, 4.0)
"""Back-off between attempts to reopen a lost device (the last one repeats)."""

EVENT_GAP_S = 0.1
"""Unvoiced time after which a register state counts as new (fewer repeated events), seconds."""

JUMP_NAME_WAIT_S = 0.06
"""Longest a jump event waits for the pitch to name the note it went to, seconds."""

CRACK_LOOK_S = 0.25
"""How far back a cracked attack's event looks for the upper note it spoke, seconds (the
monitor reports a crack within 0.15 s of the note's start, plus its confirmation)."""

MAX_SOURCE_ERRORS = 20
"""Consecutive non-device errors from a source before the engine may give up on it..."""

GIVE_UP_S = 30.0
"""...and only once they have gone on for this many seconds of back-off waiting."""


@dataclass(frozen=True, slots=True)
class EngineEvent:
    """Something rare the screen should tell the user about.

    Attributes
    ----------
    kind : str
        "jump", "weakening", "source_ended", "device_lost", "device_back",
        "source_error", "log_error", "log_started" or "log_stopped".
    message : str
        One line for the user.
    time_s : float, seconds
        Input time (same clock as ``Reading.stream_time_s``) when it happened.
    """

    kind: EventKind
    message: str
    time_s: float


@dataclass(frozen=True, slots=True)
class EngineStats:
    """Counters for the status line and the benchmarks.

    Attributes
    ----------
    frames : int
        Analysis frames produced.
    dropped_blocks : int
        Input blocks lost (the source's count).
    source : str
        The source's description.
    state : str
        "idle", "running", "device_lost", "ended", "stopped" or "error".
    cpu_s : float, seconds
        CPU time the engine thread has used.
    blocks : int
        Blocks read from the source.
    log_rows : int
        Rows written to session logs.
    log_path : str or None
        Current session log, None when logging is off.
    latency_s : float or None, seconds
        Last frame's delay from the instant it describes reaching the input to its
        reading being published (plus the driver's reported input latency).
    max_latency_s : float, seconds
        Largest ``latency_s`` seen.
    source_errors : int
        Errors the source raised (device losses included).
    wall_s : float, seconds
        Wall time since the engine thread started.
    """

    frames: int
    dropped_blocks: int
    source: str
    state: str
    cpu_s: float
    blocks: int = 0
    log_rows: int = 0
    log_path: str | None = None
    latency_s: float | None = None
    max_latency_s: float = 0.0
    source_errors: int = 0
    wall_s: float = 0.0


class ReadingConsumer(Protocol):
    """Something fed every reading on the engine thread: a held-note summary, the session
    workflow (captures, blowing curve, margins)... ``take`` must return quickly (it runs
    between two analyser calls) and never wait on the screen; ``close`` is called once when
    the engine stops (end of input, stop, or an error)."""

    def take(self, reading: Reading) -> None: ...

    def close(self) -> None: ...


class ReadingCallback:
    """A consumer made of one function (``take``) and nothing to close: for benchmarks, tests
    and small hooks."""

    def __init__(self, take: Callable[[Reading], object]) -> None:
        self._take = take

    def take(self, reading: Reading) -> None:
        self._take(reading)

    def close(self) -> None:
        """Nothing to close."""


class Analyser(Protocol):
    """What the engine needs of :class:`dsp.analyser.StreamingAnalyser`."""

    @property
    def sample_rate(self) -> int | float: ...

    @property
    def frame_size(self) -> int: ...

    @property
    def hop_size(self) -> int: ...

    def process(self, block: NDArray[np.float32]) -> list[Frame]: ...

    def lock(self, target_hz: float | None) -> None: ...

    def reset(self) -> None: ...


def _default_analyser_factory(sample_rate: float) -> Analyser:
    """The project's streaming analyser at ``sample_rate``."""
    from dsp.analyser import StreamingAnalyser

    return StreamingAnalyser(sample_rate)


class Engine:
    """Run the measuring chain in a background thread.

    Parameters
    ----------
    source : AudioSource
        Where blocks come from. :meth:`start` starts it (a ``DeviceError`` or
        ``AudioFileError`` from there reaches the caller).
    settings : TuningSettings
        Settings in force at the start.
    log_path : Path, optional
        Session log file to write from the start (must not exist yet, unless
        ``log_overwrite``).
    log_overwrite : bool
        Replace an existing file at ``log_path`` (``bench analyze`` run again).
    log_rows_per_s : float > 0 or None
        Rows per second written to the log; None writes every frame.
    on_event : callable(EngineEvent), optional
        Called from the engine thread for rare events; must not block.
    analyser_factory : callable(sample_rate) -> analyser
        Builds the streaming analyser; :class:`dsp.analyser.StreamingAnalyser` by default.
    consumers : sequence of ReadingConsumer
        Fed every reading on the engine thread, in this order, and closed when the engine
        stops; more can be attached with :meth:`add_consumer`.
    clock : Clock, optional
        Used for back-off waits and latency; the system clock by default.
    clock_ppm : float or None, ppm
        The input clock's error (``bench calibrate``): the analyser runs at the true rate
        ``nominal * (1 + ppm / 1e6)``, so every frequency is corrected; written in the log.
    """

    def __init__(
        self,
        source: AudioSource,
        settings: TuningSettings,
        *,
        log_path: Path | None = None,
        log_overwrite: bool = False,
        log_rows_per_s: float | None = None,
        on_event: Callable[[EngineEvent], None] | None = None,
        analyser_factory: Callable[[float], Analyser] | None = None,
        consumers: Sequence[ReadingConsumer] = (),
        clock: Clock | None = None,
        batch_s: float = BATCH_S,
        clock_ppm: float | None = None,
    ) -> None:
        if not isinstance(settings, TuningSettings):
            raise TypeError(f"settings must be TuningSettings, not {type(settings).__name__}")
        if log_rows_per_s is not None and not log_rows_per_s > 0:
            raise LogError(f"log rate {log_rows_per_s} rows/s must be above 0; leave it out for every frame")
        self._source = source
        self._settings = settings
        self._initial_log_path = Path(log_path) if log_path is not None else None
        self._log_overwrite = bool(log_overwrite)
        self._log_interval_s = None if log_rows_per_s is None else 1.0 / float(log_rows_per_s)
        self._on_event = on_event
        self._consumers: tuple[ReadingConsumer, ...] = tuple(consumers)
        self._consumers_lock = threading.Lock()
        self._analyser_factory = analyser_factory or _default_analyser_factory
        self._clock = clock
        self._analyser: Analyser | None = None
        self._settings_lock = threading.Lock()
        self.clock_ppm = clock_ppm
        self._clock_factor = 1.0 + (clock_ppm or 0.0) * 1e-6

        self._latest: Reading | None = None
        self._history: collections.deque[Reading] = collections.deque()
        self._history_lock = threading.Lock()

        self._locked_midi: int | None = None  # as applied by the engine thread
        self._locked_note: str | None = None
        self._lock_request: tuple[int | None] | None = None  # set by lock(), taken by the engine thread
        self._analyser_target_hz: float | None = None

        self._log: CsvFrameLog | None = None
        self._log_lock = threading.Lock()
        self._next_log_time_s = -1.0
        self._log_rows = 0

        self._thread: threading.Thread | None = None
        self._stop_event = threading.Event()
        self._state: EngineState = "idle"
        self._frames = 0
        self._blocks = 0
        self._cpu_s = 0.0
        self._started_wall_s = 0.0
        self._latency_s: float | None = None
        self._max_latency_s = 0.0
        self._source_errors = 0
        self._jumps = _JumpEvents(self._emit)
        self._samples_fed = 0
        self._nonfinite_blocks = 0
        self._batch_s = max(0.0, float(batch_s))
        self._pending: list[NDArray[np.float32]] = []
        self._pending_samples = 0

    # -- read side (any thread) -------------------------------------------------------

    def latest(self) -> Reading | None:
        """The newest reading, or None before the first frame. Never blocks."""
        return self._latest

    def history(self, seconds: float) -> list[Reading]:
        """Readings of the last ``seconds`` of input time (oldest first; a copy)."""
        with self._history_lock:
            items = list(self._history)
        if not items:
            return []
        since_s = items[-1].stream_time_s - float(seconds)
        lo, hi = 0, len(items)
        while lo < hi:  # first reading at or after since_s
            mid = (lo + hi) // 2
            if items[mid].stream_time_s < since_s:
                lo = mid + 1
            else:
                hi = mid
        return items[lo:]

    @property
    def settings(self) -> TuningSettings:
        """Settings in force (an immutable object)."""
        return self._settings

    def update_settings(self, **changes: object) -> TuningSettings:
        """Change some settings in one atomic step; returns the settings now in force.

        Safe from any thread: two callers (the screen and a temperature sensor) never
        overwrite each other's change. The engine picks the new settings up at its next frame.

        Raises
        ------
        SettingsError
            A value is refused (the settings stay as they were).
        TypeError
            An unknown setting name.
        """
        with self._settings_lock:
            new = dataclasses.replace(self._settings, **changes)  # type: ignore[arg-type]
            self._settings = new
        return new

    def lock(self, midi: int | None) -> None:
        """Lock the reading to target note ``midi`` (MIDI number), or release with None.

        The engine thread applies it before its next frame; :attr:`locked_midi` tells the
        request at once.
        """
        if midi is not None:
            midi = int(midi)
            if not 0 <= midi <= 127:
                raise ValueError(f"MIDI note {midi} is out of range; use 0-127")
        self._lock_request = (midi,)
        if self._thread is None:  # not running yet: nothing to race with
            self._take_lock_request()

    @property
    def locked_midi(self) -> int | None:
        """Target note the reading is locked to (or asked to be), or None."""
        request = self._lock_request
        return request[0] if request is not None else self._locked_midi

    def add_consumer(self, consumer: ReadingConsumer) -> None:
        """Feed ``consumer`` every reading from the next frame on (any thread)."""
        with self._consumers_lock:
            self._consumers = (*self._consumers, consumer)

    def remove_consumer(self, consumer: ReadingConsumer) -> None:
        """Stop feeding ``consumer`` (it is not closed: the caller owns it now)."""
        with self._consumers_lock:
            self._consumers = tuple(c for c in self._consumers if c is not consumer)

    @property
    def log_path(self) -> Path | None:
        """Session log being written, or None when logging is off."""
        log = self._log
        return log.path if log is not None else None

    @property
    def source(self) -> AudioSource:
        """The source the engine reads."""
        return self._source

    @property
    def on_event(self) -> Callable[[EngineEvent], None] | None:
        """Callback for rare events (called from the engine thread; must not block).

        The screen may set it after construction; replacing it is one reference swap.
        """
        return self._on_event

    @on_event.setter
    def on_event(self, callback: Callable[[EngineEvent], None] | None) -> None:
        self._on_event = callback

    @property
    def stats(self) -> EngineStats:
        """Counters now (a snapshot)."""
        log = self._log
        started = self._started_wall_s
        return EngineStats(
            frames=self._frames,
            dropped_blocks=int(self._source.dropped_blocks),
            source=self._source.description,
            state=self._state,
            cpu_s=self._cpu_s,
            blocks=self._blocks,
            log_rows=self._log_rows,
            log_path=str(log.path) if log is not None else None,
            latency_s=self._latency_s,
            max_latency_s=self._max_latency_s,
            source_errors=self._source_errors,
            wall_s=(time.monotonic() - started) if started else 0.0,
        )

    # -- logging ----------------------------------------------------------------------

    def start_log(self, folder: Path) -> Path:
        """Start a new timestamped session log in ``folder``; returns its path.

        Raises
        ------
        LogError
            The folder cannot be created or written (logging stays as it was).
        """
        path = new_log_path(folder)
        new_log = CsvFrameLog(path, clock_ppm=self.clock_ppm)
        self._swap_log(new_log)
        self._emit("log_started", f"logging to {path}")
        return path

    def stop_log(self) -> None:
        """Close the session log (every row already measured is kept)."""
        if self._log is None:
            return
        path = self._log.path
        self._swap_log(None)
        self._emit("log_stopped", f"log closed: {path}")

    def _swap_log(self, new_log: CsvFrameLog | None) -> None:
        with self._log_lock:
            old, self._log = self._log, new_log
            self._next_log_time_s = -1.0
        if old is not None:
            try:
                old.close()
            except (OSError, LogError) as exc:
                self._emit("log_error", f"closing the log {old.path} failed: {exc}")

    # -- life cycle -------------------------------------------------------------------

    def start(self) -> None:
        """Start the source and the engine thread (no-op when already running).

        Raises
        ------
        DeviceError, AudioFileError
            The source cannot start.
        RuntimeError
            The engine was stopped; build a new one.
        """
        if self._thread is not None:
            if self._state == "stopped":
                raise RuntimeError("this engine was stopped; make a new Engine to start again")
            return
        self._analyser = self._build_analyser()
        self._source.start()
        if int(self._source.sample_rate) != round(self._analyser.sample_rate / self._clock_factor):
            # A microphone may only learn its rate on opening.
            try:
                self._analyser = self._build_analyser()
            except SettingsError:
                self._source.stop()
                raise
        if self._initial_log_path is not None:
            try:
                self._swap_log(
                    CsvFrameLog(self._initial_log_path, overwrite=self._log_overwrite, clock_ppm=self.clock_ppm)
                )
                self._emit("log_started", f"logging to {self._initial_log_path}")
            except LogError as exc:
                self._emit("log_error", f"{exc}; measuring goes on without a log")
        self._state = "running"
        self._started_wall_s = time.monotonic()
        self._thread = threading.Thread(target=self._run, name="bench-engine", daemon=True)
        self._thread.start()

    def _build_analyser(self) -> Analyser:
        """The analyser for the source's rate; a rate it refuses is one SettingsError line."""
        rate = int(self._source.sample_rate)
        try:
            return self._analyser_factory(rate * self._clock_factor if self.clock_ppm else rate)
        except ValueError as exc:
            raise SettingsError(f"cannot analyse {self._source.description}: {exc}") from None

    def stop(self, timeout_s: float = 1.0) -> None:
        """Stop the thread and the source, close the log; safe to call twice."""
        self._stop_event.set()
        thread = self._thread
        if thread is not None and thread is not threading.current_thread():
            thread.join(timeout_s)
        if thread is None or not thread.is_alive():
            self._finish()
        else:
            # The thread is stuck in the source (a driver that hangs): keep the rows anyway,
            # and stop the source, which ends many a blocked read.
            self._close_log_from_outside()
            try:
                self._source.stop()
            except Exception:  # noqa: BLE001, S110 - a stuck driver may fail to stop as well
                pass
            thread.join(min(timeout_s, 1.0))
        self._state = "stopped" if self._state not in ("ended", "error") else self._state
        if thread is None:
            self._thread = threading.Thread()  # marks the engine as used

    @property
    def running(self) -> bool:
        """True while the engine thread is alive."""
        return self._thread is not None and self._thread.is_alive()

    def join(self, timeout_s: float | None = None) -> bool:
        """Wait for the engine thread to end by itself (a file ending); True if it has."""
        thread = self._thread
        if thread is None or not thread.ident:
            return True
        thread.join(timeout_s)
        return not thread.is_alive()

    def _close_log_from_outside(self) -> None:
        """Close the log while the engine thread may still be alive (it never writes
        without holding the log lock, and finds no log afterwards)."""
        if not self._log_lock.acquire(timeout=1.0):
            return
        try:
            log, self._log = self._log, None
        finally:
            self._log_lock.release()
        if log is not None:
            try:
                log.close()
            except (OSError, LogError) as exc:
                self._emit("log_error", f"closing the log {log.path} failed: {exc}")

    def _finish(self) -> None:
        """Close the consumers, the log and the source (thread gone, or never started)."""
        self._jumps.flush()
        with self._consumers_lock:
            consumers, self._consumers = self._consumers, ()
        for consumer in consumers:
            try:
                consumer.close()
            except Exception as exc:  # noqa: BLE001 - one consumer's fault must not lose the log
                self._emit("consumer_error", f"closing {type(consumer).__name__} failed: {exc}")
        with self._log_lock:
            log, self._log = self._log, None
        if log is not None:
            try:
                log.close()
            except (OSError, LogError) as exc:
                self._emit("log_error", f"closing the log {log.path} failed: {exc}")
        try:
            self._source.stop()
        except Exception:  # noqa: BLE001, S110 - stopping a broken source must not hide the rows
            pass

    # -- the engine thread -------------------------------------------------------------

    def _run(self) -> None:
        cpu0_s = time.thread_time()
        applied_settings: TuningSettings | None = None
        consecutive_errors, error_wait_s = 0, 0.0
        try:
            while not self._stop_event.is_set():
                settings = self._settings
                if self._lock_request is not None or settings is not applied_settings:
                    # the analyser is told in this thread only (it is not thread-safe)
                    self._take_lock_request()
                    applied_settings = settings
                    self._apply_lock(settings)
                try:
                    block = self._source.read(READ_TIMEOUT_S)
                except DeviceError as exc:
                    self._source_errors += 1
                    if not self._recover(str(exc)):
                        break
                    continue
                except Exception as exc:  # noqa: BLE001 - reported, then the engine goes on
                    self._source_errors += 1
                    consecutive_errors += 1
                    self._emit("source_error", f"input failed: {exc}")  # the back-off caps the rate
                    # back off (10 ms doubling to 1 s), so a burst of a few microseconds is
                    # ridden out; give up only when errors persist for GIVE_UP_S of waiting
                    delay_s = min(0.01 * 2 ** min(consecutive_errors - 1, 7), 1.0)
                    error_wait_s += delay_s
                    if consecutive_errors >= MAX_SOURCE_ERRORS and error_wait_s >= GIVE_UP_S:
                        self._state = "error"
                        self._emit(
                            "source_error",
                            f"input failed {consecutive_errors} times in {error_wait_s:.0f} s; stopped: {exc}",
                        )
                        break
                    if self._wait(delay_s):
                        break
                    continue
                consecutive_errors, error_wait_s = 0, 0.0
                if block is None:
                    self._process_pending()  # no more input for now: analyse what is held
                    self._flush_log_if_idle()
                    if self._source.ended:
                        self._state = "ended"
                        self._jumps.flush()
                        self._emit("source_ended", f"{self._source.description}: end of input")
                        break
                    continue
                self._blocks += 1
                self._pending.append(block)
                self._pending_samples += len(block)
                if self._pending_samples >= self._batch_s * self._source.sample_rate:
                    self._process_pending()
                self._cpu_s = time.thread_time() - cpu0_s
        except Exception as exc:  # noqa: BLE001 - the engine reports its own errors
            self._state = "error"
            self._emit("source_error", f"engine stopped by an error: {type(exc).__name__}: {exc}")
        finally:
            self._cpu_s = time.thread_time() - cpu0_s
            self._finish()
            if self._state == "running" or self._state == "device_lost":
                self._state = "stopped"

    def _now(self) -> float:
        return self._clock.monotonic() if self._clock is not None else time.monotonic()

    def _wait(self, seconds: float) -> bool:
        """Back-off wait; True if stop was asked meanwhile."""
        if self._clock is None:
            return self._stop_event.wait(seconds)
        self._clock.sleep(seconds)
        return self._stop_event.is_set()

    def _take_lock_request(self) -> None:
        """Apply the newest lock request (engine thread, or before it starts)."""
        request, self._lock_request = self._lock_request, None
        if request is not None:
            self._locked_midi = request[0]

    def _apply_lock(self, settings: TuningSettings) -> None:
        assert self._analyser is not None
        midi = self._locked_midi
        target_hz = None
        if midi is not None:
            target = map_frequency(settings.a4_hz, settings, locked_midi=midi)
            # the register monitor listens where the note sounds in the air measured now
            self._locked_note, target_hz = target.note, target_hz_at_air(midi, settings)
        else:
            self._locked_note = None
        if target_hz == self._analyser_target_hz:
            return  # unchanged: leave the register monitor's state alone
        try:
            self._analyser.lock(target_hz)
        except ValueError as exc:
            name = self._locked_note or str(midi)
            self._locked_midi, self._locked_note = None, None
            self._emit("source_error", f"cannot lock to {name}: {exc}")
            return
        self._analyser_target_hz = target_hz

    def _recover(self, message: str) -> bool:
        """Report a lost device and reopen it with back-off; False if stopped meanwhile."""
        self._state = "device_lost"
        self._emit("device_lost", f"{message}; retrying")
        attempt = 0
        while True:
            delay_s = RETRY_DELAYS_S[min(attempt, len(RETRY_DELAYS_S) - 1)]
            if self._wait(delay_s):
                return False
            attempt += 1
            try:
                self._source.start()
            except Exception as exc:  # noqa: BLE001 - keep retrying whatever the driver says
                if attempt == 1:  # say once why it is not back yet
                    self._emit("source_error", f"reopening failed: {exc}")
                continue
            self._state = "running"
            self._emit("device_back", f"input back after {attempt} attempt(s): {self._source.description}")
            return True

    def _flush_log_if_idle(self) -> None:
        with self._log_lock:
            log = self._log
            if log is None:
                return
            try:
                log.flush()
            except (OSError, LogError) as exc:
                self._log_failed(log, exc)

    def _log_failed(self, log: CsvFrameLog, exc: Exception) -> None:
        """Called with the log lock held: logging goes off, measuring goes on."""
        self._log = None
        try:
            log.close()
        except Exception:  # noqa: BLE001, S110 - the file is already broken
            pass
        self._emit("log_error", f"{exc}; logging is off, measuring goes on")

    def _process_pending(self) -> None:
        """Analyse the blocks gathered so far in one analyser call."""
        if not self._pending:
            return
        blocks, self._pending, self._pending_samples = self._pending, [], 0
        block = blocks[0] if len(blocks) == 1 else np.concatenate(blocks)
        self._process_block(block, self._now())

    def _process_block(self, block: NDArray[np.float32], arrival_s: float) -> None:
        assert self._analyser is not None
        if not np.isfinite(block).all():
            # a driver glitch or a damaged file: silence the bad samples (dsp refuses them)
            block = np.where(np.isfinite(block), block, np.float32(0.0)).astype(np.float32)
            self._nonfinite_blocks += 1
            if self._nonfinite_blocks == 1:
                self._emit("source_error", "input held NaN/Inf samples; they were read as silence")
        try:
            frames = self._analyser.process(block)
        except ValueError as exc:  # the analyser refused this block: skip it, keep measuring
            self._samples_fed += len(block)
            self._emit("source_error", f"a block could not be analysed: {exc}")
            return
        self._samples_fed += len(block)
        if not frames:
            return
        sample_rate = float(self._analyser.sample_rate)
        block_end_s = self._samples_fed / sample_rate
        input_latency_s = self._source.input_latency_s
        dropped = int(self._source.dropped_blocks)
        with self._log_lock:
            log = self._log
            log_path = str(log.path) if log is not None else None
            for frame in frames:
                settings = self._settings  # read once per frame
                locked = self._locked_midi
                reading = make_reading(
                    frame,
                    settings,
                    locked_midi=locked,
                    locked_note=self._locked_note if locked is not None else None,
                    dropped_blocks=dropped,
                    log_path=log_path,
                )
                if log is not None and self._log_due(frame.time_s):
                    try:
                        log.write(reading)
                        self._log_rows += 1
                    except (OSError, LogError) as exc:
                        self._log_failed(log, exc)
                        log, log_path = None, None
                self._publish(reading)
                self._jumps.take(reading)
        now_s = self._now()
        for frame in frames[-1:]:
            heard_s = arrival_s - (block_end_s - frame.time_s)
            latency_s = now_s - heard_s + input_latency_s
            self._latency_s = latency_s
            self._max_latency_s = max(self._max_latency_s, latency_s)

    def _log_due(self, time_s: float) -> bool:
        if self._log_interval_s is None:
            return True
        if time_s >= self._next_log_time_s:
            if self._next_log_time_s < 0 or time_s - self._next_log_time_s > self._log_interval_s:
                self._next_log_time_s = time_s + self._log_interval_s
            else:
                self._next_log_time_s += self._log_interval_s
            return True
        return False

    def _publish(self, reading: Reading) -> None:
        self._frames += 1
        with self._history_lock:
            self._history.append(reading)
            oldest_s = reading.stream_time_s - HISTORY_S
            while self._history[0].stream_time_s < oldest_s:
                self._history.popleft()
        self._latest = reading  # one reference swap: readers never wait
        for consumer in self._consumers:
            try:
                consumer.take(reading)
            except Exception as exc:  # noqa: BLE001 - a consumer's bug must not stop measuring
                self.remove_consumer(consumer)
                self._emit(
                    "consumer_error", f"{type(consumer).__name__} failed and was detached: {type(exc).__name__}: {exc}"
                )

    def _emit(self, kind: EventKind, message: str, time_s: float | None = None) -> None:
        if time_s is None:
            time_s = self._samples_fed / max(int(self._source.sample_rate), 1)
        callback = self._on_event
        if callback is None:
            return
        try:
            callback(EngineEvent(kind, message, float(time_s)))
        except Exception:  # noqa: BLE001, S110 - a UI bug must not stop measuring
            pass


class _JumpEvents:
    """Names register events for the event list: a consumer of readings on the engine thread.

    A jump is reported once per change of register state (unvoiced time under
    :data:`EVENT_GAP_S` is no change), named "<fingered> <kind>: sounding <note>". The register
    monitor judges the newest half window, so a jump is often found while the reading's pitch
    still names the fingered note: the event then waits for the note it went to,
    :data:`JUMP_NAME_WAIT_S` at most. A cracked attack (the note spoke an upper register before
    its fundamental; :mod:`dsp.register`) is reported once, when its first marked reading comes,
    as "<note> cracked attack: spoke <upper note> first".
    """

    def __init__(self, emit: Callable[[EventKind, str, float | None], None]) -> None:
        self._emit = emit
        self._last_register: str | None = None
        self._last_voiced_s = -1e9
        self._pending: Reading | None = None  # a jump seen before its pitch moved
        self._last_cracked = False
        self._recent: collections.deque[tuple[float, float]] = collections.deque()  # (time_s, f0_hz) of the last CRACK_LOOK_S

    def take(self, reading: Reading) -> None:
        self._name_pending(reading)
        register = reading.frame.register if reading.voiced else None
        if register is None:
            return  # an unvoiced frame inside a note is no new event; a real gap resets below
        time_s = reading.time_s
        previous = self._last_register
        if time_s - self._last_voiced_s > EVENT_GAP_S:
            previous = None
            self._last_cracked = False
            self._recent.clear()
        self._last_register, self._last_voiced_s = register, time_s
        recent = self._recent
        recent.append((time_s, reading.frame.f0_hz or 0.0))
        while recent[0][0] < time_s - CRACK_LOOK_S:
            recent.popleft()
        cracked = reading.jump == "cracked"
        if cracked and not self._last_cracked:
            self._emit("jump", _crack_message(reading, [f for _, f in recent]), time_s)
        self._last_cracked = cracked
        if register == previous:
            return
        if register == "jumped":
            if _sounding_moved(reading):
                self._emit("jump", _jump_message(reading), time_s)
            else:
                self._pending = reading
        elif register == "weakening" and previous == "steady":
            self._emit("weakening", f"{reading.note or 'note'}: register weakening, about to jump", time_s)

    def _name_pending(self, reading: Reading) -> None:
        pending = self._pending
        if pending is None:
            return
        register = reading.frame.register if reading.voiced else None
        if register == "jumped" and _sounding_moved(reading):
            self._pending = None
            self._emit("jump", _jump_message(reading), pending.time_s)
        elif register not in ("jumped", None) or reading.time_s - pending.time_s > JUMP_NAME_WAIT_S:
            self.flush()  # over, or waited long enough (a lost frame ends nothing)

    def flush(self) -> None:
        """Report a jump still waiting for its name (end of input)."""
        pending, self._pending = self._pending, None
        if pending is not None:
            self._emit("jump", _jump_message(pending), pending.time_s)


def _sounding_moved(reading: Reading) -> bool:
    """The reading's pitch names another note than the held one."""
    held = _note_of(reading.frame.held_f0_hz, reading.settings)
    return held is None or _note_of(reading.frame.f0_hz, reading.settings) != held


def _jump_message(reading: Reading) -> str:
    frame = reading.frame
    kind = frame.jump or "register jump"
    sounding = _note_of(frame.f0_hz, reading.settings)
    held = _note_of(frame.held_f0_hz, reading.settings)
    if held and sounding and held != sounding:
        return f"{held} {kind}: sounding {sounding}"
    return f"{sounding or 'note'} {kind}"


def _crack_message(reading: Reading, recent_f0_hz: list[float]) -> str:
    """Event text of a cracked attack; the upper note named is a recent reading at 2 or 3 x held."""
    held_hz = reading.frame.held_f0_hz
    held = _note_of(held_hz, reading.settings) or "note"
    upper = None
    if held_hz:
        spoke = [f for f in recent_f0_hz if mode_of(f, held_hz) in (2, 3)]
        upper = _note_of(max(spoke), reading.settings) if spoke else None
    if upper:
        return f"{held} cracked attack: spoke {upper} first"
    return f"{held} cracked attack: spoke an upper register first"


def _note_of(freq_hz: float | None, settings: TuningSettings) -> str | None:
    mapping = map_or_none(freq_hz, settings)
    return mapping.note if mapping is not None else None
