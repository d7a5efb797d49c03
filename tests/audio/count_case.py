"""Count a device's frames with bench's device layer and save the points: ``python count_case.py
DEVICE SECONDS OUT.npy`` (run with JACK_DEFAULT_SERVER set; PortAudio reads it on import)."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from bench.sources.device_clock import count_frames

count = count_frames(sys.argv[1], float(sys.argv[2]))
np.save(sys.argv[3], np.stack([count.time_s, count.frames]))
print(json.dumps({"sample_rate": count.sample_rate, "overflows": count.overflows}))
