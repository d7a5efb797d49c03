"""Fault-injecting stand-ins for the reliability tests: fast sources, wrappers that raise,
overflow, vanish and come back, or hang, a recording analyser, and a clock that records waits.

Every wrapper counts what it injected, so a test can compare "faults injected" with "faults
survived" and the frames the analyser produced with the rows that reached the log.
"""

from __future__ import annotations

import random
import threading
from collections.abc import Callable

import numpy as np
from numpy.typing import NDArray

from bench.errors import DeviceError
from dsp.frame import Frame

SAMPLE_RATE = 48000
BLOCK_SIZE = 512


def sine_block(freq_hz: float, start_sample: int, n: int, sample_rate: int = SAMPLE_RATE) -> NDArray[np.float32]:
    """``n`` samples of a 0.3-amplitude sine starting at sample ``start_sample`` (phase-continuous)."""
    t = (start_sample + np.arange(n)) / sample_rate
    return (0.3 * np.sin(2 * np.pi * freq_hz * t)).astype(np.float32)


class FastSineSource:
    """A non-paced source: a steady sine, block after block, as fast as the engine reads.

    ``n_blocks`` None runs forever; otherwise ``ended`` turns True after that many blocks.
    """

    input_latency_s = 0.0

    def __init__(self, freq_hz: float = 440.0, n_blocks: int | None = None, *,
                 sample_rate: int = SAMPLE_RATE, block_size: int = BLOCK_SIZE) -> None:
        self.sample_rate = sample_rate
        self.block_size = block_size
        self.freq_hz = freq_hz
        self.n_blocks = n_blocks
        self.dropped_blocks = 0
        self.ended = False
        self.description = f"fast sine {freq_hz:g} Hz (test)"
        self.delivered_blocks = 0
        self.starts = 0
        self.stops = 0
        # One pre-computed block: 440 Hz does not fit a block exactly, but the fake analyser
        # only needs a tone; the real-analyser tests use phase-continuous blocks.
        self._block = sine_block(freq_hz, 0, block_size, sample_rate)
        self._continuous = False

    def continuous(self) -> FastSineSource:
        """Hand out phase-continuous blocks (for the real analyser)."""
        self._continuous = True
        return self

    def start(self) -> None:
        self.starts += 1

    def read(self, timeout_s: float) -> NDArray[np.float32] | None:
        if self.n_blocks is not None and self.delivered_blocks >= self.n_blocks:
            self.ended = True
            return None
        if self._continuous:
            block = sine_block(self.freq_hz, self.delivered_blocks * self.block_size, self.block_size, self.sample_rate)
        else:
            block = self._block.copy()
        self.delivered_blocks += 1
        return block

    def stop(self) -> None:
        self.stops += 1


class _Wrapper:
    """Passes the AudioSource attributes through to ``inner``."""

    input_latency_s = 0.0

    def __init__(self, inner) -> None:  # type: ignore[no-untyped-def]
        self.inner = inner

    @property
    def sample_rate(self) -> int:
        return self.inner.sample_rate

    @property
    def dropped_blocks(self) -> int:
        return self.inner.dropped_blocks

    @property
    def ended(self) -> bool:
        return self.inner.ended

    @property
    def description(self) -> str:
        return self.inner.description

    def start(self) -> None:
        self.inner.start()

    def read(self, timeout_s: float):  # type: ignore[no-untyped-def]
        return self.inner.read(timeout_s)

    def stop(self) -> None:
        self.inner.stop()


class PortAudioLikeError(Exception):
    """Stands in for ``sounddevice.PortAudioError`` (same shape: message, code) without
    importing sounddevice into the engine tests."""

    def __init__(self, message: str = "Stream is stopped", code: int = -9983) -> None:
        super().__init__(message, code)


class FlakySource(_Wrapper):
    """Raises at seeded random reads, before the inner source is asked (no block is lost).

    Parameters
    ----------
    inner : AudioSource
    p_raise : float, 0..1
        Chance that a read raises.
    seed : int
    make_error : callable() -> Exception
        The exception raised (RuntimeError, a PortAudio-like error ...).
    max_run : int
        Longest run of back-to-back raises (keeps under the engine's give-up count).
    """

    def __init__(self, inner, p_raise: float, seed: int, make_error: Callable[[], Exception] | None = None,
                 max_run: int = 5) -> None:  # type: ignore[no-untyped-def]
        super().__init__(inner)
        self._rng = random.Random(seed)
        self.p_raise = p_raise
        self.make_error = make_error or (lambda: RuntimeError("injected read failure"))
        self.max_run = max_run
        self.injected = 0
        self._run = 0

    def read(self, timeout_s: float):  # type: ignore[no-untyped-def]
        if not self.inner.ended and self._run < self.max_run and self._rng.random() < self.p_raise:
            self.injected += 1
            self._run += 1
            raise self.make_error()
        self._run = 0
        return self.inner.read(timeout_s)


