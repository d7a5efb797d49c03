"""Audio sources: the block ring, the file source, the demo instrument, microphone device
lookup and callback (without PortAudio), remembered settings and the air temperature."""

from __future__ import annotations

import sys
import types

import numpy as np
import pytest
import soundfile as sf

from bench.errors import AudioFileError, DeviceError, SettingsError
from bench.sources.base import AudioSource, BlockRing, ManualClock, frame_blocks, to_mono
from bench.sources.demo import DEMO_SCALE, DemoSource, demo_events
from bench.sources.wavfile import WavFileSource

RATE = 48000


# -- block ring ----------------------------------------------------------------------


def test_ring_keeps_order_and_counts_blocks_that_find_it_full():
    ring = BlockRing(4, 8)
    data = np.arange(6 * 8, dtype=np.float32).reshape(6, 8, 1)
    pushed = [ring.push_channel(d) for d in data]
    assert pushed == [True, True, True, True, False, False]
    assert ring.full_drops == 2
    out = [ring.pop() for _ in range(5)]
    assert out[-1] is None
    np.testing.assert_array_equal(np.concatenate(out[:4]), data[:4].reshape(-1))
    # popped blocks are copies: the callback may reuse the slot at once
    first = out[0].copy()
    ring.push_channel(data[5])
    np.testing.assert_array_equal(out[0], first)


def test_ring_mixes_channels_and_keeps_short_blocks_short():
    ring = BlockRing(2, 8)
    stereo = np.array([[1.0, 0.0], [0.5, 0.5], [0.0, -1.0]], dtype=np.float32)
    ring.push_mean(stereo)
    np.testing.assert_allclose(ring.pop(), [0.5, 0.5, -0.5])
    with pytest.raises(ValueError, match="capacity"):
        BlockRing(1, 8)


# -- file source ---------------------------------------------------------------------


def _stereo_wav(tmp_path, seconds=0.5):
    rng = np.random.default_rng(3)
    data = rng.uniform(-0.5, 0.5, size=(int(seconds * RATE), 2)).astype(np.float32)
    path = tmp_path / "stereo.flac"
    sf.write(path, data, RATE, subtype="PCM_24")
    return path


def test_file_source_hands_out_the_file_mixed_to_mono_in_blocks(tmp_path):
    path = _stereo_wav(tmp_path)
    src = WavFileSource(path, block_size=1000, realtime=False)
    assert isinstance(src, AudioSource)
    src.start()
    blocks = []
    while (b := src.read(0.1)) is not None:
        blocks.append(b)
    src.stop()
    assert src.ended and src.dropped_blocks == 0
    assert [len(b) for b in blocks[:-1]] == [1000] * (len(blocks) - 1)
    # libsndfile's own reading of the file, averaged over channels, is the reference
    expected, rate = sf.read(path, dtype="float32")
    assert rate == src.sample_rate == RATE
    np.testing.assert_allclose(np.concatenate(blocks), expected.mean(axis=1), atol=1e-7)


def test_file_source_paces_at_real_time_on_an_injected_clock(tmp_path):
    clock = ManualClock(100.0)
    src = WavFileSource(_stereo_wav(tmp_path), block_size=480, realtime=True, clock=clock)
    src.start()
    for k in range(1, 6):
        assert src.read(1.0) is not None
        assert clock.monotonic() == pytest.approx(100.0 + k * 0.01)  # 480 samples = 10 ms
    # asking with a shorter timeout than the next block's due time gives None, and waits that long
    assert src.read(0.004) is None
    assert clock.monotonic() == pytest.approx(100.054)
    assert src.read(0.1) is not None
    assert clock.monotonic() == pytest.approx(100.06)


@pytest.mark.parametrize("content", [b"", b"not audio at all"])
def test_file_source_rejects_unreadable_files(tmp_path, content):
    bad = tmp_path / "bad.wav"
    bad.write_bytes(content)
    with pytest.raises(AudioFileError, match="bad.wav"):
        WavFileSource(bad)
    with pytest.raises(AudioFileError, match="missing.wav: no such file"):
        WavFileSource(tmp_path / "missing.wav")


def test_frame_blocks_and_to_mono():
    assert [len(b) for b in frame_blocks(np.zeros(1030), 512)] == [512, 512, 6]
    np.testing.assert_allclose(to_mono(np.array([[0.2, 0.4]])), [0.3])


