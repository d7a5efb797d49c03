"""The one protocol every audio source follows, the clock it is paced by, and the
bounded block ring shared by the microphone and the paced sources.

A source hands out mono ``float32`` blocks of ``block_size`` samples (the last block of
a file may be shorter). The microphone's PortAudio callback, a WAV file and the demo
instrument all go through :class:`BlockRing` or the same block framing, so the engine
sees one kind of input.
"""

from __future__ import annotations

import threading
import time
from typing import Protocol, runtime_checkable

import numpy as np
from numpy.typing import NDArray

DEFAULT_BLOCK_SIZE = 512
"""Samples per block handed to the engine (10.7 ms at 48000 Hz)."""

MAX_LAG_S = 2.0
"""Most a paced source lets its reader fall behind real time before it drops blocks,
seconds (the same as the microphone's ring)."""


@runtime_checkable
class AudioSource(Protocol):
    """A stream of mono sample blocks.

    Attributes
    ----------
    sample_rate : int, Hz
        Rate of the samples handed out.
    dropped_blocks : int
        Blocks lost so far: input overflows reported by the driver plus blocks that found
        the buffer full.
    ended : bool
        True once a finite source (file) has handed out its last block.
    description : str
        One line naming the source, e.g. ``"microphone 'USB Audio' (ALSA), 48000 Hz"``.
    input_latency_s : float >= 0, seconds
        Delay the driver reports between sound reaching the input and its block being
        handed out (0 for a file or the demo).
    block_size : int, samples
        Samples per block handed out (the last block of a file may be shorter).
    realtime : bool
        Blocks come at the pace of real time (a microphone; a paced file or the demo), not as
        fast as they are read.
    """

    sample_rate: int
    ended: bool
    description: str
    input_latency_s: float
    block_size: int
    realtime: bool

    @property
    def dropped_blocks(self) -> int:
        """Blocks lost so far (an attribute or a property)."""

    def start(self) -> None:
        """Open the source and begin delivering blocks; raises ``DeviceError`` or
        ``AudioFileError`` with one line naming what was found."""

    def read(self, timeout_s: float) -> NDArray[np.float32] | None:
        """The next block (1-D float32), or None when none arrived within ``timeout_s``
        seconds (or the source has ended)."""

    def stop(self) -> None:
        """Stop delivering and release the device or file; safe to call twice."""


class Clock(Protocol):
    """Monotonic time and a way to wait for it (injected so tests never sleep)."""

    def monotonic(self) -> float:
        """Seconds on a monotonic clock."""

    def sleep(self, seconds: float) -> None:
        """Wait ``seconds``."""


class SystemClock:
    """The real clock: :func:`time.monotonic` and :func:`time.sleep`."""

    def monotonic(self) -> float:
        return time.monotonic()

    def sleep(self, seconds: float) -> None:
        if seconds > 0:
            time.sleep(seconds)


class ManualClock:
    """A clock that only moves when slept on or advanced (for tests and fast replay).

    >>> c = ManualClock()
    >>> c.sleep(1.5); c.monotonic()
    1.5
    """

    def __init__(self, start_s: float = 0.0) -> None:
        self._now_s = float(start_s)
        self._lock = threading.Lock()

    def monotonic(self) -> float:
        return self._now_s

    def sleep(self, seconds: float) -> None:
        self.advance(seconds)

    def advance(self, seconds: float) -> None:
        """Move the clock forward by ``seconds`` (negative values are ignored)."""
        if seconds > 0:
            with self._lock:
                self._now_s += seconds


