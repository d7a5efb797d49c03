"""Run the live engine on the microphone path, in a fresh interpreter, and print JSON.

Started by the tests in this folder (and by benchmarks/bench_engine.py) as
``python live_case.py jack|alsa ...`` *after* they set JACK_DEFAULT_SERVER or
ALSA_CONFIG_PATH: PortAudio reads those when sounddevice is first imported, so they
cannot change inside one process.

``jack``: a JACK client ("bench-feeder", in a process of its own so it never competes with
the engine for the interpreter lock) plays ``--wav`` into the engine's input ports once
they appear, after ``--lead-in`` seconds of silence, and notes the wall time
(CLOCK_MONOTONIC, shared by both processes) of the process cycle that carried the first
sample. Run as ``python live_case.py feed WAV LEAD_IN_S [LOOP_S]`` it is that feeder (with
``LOOP_S`` it repeats the WAV for that many seconds). ``alsa``: the ``--device`` (an ALSA file
plugin) floods the input; nothing is fed.
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))


class Feeder:
    """A JACK client writing a signal to its output port, connected to the reader's inputs."""

    def __init__(self, audio: np.ndarray, lead_in_s: float, loop_s: float | None = None) -> None:
        import jack

        self.jack = jack
        self.client = jack.Client("bench-feeder", no_start_server=True)
        self.rate = self.client.samplerate
        self.port = self.client.outports.register("out")
        audio = audio.astype(np.float32)
        if loop_s is not None:
            audio = np.tile(audio, int(np.ceil(loop_s * self.rate / len(audio))))[: int(loop_s * self.rate)]
        self.audio = audio
        self.lead_in_frames = int(lead_in_s * self.rate)
        self.pos = -1  # -1: waiting for a connection
        self.onset_wall_s: float | None = None
        self.done_wall_s: float | None = None
        self.client.set_process_callback(self._process)
        self.client.activate()

    def _process(self, frames: int) -> None:
        out = self.port.get_array()
        out.fill(0.0)
        if self.pos < 0:
            return
        start = self.pos - self.lead_in_frames  # index into audio of this cycle's first frame
        end = start + frames
        if end > 0 and start < len(self.audio):
            lo = max(start, 0)
            hi = min(end, len(self.audio))
            out[lo - start : hi - start] = self.audio[lo:hi]
            if self.onset_wall_s is None:
                # the cycle starts now; the first sample sits (lo - start) frames into it
                self.onset_wall_s = time.monotonic() + (lo - start) / self.rate
        elif start >= len(self.audio) and self.done_wall_s is None:
            self.done_wall_s = time.monotonic()
        self.pos += frames

    def connect_when_ready(self, timeout_s: float = 10.0) -> list[str]:
        """Connect to every audio input port outside system/feeder; start playing."""
        deadline = time.monotonic() + timeout_s
        while time.monotonic() < deadline:
            targets = [
                p.name
                for p in self.client.get_ports(is_audio=True, is_input=True)
                if not p.name.startswith(("system:", "bench-feeder:"))
            ]
            if targets:
                for name in targets:
                    self.client.connect(self.port, name)
                self.pos = 0
                return targets
            time.sleep(0.01)
        raise RuntimeError("the engine's JACK input ports never appeared")

    def close(self) -> None:
        self.client.deactivate()
        self.client.close()


class AubioAnalyser:
    """The reference analyser for the audio-path tests: aubio's YIN pitch (aubio 0.4.9,
    ``aubio.pitch("yinfast")``, de Cheveigne & Kawahara 2002, computed by FFT), one frame
    per 256-sample hop. Independent of the project's
    analyser, so a pitch error here points at the audio path, not at ``dsp``."""

    def __init__(self, sample_rate: int, frame_size: int = 2048, hop_size: int = 256) -> None:
        import aubio

        self.sample_rate, self.frame_size, self.hop_size = sample_rate, frame_size, hop_size
        self._pitch = aubio.pitch("yinfast", frame_size, hop_size, sample_rate)
        self._pitch.set_unit("Hz")
        self._pitch.set_tolerance(0.15)
        self._pending = np.zeros(0, dtype=np.float32)
        self._fed = 0

    def process(self, block):
        from dsp.frame import Frame

        self._pending = np.concatenate([self._pending, np.asarray(block, dtype=np.float32)])
        frames = []
        while len(self._pending) >= self.hop_size:
            hop, self._pending = self._pending[: self.hop_size], self._pending[self.hop_size :]
            self._fed += self.hop_size
            f0 = float(self._pitch(hop)[0])
            conf = float(self._pitch.get_confidence())
            rms = float(np.sqrt(np.mean(hop.astype(np.float64) ** 2)))
            level = 20 * np.log10(rms) if rms > 0 else -np.inf
            voiced = f0 > 0 and conf > 0.8 and level > -60
            frames.append(
                Frame(
                    time_s=(self._fed - self.frame_size / 2) / self.sample_rate,
                    ready_s=self._fed / self.sample_rate,
                    f0_hz=f0 if voiced else None,
                    clarity=conf,
                    level_dbfs=float(level),
                    clipped=bool(np.max(np.abs(hop)) >= 1.0),
                    harmonics_db=None,
                    odd_even_db=None,
                    register="steady" if voiced else None,
                    jump=None,
                    held_f0_hz=f0 if voiced else None,
                )
            )
        return frames

    def lock(self, target_hz):
        pass

    def reset(self):
        self._pending = np.zeros(0, dtype=np.float32)
        self._fed = 0


