"""The microphone: a PortAudio input stream through sounddevice.

This is the only module that imports :mod:`sounddevice` (and python-rtmixer), and only when
a microphone is actually listed or opened, so the rest of the application runs where
PortAudio is missing.

The stream callback only copies the input into a pre-sized ring. With python-rtmixer (a
dependency) the callback is C code: it never waits for the Python interpreter, which
another thread (the screen redrawing) may hold for longer than an audio server's period.
Measured on a JACK dummy server with 512-frame periods and two busy Python threads: a
Python callback missed 285 periods in 20 s, the C one none. Without rtmixer (or with a
stand-in sounddevice in tests) a Python callback copies ``indata`` (channel 0, or the mean
of the channels) into a :class:`~bench.sources.base.BlockRing`. Both count input overflows
and input lost to a full ring. No printing, no allocation beyond the copy, no locks, no
waiting.
"""

from __future__ import annotations

import atexit
import sys
import threading
from dataclasses import dataclass
from typing import Any

import numpy as np
from numpy.typing import NDArray

from bench.errors import DeviceError
from bench.sources.base import DEFAULT_BLOCK_SIZE, BlockRing, Clock, SystemClock


def import_sounddevice() -> Any:
    """Import sounddevice, turning a missing PortAudio library into a one-line DeviceError."""
    try:
        import sounddevice as sd
    except OSError as exc:  # raised by sounddevice when libportaudio cannot be loaded
        raise DeviceError(
            f"the PortAudio library is not installed ({exc}); install libportaudio2 to use a microphone"
        ) from None
    return sd


def import_rtmixer(sd: Any) -> Any | None:
    """python-rtmixer for the real sounddevice module ``sd``; None for a stand-in or without it."""
    if sd is not sys.modules.get("sounddevice"):
        return None
    try:
        import rtmixer
    except (ImportError, OSError):
        return None
    return rtmixer


