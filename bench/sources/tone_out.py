"""The reference tone: a sine or a soft reed-like tone played through an output device.

The tone has its own PortAudio output stream and callback, never the input's: the input
stream, its ring and the engine thread do not wait on it. The callback only fills the
buffer PortAudio hands it from a phase-continuous generator (no allocation beyond numpy's
temporaries, no printing, no waiting). PortAudio is reached through
:func:`bench.sources.mic.import_sounddevice` (``mic.py`` stays the only importer).

The output clock: a card whose clock runs ``ppm`` fast plays a tone made for ``f`` at
``f * (1 + ppm/1e6)``; the generator is therefore set to ``f / (1 + ppm/1e6)`` of the nominal
rate so the tone sounds at ``f``.
"""

from __future__ import annotations

import math
import threading
import time
from typing import Any, Literal

import numpy as np
from numpy.typing import NDArray

from bench.errors import DeviceError, SettingsError
from bench.sources.mic import InputDevice, import_sounddevice

Timbre = Literal["sine", "reed"]
TIMBRES: tuple[Timbre, ...] = ("sine", "reed")
REED_HARMONICS = (1.0, 0.45, 0.25, 0.12, 0.06)
"""Amplitudes of harmonics 1-5 of the reed-like tone (soft: falling about 6 dB a harmonic)."""
FADE_S = 0.02
"""Fade in and out, seconds (no click at the start or the end)."""
DEFAULT_LEVEL_DBFS = -18.0


OutputDevice = InputDevice
"""An audio output as PortAudio lists it: the same record as an input (index, name, channels of
that direction, default rate, host API)."""


class ToneGenerator:
    """A phase-continuous tone whose frequency and level may change between buffers.

    Parameters
    ----------
    sample_rate : float > 0, Hz
        Nominal rate of the output.
    freq_hz : float > 0, Hz
        Frequency on the nominal rate (already corrected for the output's clock).
    level_dbfs : float <= 0, dBFS
        Peak level of the tone.
    timbre : "sine" or "reed"
        A sine, or harmonics 1-5 with amplitudes :data:`REED_HARMONICS`.

    Examples
    --------
    >>> g = ToneGenerator(48000, 1000.0, -6.0)
    >>> faded_in = g.render(960)  # 20 ms
    >>> round(float(np.max(np.abs(g.render(480)))), 3)  # -6 dBFS peak
    0.501
    """

    def __init__(self, sample_rate: float, freq_hz: float, level_dbfs: float = DEFAULT_LEVEL_DBFS,
                 timbre: Timbre = "sine") -> None:  # fmt: skip
        _check_level(level_dbfs)
        self.sample_rate = float(sample_rate)
        self.timbre: Timbre = timbre
        self._voice = _voice(timbre)  # (harmonic numbers, weights): swapped whole, never half
        self._phase = 0.0  # radians of the fundamental, kept in [0, 2 pi)
        self.level_dbfs = float(level_dbfs)
        self._gain = 10 ** (level_dbfs / 20.0)
        self._fade_gain = 0.0  # 0 -> 1 at the start, -> 0 when stopping
        self._fade_target = 1.0
        self._fade_step = 1.0 / max(1.0, FADE_S * self.sample_rate)
        self.freq_hz = 0.0
        self.set_frequency(freq_hz)

    def set_frequency(self, freq_hz: float) -> None:
        """Follow a new target (Hz on the nominal rate) from the next buffer, phase continuous."""
        if not (math.isfinite(freq_hz) and 0.0 < freq_hz < 0.45 * self.sample_rate / len(self._voice[0])):
            raise SettingsError(f"tone frequency {freq_hz!r} Hz cannot be played at {self.sample_rate:g} Hz")
        self.freq_hz = float(freq_hz)

    def set_level(self, level_dbfs: float) -> None:
        """Peak level from the next buffer, dBFS (-80 to 0)."""
        _check_level(level_dbfs)
        self.level_dbfs = float(level_dbfs)
        self._gain = 10 ** (level_dbfs / 20.0)

    def set_timbre(self, timbre: Timbre) -> None:
        """Sine or reed-like from the next buffer (the phase of the fundamental runs on).

        Raises
        ------
        SettingsError
            An unknown timbre, or a reed tone whose fifth harmonic would pass 0.45 of the rate.
        """
        voice = _voice(timbre)
        if not self.freq_hz < 0.45 * self.sample_rate / len(voice[0]):
            raise SettingsError(f"a {timbre} tone at {self.freq_hz:g} Hz cannot be played at {self.sample_rate:g} Hz")
        self._voice, self.timbre = voice, timbre

    def fade_out(self) -> None:
        """Fade to silence over :data:`FADE_S`."""
        self._fade_target = 0.0

    def fade_in(self) -> None:
        """Fade back to the full level over :data:`FADE_S` (after :meth:`fade_out`)."""
        self._fade_target = 1.0

    @property
    def silent(self) -> bool:
        """True once a fade-out has finished."""
        return self._fade_target == 0.0 and self._fade_gain == 0.0

    def render(self, n: int) -> NDArray[np.float32]:
        """The next ``n`` samples."""
        step = 2 * math.pi * self.freq_hz / self.sample_rate
        phase = self._phase + step * np.arange(n, dtype=np.float64)
        harmonics, weights = self._voice
        x = np.sin(np.multiply.outer(phase, harmonics)) @ weights
        direction = float(np.sign(self._fade_target - self._fade_gain))
        fade = np.clip(self._fade_gain + direction * self._fade_step * np.arange(1, n + 1), 0.0, 1.0)
        self._fade_gain = float(fade[-1]) if n else self._fade_gain
        self._phase = math.fmod(self._phase + step * n, 2 * math.pi)
        out: NDArray[np.float32] = (self._gain * fade * x).astype(np.float32)
        return out


