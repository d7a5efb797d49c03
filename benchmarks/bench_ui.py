"""Screen update rate and UI-thread CPU of the bench screen on the demo instrument.

Runs the app headless (Textual's test driver: the screen is composed and rendered, the output
discarded) with the real engine on the demo source for N seconds, and prints

- readings put on screen per second, against the poll rate asked for (ratio);
- renders of the big cents figure per second (each is a repaint of that widget);
- CPU seconds the UI thread used per wall second, against the engine thread's in the same run.

Usage::

    python3 benchmarks/bench_ui.py [seconds] [width] [height]
"""

from __future__ import annotations

import asyncio
import sys
import tempfile
import time
from pathlib import Path

from bench.engine import Engine
from bench.sources.demo import DemoSource
from bench.tuning import TuningSettings
from bench.ui.app import POLL_HZ, BenchApp, EventRelay
from bench.ui.readout import CentsFace


def measure(duration_s: float, size: tuple[int, int]) -> dict[str, float]:
    """Run the screen for ``duration_s`` seconds of wall time; return the figures."""
    renders = [0]
    original_render = CentsFace.render

    def counting_render(self):
        renders[0] += 1
        return original_render(self)

    CentsFace.render = counting_render  # type: ignore[method-assign]
    relay = EventRelay()
    engine = Engine(DemoSource(48000), TuningSettings(), on_event=relay)
    figures: dict[str, float] = {}

    async def scenario() -> None:
        with tempfile.TemporaryDirectory() as tmp:
            app = BenchApp(engine, log_dir=Path(tmp), events=relay, remember=False)
            async with app.run_test(size=size) as pilot:
                await pilot.pause(1.0)  # let the engine and the layout settle
                shown0, renders0 = app.readings_shown, renders[0]
                cpu0_s, wall0_s = time.thread_time(), time.monotonic()
                engine_cpu0_s = engine.stats.cpu_s
                await asyncio.sleep(duration_s)
                wall_s = time.monotonic() - wall0_s
                figures.update(
                    wall_s=wall_s,
                    updates_per_s=(app.readings_shown - shown0) / wall_s,
                    renders_per_s=(renders[0] - renders0) / wall_s,
                    ui_cpu_per_s=(time.thread_time() - cpu0_s) / wall_s,
                    engine_cpu_per_s=(engine.stats.cpu_s - engine_cpu0_s) / wall_s,
                    dropped_blocks=float(engine.stats.dropped_blocks),
                )

    try:
        asyncio.run(scenario())
    finally:
        CentsFace.render = original_render  # type: ignore[method-assign]
    return figures


def main(argv: list[str]) -> int:
    duration_s = float(argv[1]) if len(argv) > 1 else 10.0
    size = (int(argv[2]), int(argv[3])) if len(argv) > 3 else (120, 36)
    f = measure(duration_s, size)
    print(f"bench screen, demo instrument, {size[0]}x{size[1]}, {f['wall_s']:.1f} s wall")
    print(
        f"readings shown   {f['updates_per_s']:6.1f} /s   asked {POLL_HZ:.0f} /s   "
        f"ratio {f['updates_per_s'] / POLL_HZ:.2f}"
    )
    print(f"cents repaints   {f['renders_per_s']:6.1f} /s")
    ratio = f["ui_cpu_per_s"] / f["engine_cpu_per_s"] if f["engine_cpu_per_s"] > 0 else float("nan")
    print(
        f"UI thread CPU    {f['ui_cpu_per_s']:6.3f} s/s   engine thread {f['engine_cpu_per_s']:.3f} s/s   "
        f"UI/engine {ratio:.2f}"
    )
    print(f"dropped input blocks during the run: {f['dropped_blocks']:.0f}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