class _CRecording:
    """An input stream whose callback is C code (python-rtmixer) recording into a ring.

    :meth:`pop` hands out ``block_size``-frame blocks, mixed to one channel. The C callback
    stops recording when the ring is full (the engine stalled for its whole length); the
    next :meth:`pop` counts the frames lost meanwhile, by the stream's clock, as dropped
    blocks and records again. Driver overflows are fetched from the callback's counters
    about once a second.
    """

    _CHECK_EVERY = 64  # blocks handed out between checks that recording still runs

    def __init__(self, rt: Any, *, device: int, channels: int, sample_rate: int, block_size: int,
                 ring_frames: int, finished_callback: Any) -> None:  # fmt: skip
        self.stream = rt.Recorder(
            device=device, channels=channels, samplerate=sample_rate, blocksize=block_size,
            finished_callback=finished_callback,
        )  # fmt: skip
        size = 1 << max(1, int(ring_frames - 1).bit_length())  # the C ring wants a power of two
        self._ring = rt.RingBuffer(4 * channels, size)
        self._buf = np.empty((block_size, channels), dtype=np.float32)
        self._block_size = block_size
        self._sample_rate = sample_rate
        self._action: Any = None
        self._stats_action: Any = None
        self._stats_due_s = 0.0
        self._pops = 0
        self.overflows = 0
        self.full_drops = 0

    def start(self) -> None:
        self.stream.start()
        self._action = self.stream.record_ringbuffer(self._ring)

    def pop(self, now_s: float) -> NDArray[np.float32] | None:
        """The next block, or None when less than a block is waiting."""
        if now_s >= self._stats_due_s:
            self._collect_stats()
            self._stats_due_s = now_s + 1.0
        if self._ring.read_available < self._block_size:
            self._check_recording()
            return None
        self._pops += 1
        if self._pops % self._CHECK_EVERY == 0:
            self._check_recording()
        self._ring.readinto(self._buf)
        if self._buf.shape[1] == 1:
            return self._buf[:, 0].copy()
        mixed: NDArray[np.float32] = self._buf.mean(axis=1, dtype=np.float32)
        return mixed

    def _check_recording(self) -> None:
        action = self._action
        if action is None or action in self.stream.actions:
            return
        # the ring filled and the callback stopped recording into it: count what was lost
        try:
            lost = round((float(self.stream.time) - float(action.actual_time)) * self._sample_rate) - int(
                action.done_frames
            )
        except Exception:  # noqa: BLE001 - a stream that is going away has no clock
            lost = self._block_size
        self.full_drops += max(1, -(-max(lost, 0) // self._block_size))
        self._action = self.stream.record_ringbuffer(self._ring)

    def _collect_stats(self) -> None:
        action = self._stats_action
        if action is not None:
            if action in self.stream.actions:
                return
            self.overflows += int(action.stats.input_overflows)
        self._stats_action = self.stream.fetch_and_reset_stats()


@dataclass(frozen=True, slots=True)
class InputDevice:
    """An audio input PortAudio lists.

    Attributes
    ----------
    index : int
        PortAudio device index (what ``--device`` takes).
    name : str
    channels : int
        Input channels.
    default_rate_hz : float, Hz
    host_api : str
        ALSA, JACK Audio Connection Kit, Core Audio, WASAPI...
    """

    index: int
    name: str
    channels: int
    default_rate_hz: float
    host_api: str

    def label(self) -> str:
        """``3 'USB Audio' (ALSA)``."""
        return f"{self.index} '{self.name}' ({self.host_api})"


def list_input_devices() -> list[InputDevice]:
    """Every device with at least one input channel, in PortAudio's order.

    Raises
    ------
    DeviceError
        PortAudio is missing or cannot list devices.
    """
    sd = import_sounddevice()
    try:
        devices = sd.query_devices()
        host_apis = sd.query_hostapis()
    except sd.PortAudioError as exc:
        raise DeviceError(f"PortAudio cannot list audio devices: {exc}") from None
    found = []
    for d in devices:
        if int(d["max_input_channels"]) > 0:
            found.append(
                InputDevice(
                    index=int(d["index"]),
                    name=str(d["name"]),
                    channels=int(d["max_input_channels"]),
                    default_rate_hz=float(d["default_samplerate"]),
                    host_api=str(host_apis[d["hostapi"]]["name"]),
                )
            )
    return found


CLOSE_TIMEOUT_S = 2.0
"""Longest the engine waits for PortAudio to close a stream (seconds)."""


def _close_in_background(stream: Any, timeout_s: float) -> threading.Thread | None:
    """Abort and close ``stream`` in a daemon thread; wait up to ``timeout_s``.

    Closing a stream whose audio server died can block for ever (PortAudio 19.6's JACK host
    API does, measured). Then the thread is left behind, and sounddevice's exit handler,
    which would close the same stream and hang or abort the interpreter, is unregistered.
    Returns the thread if it is still stuck, else None.
    """

    def close() -> None:
        for step in (stream.abort, stream.close):
            try:
                step()
            except Exception:  # noqa: BLE001, S110 - a lost device may fail either step
                pass

    thread = threading.Thread(target=close, name="bench-mic-close", daemon=True)
    thread.start()
    thread.join(timeout_s)
    if not thread.is_alive():
        return None
    import sounddevice as sd

    handler = getattr(sd, "_exit_handler", None)
    if handler is not None:
        atexit.unregister(handler)
    return thread


def _default_input_index(sd: Any) -> int | None:
    try:
        index = int(sd.default.device[0])
    except (TypeError, ValueError, IndexError):
        return None
    return index if index >= 0 else None


def _found(devices: list[InputDevice]) -> str:
    if not devices:
        return "no input devices found"
    return "input devices found: " + ", ".join(d.label() for d in devices)


def resolve_input_device(spec: int | str | None) -> InputDevice:
    """Find an input device by index, by part of its name (case-insensitive), or the default.

    Parameters
    ----------
    spec : int, str or None
        An index (``3`` or ``"3"``), part of a name (``"usb"``), or None for the system
        default input (or the first input when there is no default).

    Raises
    ------
    DeviceError
        No input devices, an unknown or ambiguous spec, or an index that is not an input;
        the message lists the input devices found.
    """
    devices = list_input_devices()
    if not devices:
        raise DeviceError("no audio input device found; connect a microphone or use --input demo")
    if spec is None:
        sd = import_sounddevice()
        default = _default_input_index(sd)
        for d in devices:
            if d.index == default:
                return d
        return devices[0]
    text = str(spec).strip()
    if text.lstrip("-").isdigit():
        index = int(text)
        for d in devices:
            if d.index == index:
                return d
        raise DeviceError(f"device {index} is not an audio input; {_found(devices)}")
    wanted = text.casefold()
    exact = [d for d in devices if d.name.casefold() == wanted]
    matches = exact or [d for d in devices if wanted in d.name.casefold()]
    if len(matches) == 1:
        return matches[0]
    if not matches:
        raise DeviceError(f"no input device matches '{text}'; {_found(devices)}")
    raise DeviceError(
        f"'{text}' matches {len(matches)} input devices: "
        + ", ".join(d.label() for d in matches)
        + "; give the index or more of the name"
    )


class MicSource:
    """A microphone (or any PortAudio input) as an :class:`~bench.sources.base.AudioSource`.

    Parameters
    ----------
    device : int, str or None
        Index or part of the name (see :func:`resolve_input_device`); None = default input.
    sample_rate : int or None, Hz
        None takes the device's default rate.
    block_size : int >= 16, samples
        Frames per callback and per block handed to the engine.
    mix_channels : int >= 1
        1 records channel 0; more records that many channels and averages them.
    ring_blocks : int >= 2 or None
        Blocks the ring holds before new ones are dropped; None holds ``ring_s`` seconds.
    ring_s : float > 0, seconds
        Input the ring holds when ``ring_blocks`` is None (the engine catches up after a
        hiccup of the machine this long instead of losing input; 2 s at 48 kHz, block 512,
        is 188 blocks, 385 kB).
    stall_timeout_s : float > 0, seconds
        A running stream that delivers nothing for this long counts as a lost device.
    clock : Clock, optional
        For polling the ring; the system clock by default.

    Raises
    ------
    DeviceError
        From :meth:`start`: PortAudio missing, device unknown, settings refused, open failed.
        From :meth:`read`: the device stopped delivering (pulled out, server gone).
    """

    def __init__(
        self,
        device: int | str | None = None,
        *,
        sample_rate: int | None = None,
        block_size: int = DEFAULT_BLOCK_SIZE,
        mix_channels: int = 1,
        ring_blocks: int | None = None,
        ring_s: float = 2.0,
        stall_timeout_s: float = 2.0,
        clock: Clock | None = None,
    ) -> None:
        if block_size < 16:
            raise DeviceError(f"block size {block_size} is too small; use 16 samples or more")
        if sample_rate is not None and not 8000 <= sample_rate <= 192000:
            raise DeviceError(f"sample rate {sample_rate} Hz is out of range; use 8000-192000")
        if mix_channels < 1:
            raise DeviceError(f"mix_channels {mix_channels} must be at least 1")
        self.device_spec = device
        self.block_size = int(block_size)
        self.realtime = True  # a sound card delivers at the pace of the sound
        self.mix_channels = int(mix_channels)
        self.stall_timeout_s = float(stall_timeout_s)
        self._requested_rate = sample_rate
        self._clock = clock or SystemClock()
        self._ring_blocks = ring_blocks
        self._ring_s = float(ring_s)
        self._ring = BlockRing(ring_blocks or self._blocks_for(sample_rate or 48000), self.block_size)
        self._full_drops_before = 0  # drops counted by rings of earlier streams
        self.sample_rate = int(sample_rate or 48000)
        self.ended = False
        self.description = f"microphone {device if device is not None else '(default)'}"
        self.device: InputDevice | None = None
        self.input_latency_s = 0.0
        self._overflows = 0
        self._stream: Any = None
        self._finished = False
        self._stopping = False
        self._opened_once = False
        self._last_block_s = 0.0
        self._stuck_close: threading.Thread | None = None
        self._recording: _CRecording | None = None  # the C-callback stream, when in use
        self.callback_in = ""
        """Language of the open stream's callback: "c" (python-rtmixer) or "python"."""
        self._c_overflows_before = 0  # counts of C-callback streams already closed
        self._c_full_drops_before = 0

    @property
    def dropped_blocks(self) -> int:
        """Input overflows plus blocks that found the ring full, since construction."""
        return self.overflows + self.full_drops

    @property
    def overflows(self) -> int:
        """Input overflows the driver reported (blocks it lost before the callback)."""
        rec = self._recording
        return self._overflows + self._c_overflows_before + (rec.overflows if rec is not None else 0)

    @property
    def full_drops(self) -> int:
        """Blocks dropped because the engine had not taken the ring's blocks yet."""
        rec = self._recording
        c_drops = self._c_full_drops_before + (rec.full_drops if rec is not None else 0)
        return self._full_drops_before + self._ring.full_drops + c_drops

    def _blocks_for(self, sample_rate: int) -> int:
        return max(2, int(np.ceil(self._ring_s * sample_rate / self.block_size)))

    def _callback(self, indata: NDArray[np.float32], frames: int, time_info: Any, status: Any) -> None:
        if status.input_overflow:
            self._overflows += 1
        if self.mix_channels == 1:
            self._ring.push_channel(indata)
        else:
            self._ring.push_mean(indata)

    def _finished_callback(self) -> None:
        self._finished = True

    def start(self) -> None:
        sd = import_sounddevice()
        self._close()
        if self._stuck_close is not None:
            self._stuck_close.join(0.5)
            if self._stuck_close.is_alive():
                name = self.device.label() if self.device else str(self.device_spec)
                raise DeviceError(
                    f"the lost input {name} has not closed (did its audio server stop?); restart bench to reconnect"
                )
            self._stuck_close = None
        if self._opened_once:
            # A device pulled and plugged back needs a fresh PortAudio device list.
            try:
                sd._terminate()
                sd._initialize()
            except sd.PortAudioError as exc:
                raise DeviceError(f"PortAudio cannot restart: {exc}") from None
        dev = resolve_input_device(self.device_spec)
        rate = int(self._requested_rate or round(dev.default_rate_hz))
        if self._requested_rate is None and not 16000 <= rate <= 96000:
            rate = 48000  # the analyser takes 16-96 kHz; most devices offer 48 kHz
        channels = min(self.mix_channels, dev.channels)
        try:
            sd.check_input_settings(device=dev.index, channels=channels, dtype="float32", samplerate=rate)
        except (sd.PortAudioError, ValueError) as exc:
            raise DeviceError(
                f"input {dev.label()} does not take {channels} channel(s) at {rate} Hz ({exc}); "
                f"its default rate is {dev.default_rate_hz:.0f} Hz"
            ) from None
        self.device = dev
        self.sample_rate = rate
        capacity = self._ring_blocks or self._blocks_for(rate)
        if capacity != self._ring.capacity:  # sized before the stream opens, never in the callback
            self._full_drops_before += self._ring.full_drops
            self._ring = BlockRing(capacity, self.block_size)
        self._ring.clear()
        self._finished = False
        self._stopping = False
        rt = import_rtmixer(sd)
        try:
            if rt is not None:
                recording = _CRecording(
                    rt, device=dev.index, channels=channels, sample_rate=rate, block_size=self.block_size,
                    ring_frames=capacity * self.block_size, finished_callback=self._finished_callback,
                )  # fmt: skip
                stream = recording.stream
                try:
                    recording.start()
                except BaseException:
                    stream.close()
                    raise
                self._recording = recording
            else:
                stream = sd.InputStream(
                    device=dev.index,
                    channels=channels,
                    samplerate=rate,
                    blocksize=self.block_size,
                    dtype="float32",
                    callback=self._callback,
                    finished_callback=self._finished_callback,
                )
                stream.start()
        except (sd.PortAudioError, ValueError) as exc:
            raise DeviceError(f"cannot open input {dev.label()} at {rate} Hz: {exc}") from None
        self._stream = stream
        self._opened_once = True
        self.input_latency_s = float(stream.latency)
        self._last_block_s = self._clock.monotonic()
        self.description = f"microphone {dev.label()}, {rate} Hz, block {self.block_size}"
        self.callback_in = "python" if self._recording is None else "c"

    def read(self, timeout_s: float) -> NDArray[np.float32] | None:
        if self._stream is None:
            return None
        start_s = self._clock.monotonic()
        poll_s = min(0.002, self.block_size / self.sample_rate / 4)
        recording = self._recording
        while True:
            if recording is not None:
                block = recording.pop(self._clock.monotonic())
            else:
                block = self._ring.pop()
            now_s = self._clock.monotonic()
            if block is not None:
                self._last_block_s = now_s
                return block
            stream = self._stream
            ended = self._finished or not getattr(stream, "active", True)
            if (ended and not self._stopping) or now_s - self._last_block_s > self.stall_timeout_s:
                name = self.device.label() if self.device else str(self.device_spec)
                self._close()
                raise DeviceError(f"input {name} stopped delivering audio (unplugged or server gone?)")
            if now_s - start_s >= timeout_s:
                return None
            self._clock.sleep(poll_s)

    def _close(self) -> None:
        stream, self._stream = self._stream, None
        recording, self._recording = self._recording, None
        if recording is not None:
            self._c_overflows_before += recording.overflows
            self._c_full_drops_before += recording.full_drops
        if stream is None:
            return
        self._stopping = True
        stuck = _close_in_background(stream, CLOSE_TIMEOUT_S)
        if stuck is not None:
            self._stuck_close = stuck

    def stop(self) -> None:
        self._close()