# -- demo instrument -----------------------------------------------------------------


def test_demo_scale_is_the_wren_in_f_as_the_model_plays_it():
    from bench.model.demo import demo_notes
    from bench.tuning.notes import parse_note

    events = demo_events()
    # every pitch is the model's for the fingering of that name (the alto with two holes off)
    model = {n.name: n.freq_hz for n in demo_notes()}
    by_midi = {parse_note(name): hz for name, hz in model.items()}
    assert [e.f0_hz for e in events] == pytest.approx([by_midi[n.midi] for n in DEMO_SCALE], rel=1e-12)
    assert DEMO_SCALE[0].midi == min(n.midi for n in DEMO_SCALE) == 65  # F4, every hole closed
    # F4 = 349.2282 Hz at A4 = 440 (REFERENCES section 1, equal temperament): the lowest note
    # is in tune (the window's end correction was set for it)
    assert 1200 * np.log2(events[0].f0_hz / 349.2282) == pytest.approx(0.0, abs=3.0)
    assert {e.jump_kind for e in events} == {None, "overblown", "vented"}
    # something to fix: D5 (587.3295 Hz) flat through the narrow h3, Bb4 (466.1638 Hz) sharp
    assert 1200 * np.log2(model["D5"] / 587.3295) < -5.0
    assert 1200 * np.log2(model["Bb4"] / 466.1638) > 5.0
    assert demo_events(a4_hz=415.0)[0].f0_hz == pytest.approx(events[0].f0_hz * 415.0 / 440.0, rel=1e-12)


def test_demo_loop_plays_its_first_note_at_the_intended_pitch():
    import aubio

    src = DemoSource(RATE, realtime=False, loops=1)
    src.start()
    assert 15.0 < src.loop_duration_s < 60.0
    audio = []
    while (b := src.read(0.1)) is not None:
        audio.append(b)
    assert src.ended
    audio = np.concatenate(audio)
    assert len(audio) == round(src.loop_duration_s * RATE)
    # aubio 0.4.9 YIN (de Cheveigne & Kawahara 2002) as the outside estimator of the first note
    pitch = aubio.pitch("yinfast", 4096, 512, RATE)
    pitch.set_unit("Hz")
    f0 = []
    for i in range(int(0.3 * RATE), int(0.9 * RATE), 512):
        f = float(pitch(np.ascontiguousarray(audio[i : i + 512]))[0])
        if pitch.get_confidence() > 0.8:
            f0.append(f)
    want_hz = demo_events()[0].f0_hz  # the model's F4 (see the test above)
    assert len(f0) > 20
    assert 1200 * np.log2(np.median(f0) / want_hz) == pytest.approx(0.0, abs=3.0)


def test_demo_paces_and_loops():
    clock = ManualClock()
    src = DemoSource(RATE, block_size=480, clock=clock)
    src.start()
    n = int(src.loop_duration_s * RATE) // 480 + 5
    for _ in range(n):
        assert src.read(1.0) is not None
    assert not src.ended  # loops for ever
    assert clock.monotonic() == pytest.approx(n * 0.01, rel=1e-6)
    with pytest.raises(DeviceError, match="out of range"):
        DemoSource(1000)


# -- microphone (no PortAudio needed) --------------------------------------------------


@pytest.fixture
def fake_devices(monkeypatch):
    from bench.sources import mic

    devices = [
        mic.InputDevice(0, "HDA Intel PCH: ALC257 Analog (hw:0,0)", 2, 44100.0, "ALSA"),
        mic.InputDevice(3, "USB Audio CODEC: Audio (hw:1,0)", 1, 48000.0, "ALSA"),
        mic.InputDevice(5, "USB Audio CODEC", 2, 48000.0, "JACK Audio Connection Kit"),
        mic.InputDevice(7, "pulse", 32, 44100.0, "ALSA"),
    ]
    monkeypatch.setattr(mic, "list_input_devices", lambda: devices)
    return devices


def test_device_by_index_name_part_and_exact_name(fake_devices):
    from bench.sources.mic import resolve_input_device

    assert resolve_input_device(3).index == 3
    assert resolve_input_device("7").index == 7
    assert resolve_input_device("alc257").index == 0
    assert resolve_input_device("PULSE").index == 7
    assert resolve_input_device("usb audio codec").index == 5  # exact name wins over parts