class BlockRing:
    """Bounded single-producer, single-consumer ring of sample blocks, pre-sized.

    The producer (an audio callback) calls :meth:`push`, which only copies into a slot
    that already exists, or counts a drop when every slot is full. It never allocates,
    locks or waits. The consumer polls with :meth:`pop`.

    Parameters
    ----------
    capacity : int >= 2
        Blocks the ring holds.
    block_size : int >= 1, samples
        Largest block a slot holds; longer pushes are cut to this size.
    """

    def __init__(self, capacity: int, block_size: int) -> None:
        if capacity < 2:
            raise ValueError(f"ring capacity {capacity} is too small; use at least 2 blocks")
        if block_size < 1:
            raise ValueError(f"block_size {block_size} must be at least 1 sample")
        self.capacity = int(capacity)
        self.block_size = int(block_size)
        self._slots = np.zeros((self.capacity, self.block_size), dtype=np.float32)
        self._lengths = np.zeros(self.capacity, dtype=np.int64)
        # Counters only grow; each is written by one side only (GIL makes int stores atomic).
        self._written = 0
        self._read = 0
        self.full_drops = 0

    def push_channel(self, indata: NDArray[np.float32], channel: int = 0) -> bool:
        """Copy one channel of a (frames, channels) array in; False (and a drop) if full."""
        if self._written - self._read >= self.capacity:
            self.full_drops += 1
            return False
        slot = self._written % self.capacity
        n = min(indata.shape[0], self.block_size)
        self._slots[slot, :n] = indata[:n, channel]
        self._lengths[slot] = n
        self._written += 1
        return True

    def push_mean(self, indata: NDArray[np.float32]) -> bool:
        """Mix a (frames, channels) array to mono into a slot; False (and a drop) if full."""
        if self._written - self._read >= self.capacity:
            self.full_drops += 1
            return False
        slot = self._written % self.capacity
        n = min(indata.shape[0], self.block_size)
        np.mean(indata[:n], axis=1, out=self._slots[slot, :n])
        self._lengths[slot] = n
        self._written += 1
        return True

    def __len__(self) -> int:
        return self._written - self._read

    def pop(self) -> NDArray[np.float32] | None:
        """The oldest block as a fresh array, or None when the ring is empty."""
        if self._written == self._read:
            return None
        slot = self._read % self.capacity
        block = self._slots[slot, : self._lengths[slot]].copy()
        self._read += 1
        return block

    def clear(self) -> None:
        """Forget queued blocks (consumer side)."""
        self._read = self._written


def frame_blocks(audio: NDArray[np.floating], block_size: int) -> list[NDArray[np.float32]]:
    """Cut mono audio into consecutive blocks of ``block_size`` samples (the last may be shorter).

    >>> [len(b) for b in frame_blocks(np.zeros(10), 4)]
    [4, 4, 2]
    """
    a = np.asarray(audio, dtype=np.float32)
    return [a[i : i + block_size] for i in range(0, len(a), block_size)]


def to_mono(audio: NDArray[np.floating]) -> NDArray[np.float32]:
    """Mix a (frames,) or (frames, channels) array to mono float32 by averaging channels.

    >>> to_mono(np.array([[1.0, 0.0], [0.5, 0.5]])).tolist()
    [0.5, 0.5]
    """
    a = np.asarray(audio, dtype=np.float32)
    if a.ndim == 1:
        return a
    if a.ndim != 2:
        raise ValueError(f"audio has {a.ndim} dimensions; give (frames,) or (frames, channels)")
    return a.mean(axis=1, dtype=np.float32) if a.shape[1] > 1 else a[:, 0].copy()


class PacedBlocks:
    """Hand out pre-cut blocks at real-time pace against an injected clock, or at once.

    Shared by :mod:`bench.sources.wavfile` and :mod:`bench.sources.demo`: block ``k``
    becomes due ``k * block_size / sample_rate`` seconds after :meth:`start`, counting
    from the end of the block (as a microphone delivers it).
    """

    def __init__(self, sample_rate: int, block_size: int, *, realtime: bool, clock: Clock) -> None:
        self.sample_rate = int(sample_rate)
        self.block_size = int(block_size)
        self.realtime = realtime
        self.clock = clock
        self._t0_s = 0.0
        self._samples_out = 0

    def start(self) -> None:
        self._t0_s = self.clock.monotonic()
        self._samples_out = 0

    def wait_due(self, n_samples: int, timeout_s: float) -> bool:
        """Wait until a block of ``n_samples`` is due; False if not due within ``timeout_s``."""
        if not self.realtime:
            return True
        due_s = self._t0_s + (self._samples_out + n_samples) / self.sample_rate
        wait_s = due_s - self.clock.monotonic()
        if wait_s > timeout_s:
            self.clock.sleep(max(timeout_s, 0.0))
            return False
        self.clock.sleep(wait_s)
        return True

    def delivered(self, n_samples: int) -> None:
        self._samples_out += n_samples

    def overdue_blocks(self, max_lag_s: float) -> int:
        """Whole blocks to skip so the reader is no more than ``max_lag_s`` behind real time.

        A paced source whose reader fell behind (a starved engine thread) then loses input
        the way a microphone's full buffer does, counted, instead of growing a backlog.
        """
        if not self.realtime:
            return 0
        lag_s = self.clock.monotonic() - (self._t0_s + self._samples_out / self.sample_rate)
        if lag_s <= max_lag_s:
            return 0
        return int((lag_s - max_lag_s) * self.sample_rate // self.block_size) + 1
