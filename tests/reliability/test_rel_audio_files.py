"""Audio files of every kind ``bench analyze`` may be handed: sample formats, rates, channel
counts, odd waveforms, damaged and non-audio files.

A file with a tone gives the tone's pitch (checked against the frequency it was made with: a
sine or square wave of f Hz has its fundamental at f Hz by definition); a damaged file gives one
line saying what is wrong. A folder of mixed files: the good ones are analysed, the bad ones
listed at the end, and the exit status is non-zero.
"""

from __future__ import annotations

import shutil
import statistics
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from bench.analyze import analyse_file
from bench.cli import main
from bench.errors import AudioFileError
from bench.framelog import read_frame_log
from bench.tuning import TuningSettings

pytestmark = pytest.mark.timeout(120)

REPO = Path(__file__).resolve().parents[2]
BAD_DIR = REPO / "test_audio" / "bad"
DURATION_S = 0.6
F0_HZ = 440.0


def _tone(sample_rate: int, freq_hz: float = F0_HZ, duration_s: float = DURATION_S, level: float = 0.5):
    t = np.arange(int(duration_s * sample_rate)) / sample_rate
    return level * np.sin(2 * np.pi * freq_hz * t)


def _square(sample_rate: int, freq_hz: float = F0_HZ):
    t = np.arange(int(DURATION_S * sample_rate)) / sample_rate
    # Exactly full scale: +1 for the first half of each period, -1 for the second.
    return np.where((t * freq_hz) % 1.0 < 0.5, 1.0, -1.0)


# name -> (writer of the file into a folder, expected fundamental in Hz)
def _writer(data_fn, sample_rate: int, subtype: str, fmt: str = "WAV", channels: int = 1, ext: str = "wav"):
    def write(folder: Path, name: str) -> Path:
        data = data_fn(sample_rate)
        if channels > 1:
            data = np.column_stack([data * (0.5 + 0.1 * c) for c in range(channels)])
        path = folder / f"{name}.{ext}"
        sf.write(str(path), data, sample_rate, subtype=subtype, format=fmt)
        return path

    return write


GOOD = {
    "pcm_u8": (_writer(_tone, 48000, "PCM_U8"), F0_HZ),
    "pcm_16": (_writer(_tone, 48000, "PCM_16"), F0_HZ),
    "pcm_24": (_writer(_tone, 48000, "PCM_24"), F0_HZ),
    "pcm_32": (_writer(_tone, 48000, "PCM_32"), F0_HZ),
    "float_32": (_writer(_tone, 48000, "FLOAT"), F0_HZ),
    "float_64": (_writer(_tone, 48000, "DOUBLE"), F0_HZ),
    "rate_8k": (_writer(_tone, 8000, "PCM_16"), F0_HZ),
    "rate_192k": (_writer(_tone, 192000, "PCM_24"), F0_HZ),
    "rate_44k1": (_writer(_tone, 44100, "PCM_16"), F0_HZ),
    "channels_6": (_writer(_tone, 48000, "PCM_16", channels=6), F0_HZ),
    "stereo_flac": (_writer(_tone, 48000, "PCM_16", fmt="FLAC", channels=2, ext="flac"), F0_HZ),
    "ogg_vorbis": (_writer(_tone, 48000, "VORBIS", fmt="OGG", ext="ogg"), F0_HZ),
    "square_full_scale": (_writer(_square, 48000, "FLOAT"), F0_HZ),
    "dc_offset": (_writer(lambda sr: _tone(sr, level=0.3) + 0.45, 48000, "FLOAT"), F0_HZ),
    "clipped": (_writer(lambda sr: np.clip(_tone(sr, level=3.0), -1, 1), 48000, "PCM_16"), F0_HZ),
    "over_full_scale_float": (_writer(lambda sr: _tone(sr, level=4.0), 48000, "FLOAT"), F0_HZ),
    "low_f3": (_writer(lambda sr: _tone(sr, 174.614), 48000, "PCM_16"), 174.614),  # F3, MIDI 53
    "high_c7": (_writer(lambda sr: _tone(sr, 2093.005), 96000, "PCM_24"), 2093.005),  # C7, MIDI 96
}