def test_unknown_or_ambiguous_device_lists_what_was_found(fake_devices):
    from bench.sources.mic import resolve_input_device

    with pytest.raises(DeviceError, match=r"no input device matches 'scarlett'; input devices found: 0 'HDA"):
        resolve_input_device("scarlett")
    with pytest.raises(DeviceError, match=r"'usb' matches 2 input devices: 3 'USB Audio CODEC: Audio \(hw:1,0\)' \(ALSA\)"):
        resolve_input_device("usb")
    with pytest.raises(DeviceError, match="device 4 is not an audio input"):
        resolve_input_device(4)


def test_no_devices_says_so(monkeypatch):
    from bench.sources import mic

    monkeypatch.setattr(mic, "list_input_devices", lambda: [])
    with pytest.raises(DeviceError, match="no audio input device found"):
        mic.resolve_input_device(None)


def test_import_sounddevice_turns_oserror_into_device_error(monkeypatch):
    import builtins

    from bench.sources import mic

    real_import = builtins.__import__

    def fake_import(name, *args, **kwargs):
        if name == "sounddevice":
            raise OSError("PortAudio library not found")
        return real_import(name, *args, **kwargs)

    monkeypatch.delitem(sys.modules, "sounddevice", raising=False)
    monkeypatch.setattr(builtins, "__import__", fake_import)
    with pytest.raises(DeviceError, match=r"PortAudio library is not installed \(PortAudio library not found\)"):
        mic.import_sounddevice()


class _Status:
    def __init__(self, overflow=False):
        self.input_overflow = overflow


def test_mic_callback_copies_counts_overflows_and_full_ring():
    from bench.sources.mic import MicSource

    src = MicSource(None, sample_rate=RATE, block_size=16, ring_blocks=2, clock=ManualClock())
    src._stream = object()  # noqa: SLF001 - as if started; read() only polls the ring
    ramp = np.linspace(-1, 1, 16, dtype=np.float32)
    indata = np.stack([ramp, np.full(16, 9, dtype=np.float32)], axis=1)
    src._callback(indata, 16, None, _Status())  # noqa: SLF001
    indata[:] = 0  # PortAudio reuses its buffer: the block must have been copied
    src._callback(indata, 16, None, _Status(overflow=True))  # noqa: SLF001
    src._callback(indata, 16, None, _Status())  # noqa: SLF001 - ring full: dropped
    assert (src.overflows, src.full_drops, src.dropped_blocks) == (1, 1, 2)
    np.testing.assert_array_equal(src.read(0.01), ramp)  # channel 0 only
    np.testing.assert_array_equal(src.read(0.01), np.zeros(16))
    assert src.read(0.01) is None  # nothing more within the timeout


def test_mic_reports_a_stalled_or_finished_stream_as_lost():
    from bench.sources.mic import MicSource

    clock = ManualClock()
    src = MicSource(None, block_size=64, stall_timeout_s=0.5, clock=clock)
    src._stream = types.SimpleNamespace(abort=lambda: None, close=lambda: None)  # noqa: SLF001
    assert src.read(0.2) is None
    with pytest.raises(DeviceError, match="stopped delivering audio"):
        src.read(1.0)
    src._stream = types.SimpleNamespace(abort=lambda: None, close=lambda: None)  # noqa: SLF001
    src._last_block_s = clock.monotonic()  # noqa: SLF001
    src._stopping = False  # noqa: SLF001 - as after a fresh start()
    src._finished_callback()  # noqa: SLF001 - PortAudio ended the stream by itself
    with pytest.raises(DeviceError, match="stopped delivering audio"):
        src.read(0.1)


def test_mic_rejects_bad_options():
    from bench.sources.mic import MicSource

    with pytest.raises(DeviceError, match="block size 8"):
        MicSource(block_size=8)
    with pytest.raises(DeviceError, match="sample rate 1000 Hz"):
        MicSource(sample_rate=1000)


# -- remembered settings ----------------------------------------------------------------


