"""The outside reference for the device clock test: the JACK server's own frame counter
against the system's monotonic clock, read through JACK-Client (not through PortAudio or bench).

``python jack_rate.py SECONDS [POINTS.npy]``: registers a client, and in every process cycle stores
``time.monotonic()`` with ``client.last_frame_time`` (the server's count of frames at the start
of the cycle, libjack's ``jack_last_frame_time``); after SECONDS fits a line through them with
numpy.polyfit and prints one JSON line: the rate in frames per monotonic second, its standard
error, the points and the time span; with POINTS.npy it also saves the (time, frames) pairs.
"""

from __future__ import annotations

import json
import sys
import time

import numpy as np


def main() -> int:
    import jack

    seconds = float(sys.argv[1])
    client = jack.Client("bench-rate-reference", no_start_server=True)
    cap = int((seconds + 10) * client.samplerate / client.blocksize) + 100
    stamps = np.zeros(cap)
    frames = np.zeros(cap)
    n = [0]

    @client.set_process_callback
    def process(nframes: int) -> None:
        i = n[0]
        if i < cap:
            stamps[i] = time.monotonic()
            frames[i] = client.last_frame_time
            n[0] = i + 1

    client.activate()
    time.sleep(seconds)
    client.deactivate()
    client.close()
    k = n[0]
    t, f = stamps[1:k], frames[1:k]  # the first cycle may be stamped late
    if len(sys.argv) > 2:
        np.save(sys.argv[2], np.stack([t, f]))
    coef, cov = np.polyfit(t - t[0], f, 1, cov=True)
    print(json.dumps({"rate_hz": float(coef[0]), "rate_se_hz": float(np.sqrt(cov[0, 0])), "points": int(k - 1),
                      "span_s": float(t[-1] - t[0]), "start_s": float(t[0]), "end_s": float(t[-1])}))  # fmt: skip
    return 0


if __name__ == "__main__":
    sys.exit(main())
