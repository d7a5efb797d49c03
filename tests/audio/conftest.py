"""Fixtures for the real audio path: a JACK dummy server, an ALSA file device, and a runner
that starts tests/audio/live_case.py in a fresh interpreter with their environment.

Recipes: /work/shared/AUDIO-TESTING.md (JACK dummy driver paced by a timer; ALSA ``file``
plugin over ``null``, which floods capture). Servers are stopped by their process id.
"""

from __future__ import annotations

import ctypes.util
import json
import os
import shutil
import subprocess
import sys
from contextlib import ExitStack
from pathlib import Path

import pytest
from jack_dummy import dummy_server

REPO = Path(__file__).resolve().parents[2]
LIVE_CASE = Path(__file__).with_name("live_case.py")
SAMPLE_RATE = 48000
PERIOD = 512


def _need_portaudio() -> None:
    if ctypes.util.find_library("portaudio") is None:
        pytest.skip("libportaudio2 is not installed (apt-get install libportaudio2)")


@pytest.fixture
def jack_server(tmp_path):
    """A JACK dummy server (48 kHz, 512-frame periods) running for this test: ``.name``, ``.pid``."""
    _need_portaudio()
    if shutil.which("jackd") is None:
        pytest.skip("jackd is not installed (apt-get install jackd2)")
    try:
        import jack  # noqa: F401
    except (ImportError, OSError) as exc:
        pytest.skip(f"JACK-Client cannot load libjack: {exc}")
    with ExitStack() as stack:
        try:
            up = stack.enter_context(dummy_server(tmp_path, "bench-test", SAMPLE_RATE, PERIOD))
        except RuntimeError as exc:
            pytest.fail(str(exc))
        yield up


@pytest.fixture
def alsa_file_device(tmp_path):
    """(device name, ALSA_CONFIG_PATH) of a capture device reading ``fixture.raw`` (S16_LE mono)."""
    _need_portaudio()
    if not Path("/usr/share/alsa/alsa.conf").exists():
        pytest.skip("ALSA configuration /usr/share/alsa/alsa.conf is missing (apt-get install alsa-utils)")
    raw = tmp_path / "fixture.raw"
    conf = tmp_path / "asound.conf"
    conf.write_text(
        f'pcm.fixturefile {{ type file; slave.pcm "null"; file "/dev/null"; infile "{raw}"; format "raw" }}\n'
        f'pcm.fixture {{ type plug; slave {{ pcm "fixturefile"; format S16_LE; rate {SAMPLE_RATE}; channels 1 }} }}\n'
    )
    return raw, f"/usr/share/alsa/alsa.conf:{conf}"


def run_live_case(args: list[str], env_extra: dict[str, str], timeout_s: float = 40.0) -> dict:
    """Run live_case.py with the given environment; its JSON result."""
    env = dict(os.environ)
    env.update(env_extra)
    env["PYTHONPATH"] = os.pathsep.join([str(REPO), env.get("PYTHONPATH", "")])
    done = subprocess.run(
        [sys.executable, str(LIVE_CASE), *args],
        env=env,
        capture_output=True,
        text=True,
        timeout=timeout_s,
        check=False,
    )
    if done.returncode != 0:
        pytest.fail(f"live_case.py exited with {done.returncode}:\n{done.stderr[-2000:]}")
    return json.loads(done.stdout)


def project_analyser_available() -> bool:
    try:
        from dsp.analyser import StreamingAnalyser  # noqa: F401
    except ImportError:
        return False
    return True
