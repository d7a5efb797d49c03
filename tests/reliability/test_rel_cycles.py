"""A day at the bench in fast motion: 1,000 start/stop cycles of the engine with a fast fake
source and a log each time. No thread leak, no file-handle leak, no large memory growth, no
deadlock (pytest-timeout ends a hung run)."""

from __future__ import annotations

import gc
import os
import threading
import time
import tracemalloc

import pytest

from bench.engine import Engine
from bench.framelog import read_frame_log
from bench.tuning import TuningSettings

from faulty_sources import AnalyserRecorder, FastSineSource, QuickAnalyser

CYCLES = 1000
WARMUP = 100


def _open_fds() -> int:
    return len(os.listdir("/proc/self/fd"))


def _one_cycle(folder, i: int) -> Engine:
    engine = Engine(
        FastSineSource(n_blocks=None),
        TuningSettings(),
        log_path=folder / f"take-{i:04d}.csv",
        analyser_factory=QuickAnalyser,
    )
    engine.start()
    deadline = time.monotonic() + 10
    while engine.latest() is None and time.monotonic() < deadline:
        time.sleep(0.0005)
    engine.stop()
    return engine


@pytest.mark.timeout(240)
def test_a_thousand_start_stop_cycles_leak_nothing(tmp_path):
    if not os.path.isdir("/proc/self/fd"):
        pytest.skip("needs /proc/self/fd")
    for i in range(WARMUP):  # imports, caches and the first allocations settle
        _one_cycle(tmp_path, i)
    gc.collect()
    threads0, fds0 = threading.active_count(), _open_fds()
    tracemalloc.start()
    try:
        gc.collect()
        mem0, _ = tracemalloc.get_traced_memory()
        stuck = 0
        for i in range(WARMUP, CYCLES):
            engine = _one_cycle(tmp_path, i)
            stuck += engine.running
            if i % 100 == 99:
                assert threading.active_count() <= threads0 + 1, f"threads grew by cycle {i}"
        gc.collect()
        mem1, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    growth_kib = (mem1 - mem0) / 1024
    print(f"\n{CYCLES - WARMUP} cycles: threads {threads0}->{threading.active_count()}, "
          f"fds {fds0}->{_open_fds()}, traced memory growth {growth_kib:.1f} KiB, peak {peak / 1024:.0f} KiB")
    assert stuck == 0
    assert threading.active_count() == threads0
    assert _open_fds() == fds0
    # 900 engines with a log each: a leak of one reading or one log buffer per cycle (a few
    # KiB) would show as megabytes; allow well under one KiB a cycle.
    assert growth_kib < 512, f"memory grew {growth_kib:.0f} KiB over {CYCLES - WARMUP} cycles"
    # Every cycle's log is complete: it parses and ends on a closed row.
    logs = sorted(tmp_path.glob("take-*.csv"))
    assert len(logs) == CYCLES
    for path in logs[::97]:
        assert read_frame_log(path), path
        assert path.read_bytes().endswith(b"\r\n")


@pytest.mark.timeout(120)
def test_start_and_stop_log_repeatedly_while_running_keeps_every_row(tmp_path):
    analysers = AnalyserRecorder()
    engine = Engine(FastSineSource(n_blocks=None), TuningSettings(), analyser_factory=analysers)
    engine.start()
    fds0 = _open_fds()
    try:
        paths = []
        for _ in range(200):
            paths.append(engine.start_log(tmp_path))
            engine.stop_log()
    finally:
        engine.stop()
    assert _open_fds() <= fds0
    assert len(set(paths)) == 200  # no two logs share a file
    rows = sum(len(read_frame_log(p)) for p in paths)
    assert rows == engine.stats.log_rows
