"""Suite-wide fixtures: no test reads or writes the user's own configuration or logs."""

from __future__ import annotations

import pytest


@pytest.fixture(autouse=True)
def _private_user_folders(tmp_path_factory, monkeypatch):
    """Point bench's config and log folders at fresh temporary ones for every test."""
    monkeypatch.setenv("BENCH_CONFIG_DIR", str(tmp_path_factory.mktemp("config")))
    monkeypatch.setenv("BENCH_LOG_DIR", str(tmp_path_factory.mktemp("logs")))


def pytest_sessionstart(session):
    """Compile the analyser's kernels once, before any test times a subprocess.

    numba caches the machine code on disk; without this, the first test to start bench in
    a subprocess would also pay the one-off compilation (seconds). Its cache is keyed on
    each kernel's own file only: a kernel that calls one from an edited file would keep the
    old code, so the whole cache goes whenever any dsp source is newer than it.
    """
    from pathlib import Path

    dsp_dir = Path(__file__).resolve().parent.parent / "dsp"
    cached = list((dsp_dir / "__pycache__").glob("*.nb[ic]"))
    if cached:
        newest_source = max(p.stat().st_mtime for p in dsp_dir.glob("*.py"))
        if newest_source > min(p.stat().st_mtime for p in cached):
            for p in cached:
                p.unlink(missing_ok=True)

    from dsp.analyser import StreamingAnalyser

    StreamingAnalyser(48000)
