"""Capture what another program plays into a JACK server, through JACK-Client (not PortAudio).

``python jack_capture.py OUT.wav SECONDS``: registers an input port, connects it to the first
audio output port that is not the server's own (``system:``), this client's or the test feeder's
(``bench-feeder:``), keeps any other program's connection off its input, records
SECONDS from the moment of connection into OUT.wav (float) and prints one JSON line.
"""

from __future__ import annotations

import json
import sys
import time

import numpy as np


def main() -> int:
    import jack
    import soundfile as sf

    out_path, seconds = sys.argv[1], float(sys.argv[2])
    client = jack.Client("bench-capture", no_start_server=True)
    port = client.inports.register("in")
    rate = int(client.samplerate)
    buf = np.zeros(int(seconds * rate), dtype=np.float32)
    pos = [-1]  # -1: not connected yet

    @client.set_process_callback
    def process(frames: int) -> None:
        if pos[0] < 0 or pos[0] >= len(buf):
            return
        take = min(frames, len(buf) - pos[0])
        buf[pos[0] : pos[0] + take] = port.get_array()[:take]
        pos[0] += take

    client.activate()
    deadline = time.monotonic() + 15.0
    source = None
    while source is None and time.monotonic() < deadline:
        ports = [p for p in client.get_ports(is_audio=True, is_output=True)
                 if not p.name.startswith(("system:", "bench-capture:", "bench-feeder:"))]  # fmt: skip
        if ports:
            source = ports[0].name
            client.connect(source, port)
            pos[0] = 0
        else:
            time.sleep(0.01)
    while source is not None and pos[0] < len(buf) and time.monotonic() < deadline + seconds + 5:
        for other in client.get_all_connections(port):
            if other.name != source:  # the feeder connects to every input it finds
                client.disconnect(other, port)
        time.sleep(0.05)
    client.deactivate()
    client.close()
    sf.write(out_path, buf[: max(pos[0], 0)], rate, subtype="FLOAT")
    print(json.dumps({"source": source, "frames": max(pos[0], 0), "rate": rate}))
    return 0


if __name__ == "__main__":
    sys.exit(main())