def feed(wav: Path, lead_in_s: float, loop_s: float | None = None) -> int:
    """The feeder process: connect, play, print one JSON line with its timings, exit."""
    import soundfile as sf

    audio, _ = sf.read(wav, dtype="float32")
    feeder = Feeder(audio, lead_in_s, loop_s)
    audio = feeder.audio
    try:
        connected = feeder.connect_when_ready()
        deadline = time.monotonic() + lead_in_s + len(audio) / feeder.rate + 10.0
        while feeder.done_wall_s is None and time.monotonic() < deadline:
            time.sleep(0.01)
    finally:
        feeder.close()
    print(json.dumps({"rate": feeder.rate, "connected": connected, "onset_wall_s": feeder.onset_wall_s,
                      "done_wall_s": feeder.done_wall_s}), flush=True)  # fmt: skip
    return 0


def main() -> int:
    ap = argparse.ArgumentParser()
    if len(sys.argv) > 1 and sys.argv[1] == "feed":
        return feed(Path(sys.argv[2]), float(sys.argv[3]), float(sys.argv[4]) if len(sys.argv) > 4 else None)
    ap.add_argument("mode", choices=["jack", "alsa"])
    ap.add_argument("--device", required=True)
    ap.add_argument("--wav", type=Path)
    ap.add_argument("--seconds", type=float, default=5.0)
    ap.add_argument("--lead-in", type=float, default=0.5)
    ap.add_argument("--log", type=Path)
    ap.add_argument("--block", type=int, default=512)
    ap.add_argument("--rate", type=int, default=48000)
    ap.add_argument("--analyser", choices=["project", "aubio"], default="project")
    ap.add_argument("--loop", type=float, default=None, help="repeat the WAV for this many seconds")
    ap.add_argument("--no-readings", action="store_true", help="leave the per-reading list out")
    ap.add_argument("--kill-server", type=int, default=None, metavar="PID", help="stop the JACK server mid-run")
    ap.add_argument("--kill-after", type=float, default=1.5, metavar="S")
    args = ap.parse_args()

    from bench.engine import Engine, ReadingCallback
    from bench.sources.mic import MicSource
    from bench.tuning import TuningSettings

    readings: list[tuple[float, float, float | None, str | None, float | None]] = []
    events: list[dict] = []

    def on_reading(r) -> None:  # engine thread: time it was published, input time, pitch
        readings.append(
            (time.monotonic(), r.stream_time_s, r.frame.f0_hz, r.mapping.note if r.mapping else None,
             r.mapping.cents if r.mapping else None, r.frame.level_dbfs)
        )  # fmt: skip

    source = MicSource(args.device, sample_rate=args.rate, block_size=args.block)
    engine = Engine(
        source,
        TuningSettings(),
        log_path=args.log,
        on_event=lambda e: events.append({"kind": e.kind, "message": e.message, "time_s": e.time_s}),
        consumers=[ReadingCallback(on_reading)],
        analyser_factory=AubioAnalyser if args.analyser == "aubio" else None,
    )
    feeder = None
    result: dict = {"mode": args.mode}
    if args.mode == "jack":
        import subprocess

        feeder = subprocess.Popen(
            [sys.executable, __file__, "feed", str(args.wav), str(args.lead_in)]
            + ([str(args.loop)] if args.loop else []),
            stdout=subprocess.PIPE,
            text=True,
        )
    wall0 = time.monotonic()
    try:
        engine.start()
        result["start_s"] = time.monotonic() - wall0
        result["description"] = source.description
        result["callback_in"] = source.callback_in
        result["input_latency_s"] = source.input_latency_s
        deadline = time.monotonic() + args.seconds + (args.loop or 0.0)
        kill_at = time.monotonic() + args.kill_after if args.kill_server else None
        while time.monotonic() < deadline and engine.running:
            if kill_at is not None and time.monotonic() >= kill_at:
                import os
                import signal

                os.kill(args.kill_server, signal.SIGTERM)  # the audio server goes away
                result["killed_at_wall_s"] = time.monotonic()
                kill_at = None
            if feeder is not None and feeder.poll() is not None:
                time.sleep(0.3)  # let the tail of the feed reach the readings
                break
            time.sleep(0.01)
        t_stop = time.monotonic()
        engine.stop(timeout_s=3.0)
        result["stop_s"] = time.monotonic() - t_stop
    finally:
        engine.stop()
        if feeder is not None:
            if args.kill_server:
                feeder.kill()  # its server is gone; nothing to report
            try:
                out, _ = feeder.communicate(timeout=15)
            except subprocess.TimeoutExpired:
                feeder.kill()
                out, _ = feeder.communicate()
            fed = json.loads(out) if out and out.strip() else {}
            result["jack_rate"] = fed.get("rate")
            result["connected"] = fed.get("connected")
            result["onset_wall_s"] = fed.get("onset_wall_s")
            result["feed_done"] = fed.get("done_wall_s") is not None
    stats = engine.stats
    result.update(
        frames=stats.frames,
        blocks=stats.blocks,
        dropped_blocks=stats.dropped_blocks,
        overflows=source.overflows,
        full_drops=source.full_drops,
        state=stats.state,
        cpu_s=stats.cpu_s,
        wall_s=time.monotonic() - wall0,
        engine_latency_s=stats.latency_s,
        engine_max_latency_s=stats.max_latency_s,
        log_rows=stats.log_rows,
        still_running=engine.running,
        events=events,
        hop_s=(readings[1][1] - readings[0][1]) if len(readings) > 1 else None,
        input_seconds=readings[-1][1] if readings else 0.0,
    )
    if readings and result.get("onset_wall_s"):
        onset = result["onset_wall_s"]
        first = next((r for r in readings if r[0] > onset and r[2] is not None), None)
        result["first_voiced_latency_s"] = first[0] - onset if first else None
    result["readings"] = [] if args.no_readings else readings
    json.dump(result, sys.stdout)
    return 0


if __name__ == "__main__":
    sys.exit(main())