class BurstErrorSource(_Wrapper):
    """Raises ``burst`` errors back to back once ``after_blocks`` blocks have been read."""

    def __init__(self, inner, after_blocks: int, burst: int,
                 make_error: Callable[[], Exception] | None = None) -> None:  # type: ignore[no-untyped-def]
        super().__init__(inner)
        self.after_blocks = after_blocks
        self.burst = burst
        self.make_error = make_error or (lambda: PortAudioLikeError())
        self.injected = 0
        self._blocks = 0

    def read(self, timeout_s: float):  # type: ignore[no-untyped-def]
        if self._blocks >= self.after_blocks and self.injected < self.burst:
            self.injected += 1
            raise self.make_error()
        block = self.inner.read(timeout_s)
        if block is not None:
            self._blocks += 1
        return block


class OverflowSource(_Wrapper):
    """Every ``every``-th read reports an input overflow (one dropped block), as PortAudio's
    ``status.input_overflow`` flag does; the block itself is still handed out."""

    def __init__(self, inner, every: int) -> None:  # type: ignore[no-untyped-def]
        super().__init__(inner)
        self.every = every
        self.overflows = 0
        self._reads = 0

    @property
    def dropped_blocks(self) -> int:
        return self.inner.dropped_blocks + self.overflows

    def read(self, timeout_s: float):  # type: ignore[no-untyped-def]
        self._reads += 1
        if self._reads % self.every == 0:
            self.overflows += 1
        return self.inner.read(timeout_s)


class VanishingSource(_Wrapper):
    """A device that is pulled out and plugged back in, possibly several times.

    After every ``vanish_after`` delivered blocks the device goes away: the next read raises
    ``DeviceError`` (as :class:`~bench.sources.mic.MicSource` does when a stream stops
    delivering), and the next ``absent_starts`` calls of :meth:`start` raise ``DeviceError``
    too ("no input device matches"). The start after those succeeds and blocks flow again.
    """

    def __init__(self, inner, vanish_after: int, absent_starts: int, times: int = 1) -> None:  # type: ignore[no-untyped-def]
        super().__init__(inner)
        self.vanish_after = vanish_after
        self.absent_starts = absent_starts
        self.times = times
        self.vanished = 0
        self.failed_starts = 0
        self.returns = 0
        self._gone = False
        self._starts_left = 0
        self._since_back = 0

    def start(self) -> None:
        if self._gone:
            if self._starts_left > 0:
                self._starts_left -= 1
                self.failed_starts += 1
                raise DeviceError("no input device matches 'USB test mic'; no input devices found")
            self._gone = False
            self.returns += 1
            self._since_back = 0
        self.inner.start()

    def read(self, timeout_s: float):  # type: ignore[no-untyped-def]
        if self._gone:
            raise DeviceError("input 'USB test mic' is gone")
        if self.vanished < self.times and self._since_back >= self.vanish_after:
            self._gone = True
            self._starts_left = self.absent_starts
            self.vanished += 1
            raise DeviceError("input 'USB test mic' stopped delivering audio (unplugged or server gone?)")
        block = self.inner.read(timeout_s)
        if block is not None:
            self._since_back += 1
        return block


class HangingSource(_Wrapper):
    """After ``after_blocks`` blocks, :meth:`read` blocks.

    ``wakes_on_stop`` True: the read returns once :meth:`stop` is called (as a PortAudio read
    returns when the stream is aborted). False: it never returns by itself; the test calls
    :meth:`release` at the end so the thread can go.
    """

    def __init__(self, inner, after_blocks: int, wakes_on_stop: bool) -> None:  # type: ignore[no-untyped-def]
        super().__init__(inner)
        self.after_blocks = after_blocks
        self.wakes_on_stop = wakes_on_stop
        self.hanging = threading.Event()
        self._release = threading.Event()
        self._blocks = 0

    def read(self, timeout_s: float):  # type: ignore[no-untyped-def]
        if self._blocks >= self.after_blocks:
            self.hanging.set()
            self._release.wait()
            return None
        block = self.inner.read(timeout_s)
        if block is not None:
            self._blocks += 1
        return block

    def stop(self) -> None:
        if self.wakes_on_stop:
            self._release.set()
        self.inner.stop()

    def release(self) -> None:
        self._release.set()