def _f0_of_rows(csv_path: Path) -> float:
    f0 = [float(r["f0_hz"]) for r in read_frame_log(csv_path) if r["f0_hz"]]
    assert len(f0) >= 10, f"only {len(f0)} voiced frames"
    return statistics.median(f0)


@pytest.mark.parametrize("name", sorted(GOOD))
def test_good_file_reads_the_pitch_it_was_made_with(tmp_path, name):
    write, freq_hz = GOOD[name]
    path = write(tmp_path, name)
    csv_path = tmp_path / f"{name}.csv"
    result = analyse_file(path, TuningSettings(), csv_path=csv_path)
    assert result.frames > 0
    cents = 1200 * np.log2(_f0_of_rows(csv_path) / freq_hz)
    # A 1-cent window is the tuner's working resolution (common practice); lossy Vorbis and an
    # 8-bit or 8 kHz file still carry the fundamental exactly.
    assert abs(cents) < 1.0, f"{name}: {cents:+.2f} cents"
    if name in ("clipped", "square_full_scale", "over_full_scale_float"):
        rows = read_frame_log(csv_path)
        assert any(r["clipped"] == "1" for r in rows), "full-scale samples not flagged"


# Damaged files -> one line naming the file and what is wrong (AudioFileError), or an analysis
# whose warnings say what was wrong.
def _bad_bytes(data: bytes):
    def write(folder: Path, name: str) -> Path:
        path = folder / f"{name}.wav"
        path.write_bytes(data)
        return path

    return write


def _copy_bad(name: str):
    def write(folder: Path, _: str) -> Path:
        return Path(shutil.copy(BAD_DIR / name, folder / name))

    return write