def test_settings_round_trip_in_the_config_folder(tmp_path, monkeypatch):
    from bench.config import load_saved_settings, save_settings, settings_path
    from bench.tuning import TuningSettings

    monkeypatch.setenv("BENCH_CONFIG_DIR", str(tmp_path / "cfg"))
    assert load_saved_settings() is None
    chosen = TuningSettings(a4_hz=415.0, temperament="vallotti", tonic="F", temp_c=23.5, rh_percent=45.0, flats=True)
    path = save_settings(chosen)
    assert path == settings_path() == tmp_path / "cfg" / "settings.toml"
    assert load_saved_settings() == chosen


def test_corrupt_settings_file_warns_in_one_line_and_gives_defaults(tmp_path, capsys):
    from bench.config import load_saved_settings

    path = tmp_path / "settings.toml"
    path.write_text("[tuning\na4_hz = ")
    assert load_saved_settings(path) is None
    err = capsys.readouterr().err
    assert err.startswith("warning: saved settings") and err.count("\n") == 1
    path.write_text('[tuning]\na4_hz = "loud"\n')
    assert load_saved_settings(path) is None
    assert "a4_hz" in capsys.readouterr().err
    path.write_text("[tuning]\na4_hz = 442.0\nfuture_option = 3\n")
    loaded = load_saved_settings(path)
    assert loaded is not None and loaded.a4_hz == 442.0


# -- air temperature ---------------------------------------------------------------------


def test_air_temperature_from_a_file_and_a_command(tmp_path):
    from bench.airtemp import AirTemperatureSource

    f = tmp_path / "t.txt"
    f.write_text("temp=21.5 C\n")
    assert AirTemperatureSource(str(f)).read_temp_c() == 21.5
    assert AirTemperatureSource(f"cmd:{sys.executable} -c \"print('23,25')\"").read_temp_c() == 23.25
    with pytest.raises(SettingsError, match="no temperature in file"):
        f.write_text("sensor offline")
        AirTemperatureSource(str(f)).read_temp_c()
    with pytest.raises(SettingsError, match="outside"):
        f.write_text("85.0")
        AirTemperatureSource(str(f)).read_temp_c()
    with pytest.raises(SettingsError, match="exited with status 3"):
        AirTemperatureSource(f"cmd:{sys.executable} -c \"raise SystemExit(3)\"").read_temp_c()


def test_air_temperature_follower_updates_the_settings_and_reports_failure_once(tmp_path):
    from bench.airtemp import AirTemperatureFollower, AirTemperatureSource
    from bench.tuning import TuningSettings

    class FakeEngine:
        settings = TuningSettings()

        def update_settings(self, **changes):
            import dataclasses

            self.settings = dataclasses.replace(self.settings, **changes)

    f = tmp_path / "t.txt"
    f.write_text("24.0")
    engine, errors = FakeEngine(), []
    follower = AirTemperatureFollower(AirTemperatureSource(str(f)), engine, on_error=errors.append)
    assert follower.update_once() == 24.0
    assert engine.settings.temp_c == 24.0 and engine.settings.a4_hz == 440.0
    f.write_text("?")
    assert follower.update_once() is None and follower.update_once() is None
    assert len(errors) == 1 and engine.settings.temp_c == 24.0


def test_paced_sources_drop_counted_blocks_when_the_reader_falls_far_behind(tmp_path):
    from bench.sources.base import MAX_LAG_S

    clock = ManualClock()
    src = DemoSource(RATE, block_size=480, clock=clock)
    src.start()
    assert src.read(1.0) is not None
    clock.advance(MAX_LAG_S + 0.1)  # the engine thread was starved for 2.1 s
    assert src.read(1.0) is not None
    assert src.dropped_blocks == 11  # 0.1 s over the allowed lag, in 10 ms blocks, rounded up
    assert src.read(1.0) is not None and src.dropped_blocks == 11

    path = tmp_path / "long.wav"
    sf.write(path, np.zeros(5 * RATE, dtype=np.float32), RATE)
    clock = ManualClock()
    wav = WavFileSource(path, block_size=480, clock=clock)
    wav.start()
    wav.read(1.0)
    clock.advance(MAX_LAG_S + 0.1)
    wav.read(1.0)
    assert wav.dropped_blocks == 11
    n = 2
    while wav.read(1.0) is not None:
        n += 1
    assert n + wav.dropped_blocks == 5 * RATE // 480