class ScriptedBlocksSource:
    """Hands out the given blocks once, then ends (blocks may be anything, NaN included)."""

    input_latency_s = 0.0

    def __init__(self, blocks, sample_rate: int = SAMPLE_RATE) -> None:  # type: ignore[no-untyped-def]
        self.sample_rate = sample_rate
        self.dropped_blocks = 0
        self.ended = False
        self.description = "scripted blocks (test)"
        self._blocks = list(blocks)
        self._i = 0

    def start(self) -> None:
        pass

    def read(self, timeout_s: float):  # type: ignore[no-untyped-def]
        if self._i >= len(self._blocks):
            self.ended = True
            return None
        self._i += 1
        return self._blocks[self._i - 1]

    def stop(self) -> None:
        pass


class QuickAnalyser:
    """A cheap analyser for plumbing tests: one frame per ``hop_size`` samples; voiced at
    ``f0_hz`` when the hop's RMS is above -60 dBFS. Pitch accuracy is the real analyser's job
    (tested with it elsewhere); here only frames in == rows out matters."""

    def __init__(self, sample_rate: int, hop_size: int = 256, f0_hz: float = 440.0) -> None:
        self.sample_rate = sample_rate
        self.hop_size = hop_size
        self.frame_size = 2 * hop_size
        self.f0_hz = f0_hz
        self._pending = np.zeros(0, dtype=np.float32)
        self._fed = 0
        self.frames: list[Frame] = []  # every frame produced, for rows-vs-frames checks

    def process(self, block):  # type: ignore[no-untyped-def]
        self._pending = np.concatenate([self._pending, np.asarray(block, dtype=np.float32)])
        out = []
        while len(self._pending) >= self.hop_size:
            hop, self._pending = self._pending[: self.hop_size], self._pending[self.hop_size :]
            self._fed += self.hop_size
            rms = float(np.sqrt(np.mean(hop.astype(np.float64) ** 2)))
            voiced = rms > 1e-3
            level = 20 * np.log10(rms) if rms > 0 else -np.inf
            frame = Frame(
                time_s=(self._fed - self.hop_size / 2) / self.sample_rate,
                ready_s=self._fed / self.sample_rate,
                f0_hz=self.f0_hz if voiced else None,
                clarity=0.95 if voiced else 0.0,
                level_dbfs=float(level),
                clipped=False,
                harmonics_db=(0.0, -6.0, -12.0, -18.0, -24.0, -30.0, -36.0, -42.0) if voiced else None,
                odd_even_db=1.0 if voiced else None,
                register="steady" if voiced else None,
                jump=None,
                held_f0_hz=self.f0_hz if voiced else None,
            )
            out.append(frame)
        self.frames.extend(out)
        return out

    def lock(self, target_hz) -> None:  # type: ignore[no-untyped-def]
        pass

    def reset(self) -> None:
        self._pending = np.zeros(0, dtype=np.float32)
        self._fed = 0


class AnalyserRecorder:
    """Builds analysers for an Engine and keeps them, so a test can read every frame made."""

    def __init__(self, make: Callable[[int], object] | None = None) -> None:
        self.made: list = []
        self._make = make or QuickAnalyser

    def __call__(self, sample_rate: int):  # type: ignore[no-untyped-def]
        analyser = self._make(sample_rate)
        self.made.append(analyser)
        return analyser

    @property
    def frames(self) -> list[Frame]:
        return self.made[-1].frames if self.made else []


class RecordingClock:
    """A manual clock that records every wait asked of it (back-off checks, no sleeping)."""

    def __init__(self) -> None:
        self.now_s = 0.0
        self.sleeps: list[float] = []
        self._lock = threading.Lock()

    def monotonic(self) -> float:
        return self.now_s

    def sleep(self, seconds: float) -> None:
        with self._lock:
            self.sleeps.append(float(seconds))
            if seconds > 0:
                self.now_s += seconds


class EventLog:
    """Collects engine events (thread-safe append)."""

    def __init__(self) -> None:
        self.events: list = []
        self._lock = threading.Lock()

    def __call__(self, event) -> None:  # type: ignore[no-untyped-def]
        with self._lock:
            self.events.append(event)

    def kinds(self) -> list[str]:
        with self._lock:
            return [e.kind for e in self.events]

    def of(self, kind: str) -> list:
        with self._lock:
            return [e for e in self.events if e.kind == kind]
