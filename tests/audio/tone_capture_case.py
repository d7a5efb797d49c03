"""A capture taken with the reference tone sounding, on a JACK dummy server (run in a fresh
interpreter by tests/audio/test_tone_jack.py; prints one JSON line).

The session controller runs a real engine on the JACK input 'system' and its reference tone on
the JACK output; the tone's output port is connected to the engine's input port, so the input
hears the instrument (tests/audio/tone_pull.py's recorder-like F4, ``offset_c`` cents sharp, fed
by live_case.py's feeder) and the tone :data:`UNDER_DB` under it. The target is locked to F4, so the tone sounds F4's target. After 3 s the capture
key is pressed (:meth:`SessionController.capture`); the capture comes through ``on_capture``.

    python tone_capture_case.py OFFSET_C
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))
sys.path.insert(0, str(Path(__file__).resolve().parent))


UNDER_DB = 6.0
"""The tone 6 dB (RMS) under the instrument at the input: far louder than the README advises."""


def main() -> int:
    from tone_pull import LIVE_CASE, _connect_loop, drone_peak_dbfs, instrument_wav

    from bench.controller import SessionController
    from bench.engine import Engine, ReadingCallback
    from bench.sources.mic import MicSource
    from bench.tuning import TuningSettings
    from bench.workflow.profiles import get_profile

    offset_c = float(sys.argv[1])
    server = __import__("os").environ["JACK_DEFAULT_SERVER"]
    readings: list[tuple[float, float | None]] = []
    captures = []
    got = threading.Event()

    def on_reading(r) -> None:  # engine thread
        readings.append((r.stream_time_s, r.mapping.cents_raw if r.mapping is not None and r.mapping.note == "F4" else None))

    def on_capture(cap) -> None:
        captures.append(cap)
        got.set()

    told: list[str] = []
    refused: list[str] = []
    with tempfile.TemporaryDirectory() as tmp_name:
        tmp = Path(tmp_name)
        wav = instrument_wav(tmp / "instrument.wav", offset_c, 9.0)
        engine = Engine(MicSource("system", sample_rate=48000, block_size=512), TuningSettings(),
                        consumers=[ReadingCallback(on_reading)])  # fmt: skip
        c = SessionController(engine, log_dir=tmp, profile=get_profile("alto"), on_capture=on_capture,
                              on_refusal=refused.append, on_tone=lambda n: told.append(n.text), tone_background=False)  # fmt: skip
        engine.start()
        c.start_workflow()
        c.lock(65)  # F4: the tone sounds its target
        c.tone.level_dbfs = drone_peak_dbfs(UNDER_DB)
        c.toggle_tone()
        _connect_loop(server)
        feeder = subprocess.Popen([sys.executable, str(LIVE_CASE), "feed", str(wav), "0"], stdout=subprocess.PIPE,
                                  text=True)  # fmt: skip
        try:
            time.sleep(3.5)
            key_t = readings[-1][0]
            said = c.capture()
            got.wait(5.0)
            time.sleep(1.5)  # the tone sounds again
            end_t = readings[-1][0]
        finally:
            c.close_tone()
            engine.stop()
            c.close_workflow()
            feeder.kill()
            feeder.communicate()
    tone_on = [v for t, v in readings if v is not None and key_t - 2.0 <= t <= key_t]
    back_on = [v for t, v in readings if v is not None and end_t - 0.8 <= t <= end_t]
    manual = [k for k in captures if k.source == "manual"]
    cap = manual[0] if manual else None
    print(json.dumps({
        "said": None if said is None else said.text,
        "told": told,
        "refused": refused,
        "capture_cents_raw": None if cap is None else cap.cents_raw,
        "capture_start_s": None if cap is None else cap.start_s,
        "key_s": key_t,
        "tone_on_median": float(np.median(tone_on)) if tone_on else None,
        "tone_back_median": float(np.median(back_on)) if back_on else None,
        "auto_captures": sum(1 for k in captures if k.source == "auto"),
    }))
    return 0


if __name__ == "__main__":
    sys.exit(main())