@pytest.mark.parametrize("file_rate", [8000, 192000])
def test_file_at_a_rate_the_analyser_refuses_is_resampled_to_48k(tmp_path, file_rate):
    import aubio

    t = np.arange(file_rate) / file_rate
    path = tmp_path / f"tone_{file_rate}.wav"
    sf.write(path, (0.5 * np.sin(2 * np.pi * 440.0 * t)).astype(np.float32), file_rate, subtype="FLOAT")
    src = WavFileSource(path, realtime=False)
    assert src.sample_rate == 48000 and src.resampled
    assert f"{file_rate} Hz resampled to 48000 Hz" in src.description
    src.start()
    blocks = []
    while (b := src.read(0.1)) is not None:
        blocks.append(b)
    audio = np.concatenate(blocks)
    assert abs(len(audio) - 48000) <= 512
    assert all(len(b) == 512 for b in blocks[:-1])
    # the pitch survives: aubio 0.4.9 YIN on the resampled stream reads 440 Hz (ISO 16 A4)
    pitch = aubio.pitch("yinfast", 2048, 512, 48000)
    pitch.set_unit("Hz")
    f0 = [float(pitch(np.ascontiguousarray(audio[i : i + 512]))[0]) for i in range(0, 40000, 512)]
    assert 1200 * np.log2(np.median(f0[10:]) / 440.0) == pytest.approx(0.0, abs=1.0)


def test_c_recording_counts_what_a_full_ring_lost_and_records_again():
    # python-rtmixer's C callback stops recording when its ring is full (rtmixer.c, the
    # RECORD_RINGBUFFER case); the frames lost meanwhile follow from the stream clock (now
    # less the action's start) less the frames the action recorded
    from bench.sources import mic

    class Actions(set):
        """rtmixer's set of running actions, holding cffi pointers (compared by identity)."""

        def __contains__(self, action):
            return super().__contains__(id(action))

        def add(self, action):
            super().add(id(action))

    class FakeRing:
        def __init__(self, elementsize, size):
            self.elementsize, self.size, self.read_available = elementsize, size, 0

    class FakeRecorder:
        def __init__(self, **kw):
            self.kw, self.actions, self.time = kw, Actions(), 0.0

        def start(self):
            pass

        def record_ringbuffer(self, ring):
            self.last = types.SimpleNamespace(actual_time=self.time, done_frames=0)
            self.actions.add(self.last)
            return self.last

        def fetch_and_reset_stats(self):
            return types.SimpleNamespace(stats=types.SimpleNamespace(input_overflows=2))

    rt = types.SimpleNamespace(Recorder=FakeRecorder, RingBuffer=FakeRing)
    rec = mic._CRecording(rt, device=0, channels=1, sample_rate=48000, block_size=512,
                          ring_frames=96000, finished_callback=None)  # fmt: skip
    assert rec._ring.size == 131072  # the next power of two
    rec.start()
    first = rec.stream.last
    assert rec.pop(0.0) is None and rec.full_drops == 0  # recording, nothing waiting yet
    # the ring filled: the action ended after 12,000 frames while the clock ran 0.5 s
    first.done_frames = 12000
    rec.stream.actions.clear()
    rec.stream.time = 0.5
    assert rec.pop(0.5) is None
    assert rec.full_drops == 24  # (24,000 - 12,000) frames in blocks of 512, rounded up
    assert rec.stream.last is not first and rec.stream.last in rec.stream.actions  # recording again
    # driver overflows come from the callback's counters, fetched about once a second
    rec.pop(2.0)
    assert rec.overflows == 2


def test_mic_source_counts_c_callback_overflows_as_dropped_input():
    # with the C callback in use, the driver's overflows reach the source through the
    # recording's counters; they are dropped input like ring-full blocks (common practice:
    # a tuner that hides lost input misleads)
    from bench.sources.mic import MicSource

    src = MicSource(None, sample_rate=RATE, block_size=16, ring_blocks=2, clock=ManualClock())
    src._recording = types.SimpleNamespace(overflows=3, full_drops=1)  # noqa: SLF001
    assert (src.overflows, src.full_drops, src.dropped_blocks) == (3, 1, 4)
    src._close()  # noqa: SLF001 - a closed stream's counts are kept
    assert (src.overflows, src.full_drops, src.dropped_blocks) == (3, 1, 4)
