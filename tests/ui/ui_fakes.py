"""A stand-in engine for the screen tests: readings are handed in by the test, not measured."""

from __future__ import annotations

import dataclasses
from pathlib import Path

from bench.reading import Reading, make_reading
from bench.tuning import TuningSettings
from dsp.frame import Frame


@dataclasses.dataclass(frozen=True, slots=True)
class FakeStats:
    frames: int
    dropped_blocks: int
    source: str
    state: str
    cpu_s: float = 0.0


@dataclasses.dataclass(frozen=True, slots=True)
class FakeEvent:
    kind: str
    message: str
    time_s: float = 0.0


class FakeEngine:
    """The engine's API with no thread: ``show()`` publishes the next reading."""

    def __init__(self, settings: TuningSettings | None = None, on_event=None) -> None:
        self._settings = settings or TuningSettings()
        self.on_event = on_event
        self.readings: list[Reading] = []
        self.locked_midi: int | None = None
        self.log_path: Path | None = None
        self.started = False
        self.stopped = False
        self.state = "idle"
        self.dropped_blocks = 0
        self.cpu_s = 0.0  # analysis-thread CPU seconds so far
        self.start_error: Exception | None = None
        self.settings_seen: list[TuningSettings] = []
        self.consumers: list[object] = []
        self.clock_ppm: float | None = None  # the input clock's error, as the engine holds it

    # engine API
    def start(self) -> None:
        if self.start_error is not None:
            raise self.start_error
        self.started, self.state = True, "running"

    def stop(self, timeout_s: float = 1.0) -> None:
        self.stopped, self.state = True, "stopped"
        self.log_path = None
        consumers, self.consumers = self.consumers, []
        for c in consumers:
            c.close()  # type: ignore[attr-defined]

    @property
    def running(self) -> bool:
        return self.started and not self.stopped

    def add_consumer(self, consumer: object) -> None:
        self.consumers.append(consumer)

    def remove_consumer(self, consumer: object) -> None:
        self.consumers = [c for c in self.consumers if c is not consumer]

    def latest(self) -> Reading | None:
        return self.readings[-1] if self.readings else None

    def history(self, seconds: float) -> list[Reading]:
        if not self.readings:
            return []
        since = self.readings[-1].stream_time_s - seconds
        return [r for r in self.readings if r.stream_time_s >= since]

    @property
    def settings(self) -> TuningSettings:
        return self._settings

    def update_settings(self, **changes: object) -> TuningSettings:
        s = dataclasses.replace(self._settings, **changes)  # type: ignore[arg-type]
        self._settings = s
        self.settings_seen.append(s)
        return s

    def lock(self, midi: int | None) -> None:
        self.locked_midi = midi

    def start_log(self, folder: Path) -> Path:
        self.log_path = Path(folder) / "session-fake.csv"
        return self.log_path

    def stop_log(self) -> None:
        self.log_path = None

    @property
    def stats(self) -> FakeStats:
        return FakeStats(len(self.readings), self.dropped_blocks, "fake", self.state, self.cpu_s)

    # test helpers
    def show(
        self,
        f0_hz: float | None,
        *,
        register: str | None = "steady",
        jump: str | None = None,
        harmonics_db: tuple[float, ...] | None = (0.0, -12.0, -3.0, -20.0, -8.0, -26.0, -14.0, -32.0),
        odd_even_db: float | None = 9.5,
        level_dbfs: float = -18.0,
        clipped: bool = False,
        held_f0_hz: float | None = None,
    ) -> Reading:
        """Publish a reading of ``f0_hz`` mapped with the real tuning model."""
        time_s = 0.01 * (len(self.readings) + 1)
        voiced = f0_hz is not None
        frame = Frame(
            time_s=time_s,
            ready_s=time_s,
            f0_hz=f0_hz,
            clarity=0.95 if voiced else 0.0,
            level_dbfs=level_dbfs,
            clipped=clipped,
            harmonics_db=harmonics_db if voiced else None,
            odd_even_db=odd_even_db if voiced else None,
            register=register if voiced else None,
            jump=jump if voiced else None,
            held_f0_hz=f0_hz if held_f0_hz is None else held_f0_hz,
        )
        reading = make_reading(
            frame,
            self._settings,
            locked_midi=self.locked_midi,
            dropped_blocks=self.dropped_blocks,
            log_path=None if self.log_path is None else str(self.log_path),
        )
        self.readings.append(reading)
        for c in self.consumers:  # the engine thread's work, done here at once
            c.take(reading)  # type: ignore[attr-defined]
        return reading


class FakeOutput:
    """A stand-in for the reference tone's output: a real tone generator, no device
    (``BenchApp(tone_opener=FakeOutput())``); ``fail`` makes it raise as a machine without
    an output does."""

    def __init__(self, fail: str | None = None) -> None:
        self.fail = fail
        self.generator = None
        self.stopped = 0

    def __call__(self, freq_hz: float, level_dbfs: float, timbre: str):
        import types

        from bench.errors import DeviceError
        from bench.sources.tone_out import ToneGenerator

        if self.fail:
            raise DeviceError(self.fail)
        self.generator = ToneGenerator(48000, freq_hz, level_dbfs, timbre)  # type: ignore[arg-type]
        self.generator.fade_out()
        player = types.SimpleNamespace(generator=self.generator, start=lambda: None, stop=self._stop)
        return player, "fake output", None

    def _stop(self, timeout_s: float = 1.0) -> None:
        self.stopped += 1
