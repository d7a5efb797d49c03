"""Layering: the DSP, the tuning model and the engine load without textual or sounddevice
(STYLE.md section 1). Each check runs in a fresh interpreter, so modules other tests
imported cannot hide a stray import."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

MODULES = ["dsp", "dsp.analyser", "dsp.clock", "bench.engine", "bench.tuning", "bench.sources.wavfile", "bench.sources.demo",
           "bench.clockfile", "bench.sources.device_clock", "bench.sources.tone_out"]  # fmt: skip


@pytest.mark.parametrize("module", MODULES)
def test_module_loads_without_screen_or_audio_libraries(module):
    code = (
        "import importlib, json, sys\n"
        f"importlib.import_module({module!r})\n"
        "print(json.dumps(sorted(m for m in sys.modules if m.split('.')[0] in ('textual', 'sounddevice', '_sounddevice'))))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert json.loads(done.stdout) == []


def test_engine_and_run_command_modules_load_without_sounddevice():
    # The run command may fall back to the demo where PortAudio is missing, so importing
    # it (and building the parser) must not load sounddevice either.
    code = (
        "import json, sys\n"
        "from bench.cli import build_parser\n"
        "build_parser()\n"
        "import bench.engine\n"
        "print(json.dumps(sorted(m for m in sys.modules if m.split('.')[0] in ('textual', 'sounddevice'))))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert json.loads(done.stdout) == []


def test_only_mic_imports_sounddevice():
    from pathlib import Path

    root = Path(__file__).resolve().parents[2]
    offenders = [
        str(p.relative_to(root))
        for folder in ("bench", "dsp")
        for p in (root / folder).rglob("*.py")
        if "import sounddevice" in p.read_text(encoding="utf-8") and p.name != "mic.py"
    ]
    assert offenders == []