def _check_level(level_dbfs: float) -> None:
    if not (math.isfinite(level_dbfs) and -80.0 <= level_dbfs <= 0.0):
        raise SettingsError(f"level {level_dbfs!r} dBFS is out of range; give -80 to 0 dBFS, e.g. -18")


def _voice(timbre: str) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Harmonic numbers and weights of a timbre, scaled so the summed waveform peaks at 1."""
    if timbre not in TIMBRES:
        raise SettingsError(f"timbre {timbre!r} is not known; use one of {', '.join(TIMBRES)}")
    weights = np.array(REED_HARMONICS if timbre == "reed" else (1.0,))
    harmonics = np.arange(1, len(weights) + 1, dtype=np.float64)
    # the peak of the summed waveform, found on one period finely sampled
    grid = np.linspace(0.0, 2 * np.pi, 4096, endpoint=False)
    peak = float(np.max(np.abs(np.sin(np.outer(grid, harmonics)) @ weights)))
    return harmonics, weights / peak


def list_output_devices() -> list[OutputDevice]:
    """Every device with at least one output channel, in PortAudio's order."""
    sd = import_sounddevice()
    try:
        devices = sd.query_devices()
        host_apis = sd.query_hostapis()
    except sd.PortAudioError as exc:
        raise DeviceError(f"PortAudio cannot list audio devices: {exc}") from None
    return [
        OutputDevice(int(d["index"]), str(d["name"]), int(d["max_output_channels"]), float(d["default_samplerate"]),
                     str(host_apis[d["hostapi"]]["name"]))
        for d in devices
        if int(d["max_output_channels"]) > 0
    ]


def resolve_output_device(spec: int | str | None) -> OutputDevice:
    """An output device by index, by part of its name (case-insensitive), or the default.

    Raises
    ------
    DeviceError
        No outputs, or a spec that matches none or several (the message lists them).
    """
    devices = list_output_devices()
    if not devices:
        raise DeviceError("no audio output device found; connect headphones or a speaker")
    found = "output devices found: " + ", ".join(d.label() for d in devices)
    if spec is None:
        sd = import_sounddevice()
        try:
            default = int(sd.default.device[1])
        except (TypeError, ValueError, IndexError):
            default = -1
        return next((d for d in devices if d.index == default), devices[0])
    text = str(spec).strip()
    if text.lstrip("-").isdigit():
        match = [d for d in devices if d.index == int(text)]
        if not match:
            raise DeviceError(f"device {text} is not an audio output; {found}")
        return match[0]
    wanted = text.casefold()
    match = [d for d in devices if d.name.casefold() == wanted] or [d for d in devices if wanted in d.name.casefold()]
    if len(match) == 1:
        return match[0]
    if not match:
        raise DeviceError(f"no output device matches '{text}'; {found}")
    raise DeviceError(f"'{text}' matches {len(match)} output devices: {found}; give the index or more of the name")


class TonePlayer:
    """Plays a :class:`ToneGenerator` through its own output stream (its own callback).

    Parameters
    ----------
    device : OutputDevice
    generator : ToneGenerator
        Built for the rate the stream opens at (``device``'s default unless given).
    block_size : int, frames
        Frames per callback asked for (0 lets PortAudio choose).
    """

    def __init__(self, device: OutputDevice, generator: ToneGenerator, block_size: int = 0) -> None:
        self.device = device
        self.generator = generator
        self.block_size = block_size
        self.underflows = 0
        self._stream: Any = None
        self._done = threading.Event()

    def _callback(self, outdata: NDArray[np.float32], frames: int, time_info: Any, status: Any) -> None:
        if status.output_underflow:
            self.underflows += 1
        outdata[:] = self.generator.render(frames)[:, None]
        if self.generator.silent:
            self._done.set()

    def start(self) -> None:
        sd = import_sounddevice()
        rate = int(self.generator.sample_rate)
        try:
            self._stream = sd.OutputStream(device=self.device.index, channels=1, samplerate=rate,
                                           blocksize=self.block_size, dtype="float32", callback=self._callback)  # fmt: skip
            self._stream.start()
        except (sd.PortAudioError, ValueError) as exc:
            raise DeviceError(f"cannot open output {self.device.label()} at {rate} Hz: {exc}") from None

    def stop(self, timeout_s: float = 1.0) -> None:
        """Fade out, then close the stream."""
        if self._stream is None:
            return
        self._done.clear()  # a tone paused (silent) and faded in again must fade out again
        self.generator.fade_out()
        self._done.wait(timeout_s)
        stream, self._stream = self._stream, None
        try:
            stream.stop()
            stream.close()
        except Exception:  # noqa: BLE001, S110 - a lost device may fail to close
            pass

    def play_for(self, seconds: float) -> None:
        """Start, sound for ``seconds`` (Ctrl-C ends early), fade out and close."""
        self.start()
        try:
            time.sleep(seconds)
        finally:
            self.stop()
