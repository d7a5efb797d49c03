"""Device-level runs for the clock calibration: frames counted against the system clock, and a
fixed-length recording of a reference tone.

PortAudio is reached through :func:`bench.sources.mic.import_sounddevice` (``mic.py`` stays the
only module that imports sounddevice). Each run opens its own input stream with a Python
callback: ``bench calibrate`` runs nothing else, so no other thread competes for the
interpreter. The callback only stores into arrays sized before the stream opens and counts
overflows; no printing, allocation or waiting.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bench.errors import DeviceError
from bench.sources.mic import InputDevice, import_sounddevice, resolve_input_device

SETTLE_S = 1.0
"""Seconds left out at the start of a frame count (the stream's buffers fill in a burst)."""


@dataclass(frozen=True, slots=True)
class FrameCount:
    """Frames a device delivered, stamped with the system's monotonic clock.

    Attributes
    ----------
    device : InputDevice
    sample_rate : int, Hz
        The nominal rate the stream ran at.
    time_s : ndarray, shape (n,), seconds of :func:`time.monotonic`
        When each callback ran (after the settling time).
    frames : ndarray, shape (n,)
        Frames delivered up to and including that callback's block.
    overflows : int
        Callbacks that reported lost input (the count is short by their frames).
    interrupted : bool
        Ctrl-C ended the run before its time.
    """

    device: InputDevice
    sample_rate: int
    time_s: NDArray[np.float64]
    frames: NDArray[np.float64]
    overflows: int
    interrupted: bool


@dataclass(frozen=True, slots=True)
class Recording:
    """A mono recording of an input device."""

    device: InputDevice
    sample_rate: int
    samples: NDArray[np.float32]
    overflows: int


def _open_checked(sd: Any, spec: int | str | None, sample_rate: int | None) -> tuple[InputDevice, int]:
    dev = resolve_input_device(spec)
    rate = int(sample_rate or round(dev.default_rate_hz))
    try:
        sd.check_input_settings(device=dev.index, channels=1, dtype="float32", samplerate=rate)
    except (sd.PortAudioError, ValueError) as exc:
        raise DeviceError(
            f"input {dev.label()} does not take 1 channel at {rate} Hz ({exc}); "
            f"its default rate is {dev.default_rate_hz:.0f} Hz"
        ) from None
    return dev, rate


def count_frames(
    spec: int | str | None,
    seconds: float,
    *,
    sample_rate: int | None = None,
    block_size: int = 512,
    on_progress: Callable[[float, int, NDArray[np.float64], NDArray[np.float64]], None] | None = None,
    progress_every_s: float = 60.0,
) -> FrameCount:
    """Count the frames an input delivers against :func:`time.monotonic` for ``seconds``.

    Parameters
    ----------
    spec : int, str or None
        Device index, part of its name, or None for the default input.
    seconds : float > 0, s
        Length of the count after :data:`SETTLE_S`.
    sample_rate : int or None, Hz
        None takes the device's default rate.
    block_size : int, frames
        Frames per callback asked for (a JACK server uses its own period).
    on_progress : callable(elapsed_s, sample_rate, time_s, frames) or None
        Called from the calling thread every ``progress_every_s`` with the points so far.

    Returns
    -------
    FrameCount
        Ctrl-C ends the count early with what was counted (``interrupted`` set).

    Raises
    ------
    DeviceError
        The device is missing, refuses the settings, or stops delivering.
    """
    sd = import_sounddevice()
    dev, rate = _open_checked(sd, spec, sample_rate)
    capacity = math.ceil((seconds + SETTLE_S + 5.0) * rate / 16) + 1024  # callbacks of 16 frames at least
    stamps = np.zeros(capacity, dtype=np.float64)
    counts = np.zeros(capacity, dtype=np.float64)
    state: dict[str, float] = {"n": 0, "frames": 0, "overflows": 0, "settled_s": math.inf}

    def callback(indata: Any, frames: int, time_info: Any, status: Any) -> None:
        now_s = time.monotonic()
        state["frames"] += frames
        if status.input_overflow and now_s >= state["settled_s"]:  # a loss while settling shifts all counts alike
            state["overflows"] += 1
        i = int(state["n"])
        if i < capacity:
            stamps[i] = now_s
            counts[i] = state["frames"]
            state["n"] = i + 1

    try:
        stream = sd.InputStream(
            device=dev.index, channels=1, samplerate=rate, blocksize=block_size, dtype="float32", callback=callback
        )
        stream.start()
    except (sd.PortAudioError, ValueError) as exc:
        raise DeviceError(f"cannot open input {dev.label()} at {rate} Hz: {exc}") from None
    start_s = time.monotonic()
    state["settled_s"] = start_s + SETTLE_S
    end_s = start_s + SETTLE_S + seconds
    next_report_s = start_s + SETTLE_S + progress_every_s
    interrupted = False
    last_n, last_change_s = 0, start_s
    try:
        while (now_s := time.monotonic()) < end_s:
            time.sleep(min(0.2, end_s - now_s))
            n = int(state["n"])
            if n != last_n:
                last_n, last_change_s = n, time.monotonic()
            elif time.monotonic() - last_change_s > 2.0:
                raise DeviceError(f"input {dev.label()} stopped delivering audio (unplugged or server gone?)")
            if on_progress is not None and time.monotonic() >= next_report_s:
                next_report_s += progress_every_s
                sel = stamps[:n] >= start_s + SETTLE_S
                on_progress(time.monotonic() - start_s - SETTLE_S, rate, stamps[:n][sel].copy(), counts[:n][sel].copy())
    except KeyboardInterrupt:
        interrupted = True
    finally:
        try:
            stream.abort()
            stream.close()
        except Exception:  # noqa: BLE001, S110 - a lost device may fail to close; the count is kept
            pass
    n = int(state["n"])
    keep = stamps[:n] >= start_s + SETTLE_S
    return FrameCount(dev, rate, stamps[:n][keep].copy(), counts[:n][keep].copy(), int(state["overflows"]), interrupted)


def record_input(spec: int | str | None, seconds: float, *, sample_rate: int | None = None) -> Recording:
    """Record ``seconds`` of one input channel (after a settling second that is dropped).

    Raises
    ------
    DeviceError
        The device is missing, refuses the settings, or stops delivering.
    """
    sd = import_sounddevice()
    dev, rate = _open_checked(sd, spec, sample_rate)
    skip = int(SETTLE_S * rate)
    total = skip + round(seconds * rate)
    buf = np.zeros(total, dtype=np.float32)
    state = {"n": 0, "overflows": 0}

    def callback(indata: Any, frames: int, time_info: Any, status: Any) -> None:
        i = state["n"]
        if status.input_overflow and i >= skip:  # a loss in the dropped settling second does no harm
            state["overflows"] += 1
        take = min(frames, total - i)
        if take > 0:
            buf[i : i + take] = indata[:take, 0]
            state["n"] = i + take

    try:
        stream = sd.InputStream(device=dev.index, channels=1, samplerate=rate, dtype="float32", callback=callback)
        stream.start()
    except (sd.PortAudioError, ValueError) as exc:
        raise DeviceError(f"cannot open input {dev.label()} at {rate} Hz: {exc}") from None
    try:
        last_n, last_change_s = 0, time.monotonic()
        while state["n"] < total:
            time.sleep(0.05)
            if state["n"] != last_n:
                last_n, last_change_s = state["n"], time.monotonic()
            elif time.monotonic() - last_change_s > 2.0:
                raise DeviceError(f"input {dev.label()} stopped delivering audio (unplugged or server gone?)")
    finally:
        try:
            stream.abort()
            stream.close()
        except Exception:  # noqa: BLE001, S110 - a lost device may fail to close
            pass
    return Recording(dev, rate, buf[skip:].copy(), int(state["overflows"]))
