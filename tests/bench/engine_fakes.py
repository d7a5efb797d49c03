"""Small stand-ins for the engine tests: a fake analyser and scripted sources."""

from __future__ import annotations

import numpy as np

from dsp.frame import Frame


class FakeAnalyser:
    """Emits one frame per ``hop_size`` samples; f0 from zero crossings of the hop.

    Only the engine's plumbing is under test with it; pitch accuracy is checked with the
    real analyser elsewhere.
    """

    def __init__(self, sample_rate: int, hop_size: int = 256) -> None:
        self.sample_rate = sample_rate
        self.frame_size = hop_size * 2
        self.hop_size = hop_size
        self.locked_hz: list[float | None] = []
        self._pending = np.zeros(0, dtype=np.float32)
        self._fed = 0

    def process(self, block):
        self._pending = np.concatenate([self._pending, np.asarray(block, dtype=np.float32)])
        frames = []
        while len(self._pending) >= self.hop_size:
            hop, self._pending = self._pending[: self.hop_size], self._pending[self.hop_size :]
            self._fed += self.hop_size
            rms = float(np.sqrt(np.mean(hop.astype(np.float64) ** 2)))
            level = 20 * np.log10(rms) if rms > 0 else -np.inf
            ups = np.flatnonzero((hop[:-1] <= 0) & (hop[1:] > 0))
            f0 = None
            if rms > 1e-3 and len(ups) >= 2:
                f0 = float(self.sample_rate * (len(ups) - 1) / (ups[-1] - ups[0]))
            t = (self._fed - self.hop_size / 2) / self.sample_rate
            frames.append(
                Frame(
                    time_s=t,
                    ready_s=self._fed / self.sample_rate,
                    f0_hz=f0,
                    clarity=0.9 if f0 else 0.0,
                    level_dbfs=float(level),
                    clipped=False,
                    harmonics_db=(0.0, -6.0, -12.0, -18.0, -24.0, -30.0, -36.0, -42.0) if f0 else None,
                    odd_even_db=1.0 if f0 else None,
                    register="steady" if f0 else None,
                    jump=None,
                    held_f0_hz=f0,
                )
            )
        return frames

    def lock(self, target_hz):
        self.locked_hz.append(target_hz)

    def reset(self):
        self._pending = np.zeros(0, dtype=np.float32)
        self._fed = 0


def sine(freq_hz: float, duration_s: float, sample_rate: int, level: float = 0.3) -> np.ndarray:
    t = np.arange(int(duration_s * sample_rate)) / sample_rate
    return (level * np.sin(2 * np.pi * freq_hz * t)).astype(np.float32)


class ScriptedSource:
    """An AudioSource that hands out given blocks; ``script`` maps block index -> action.

    Actions: ``"raise"`` (RuntimeError), ``"lose"`` (DeviceError, as a pulled microphone),
    ``"drop"`` (counts one dropped block before handing the block out).
    """

    input_latency_s = 0.0

    def __init__(self, blocks, sample_rate: int = 48000, script=None) -> None:
        self.sample_rate = sample_rate
        self.dropped_blocks = 0
        self.ended = False
        self.description = "scripted test source"
        self._blocks = list(blocks)
        self._script = dict(script or {})
        self._i = 0
        self.starts = 0
        self.stops = 0

    def start(self) -> None:
        self.starts += 1

    def read(self, timeout_s: float):
        from bench.errors import DeviceError

        if self._i >= len(self._blocks):
            self.ended = True
            return None
        action = self._script.pop(self._i, None)
        if action == "raise":
            raise RuntimeError("sensor glitch")
        if action == "lose":
            raise DeviceError("input 'scripted' stopped delivering audio")
        if action == "drop":
            self.dropped_blocks += 1
        block = self._blocks[self._i]
        self._i += 1
        return block

    def stop(self) -> None:
        self.stops += 1


class JumpingAnalyser(FakeAnalyser):
    """FakeAnalyser whose frames report an overblown jump between ``start_s`` and ``end_s``."""

    def __init__(self, sample_rate: int, start_s: float = 0.3, end_s: float = 0.6) -> None:
        super().__init__(sample_rate)
        self.start_s, self.end_s = start_s, end_s

    def process(self, block):
        import dataclasses

        out = []
        for f in super().process(block):
            if f.f0_hz is not None and self.start_s <= f.time_s < self.end_s:
                f = dataclasses.replace(f, register="jumped", jump="overblown", f0_hz=f.f0_hz * 2, held_f0_hz=f.f0_hz)
            out.append(f)
        return out