def _cut_flac(folder: Path, name: str) -> Path:
    full = folder / "full.flac"
    sf.write(str(full), _tone(48000, duration_s=2.0), 48000, subtype="PCM_16", format="FLAC")
    data = full.read_bytes()
    full.unlink()
    path = folder / f"{name}.flac"
    path.write_bytes(data[: len(data) // 2])  # a half-copied recording
    return path


def _cut_wav(folder: Path, name: str) -> Path:
    full = folder / "full.wav"
    sf.write(str(full), _tone(48000, duration_s=2.0), 48000, subtype="PCM_24")
    data = full.read_bytes()
    full.unlink()
    path = folder / f"{name}.wav"
    path.write_bytes(data[: len(data) // 2 + 1])  # cut mid-sample
    return path


def _riff_junk(folder: Path, name: str) -> Path:
    path = folder / f"{name}.wav"
    rng = np.random.default_rng(5)
    path.write_bytes(b"RIFF\xff\xff\xff\x7fWAVEfmt " + rng.bytes(400))
    return path


def _folder_named_wav(folder: Path, name: str) -> Path:
    path = folder / f"{name}.wav"
    path.mkdir()
    return path


def _dangling_link(folder: Path, name: str) -> Path:
    path = folder / f"{name}.wav"
    path.symlink_to(folder / "gone.wav")
    return path


def _silence_long_enough(folder: Path, name: str) -> Path:
    path = folder / f"{name}.flac"
    sf.write(str(path), np.zeros(48000 * 5), 48000, subtype="PCM_16", format="FLAC")
    return path


BAD = {
    # name: (writer, "error" -> AudioFileError expected; "warn" -> analysed with a warning;
    #        "salvage" -> warned, and the tone before the cut still analysed; "none" -> no notes)
    "empty": (_copy_bad("empty.wav"), "error"),
    "header_only": (_copy_bad("header_only.wav"), "error"),
    "truncated": (_copy_bad("truncated.wav"), "warn"),
    "not_audio": (_copy_bad("not_audio.wav"), "error"),
    "nan_samples_float": (_copy_bad("nan_samples_float.wav"), "warn"),
    "single_sample": (_copy_bad("single_sample.wav"), "warn"),
    "zero_bytes_named_flac": (lambda d, n: (d / f"{n}.flac").write_bytes(b"") or d / f"{n}.flac", "error"),
    "riff_junk": (_riff_junk, "error"),
    "half_copied_flac": (_cut_flac, "salvage"),
    "cut_mid_sample_wav": (_cut_wav, "salvage"),
    "folder_named_wav": (_folder_named_wav, "error"),
    "dangling_link": (_dangling_link, "error"),
    "text_with_wav_name": (_bad_bytes("time_s,f0_hz\r\n0,440\r\n".encode()), "error"),
    "silence_5s": (_silence_long_enough, "none"),
}


@pytest.mark.parametrize("name", sorted(BAD))
def test_damaged_file_gives_one_line_or_a_warned_analysis(tmp_path, name):
    write, expect = BAD[name]
    path = write(tmp_path, name)
    if expect == "error":
        with pytest.raises(AudioFileError) as info:
            analyse_file(path, TuningSettings())
        message = str(info.value)
        assert "\n" not in message and path.name in message, message
        return
    result = analyse_file(path, TuningSettings(), csv_path=tmp_path / "out.csv")
    assert all("\n" not in w for w in result.warnings)
    if expect in ("warn", "salvage"):
        assert result.warnings, "a damaged file analysed without saying what was wrong"
    if expect == "salvage":
        assert any("cut short" in w for w in result.warnings), result.warnings
        # Of the 2 s tone about half was copied; most of that half must still be analysed.
        assert result.duration_s > 0.7, result.duration_s
        assert result.voiced_frames > 0.6 / 0.005 * 0.5
    if expect == "none":
        assert result.notes == () and result.voiced_frames == 0
    if expect == "salvage":
        # What survived of the tone still reads 440 Hz.
        cents = 1200 * np.log2(_f0_of_rows(tmp_path / "out.csv") / F0_HZ)
        assert abs(cents) < 1.0
    rows = read_frame_log(tmp_path / "out.csv")
    assert len(rows) == result.frames


def test_a_cut_short_wav_says_how_much_the_header_promised():
    # bad/README: the header claims 48 000 data bytes, the file holds 1001.
    result = analyse_file(BAD_DIR / "truncated.wav", TuningSettings())
    assert any("promises 48000 bytes" in w and "holds 1001" in w for w in result.warnings), result.warnings


def test_nan_and_inf_samples_are_reported_and_the_rest_analysed(tmp_path):
    # bad/README: samples 1000-1099 NaN, sample 2000 +inf -> 101 non-finite samples.
    result = analyse_file(BAD_DIR / "nan_samples_float.wav", TuningSettings())
    assert any("101 non-finite samples" in w for w in result.warnings), result.warnings


def test_folder_of_mixed_files_analyses_the_good_and_lists_the_bad(tmp_path, capsys):
    folder = tmp_path / "takes"
    folder.mkdir()
    good = [GOOD[n][0](folder, n) for n in ("pcm_16", "rate_8k", "channels_6")]
    bad = [BAD[n][0](folder, n) for n in ("empty", "not_audio", "riff_junk", "zero_bytes_named_flac")]
    (folder / "readme.txt").write_text("not a recording")  # not an audio suffix: not tried
    status = main(["analyze", str(folder), "--csv-dir", str(tmp_path / "csv")])
    out, err = capsys.readouterr()
    assert status != 0
    for path in good:
        assert f"{path}:" in out  # its summary
        assert (tmp_path / "csv" / f"{path.stem}.csv").exists()
    tail = err[err.index("could not be analysed:"):]
    assert f"{len(bad)} of {len(good) + len(bad)} files could not be analysed" in err
    for path in bad:
        assert str(path) in tail, (path, tail)
    assert "readme.txt" not in out + err
    assert "Traceback" not in out + err


def test_all_good_folder_exits_0(tmp_path, capsys):
    for n in ("pcm_24", "float_32"):
        GOOD[n][0](tmp_path, n)
    assert main(["analyze", str(tmp_path)]) == 0
    assert capsys.readouterr().out.count(" frames voiced") == 2


def test_folder_run_repeats_the_warnings_of_damaged_but_analysed_files_at_the_end(tmp_path, capsys):
    folder = tmp_path / "takes"
    folder.mkdir()
    GOOD["pcm_16"][0](folder, "pcm_16")
    cut = _cut_flac(folder, "half_copied")
    assert main(["analyze", str(folder)]) == 0  # everything could be analysed
    err = capsys.readouterr().err
    tail = err[err.index("warning(s) in the files analysed:"):]
    assert f"{cut}: stopped reading at" in tail
    assert "pcm_16" not in tail
