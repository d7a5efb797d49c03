"""``bench analyze``: recordings to frame logs and held-note summaries, end to end."""

from __future__ import annotations

import csv
import json
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from bench.analyze import analyse_file
from bench.cli import main
from bench.framelog import FRAME_LOG_COLUMNS, read_frame_log
from bench.tuning import TuningSettings

AUDIO = Path(__file__).resolve().parents[2] / "test_audio"


def _median_cents(rows: list[dict[str, str]], col: str = "cents") -> float:
    return float(np.median([float(r[col]) for r in rows if r[col]]))


def test_frame_log_is_exactly_the_published_format(tmp_path, capsys):
    out = tmp_path / "a4.csv"
    assert main(["analyze", str(AUDIO / "steady_a4_48k.wav"), "--csv", str(out)]) == 0
    with out.open(encoding="utf-8", newline="") as f:
        header = next(csv.reader(f))
    assert tuple(header[: len(FRAME_LOG_COLUMNS)]) == FRAME_LOG_COLUMNS
    rows = read_frame_log(out)
    hop = np.diff([float(r["time_s"]) for r in rows])
    assert np.all(hop > 0) and hop.max() <= 0.010 + 1e-9  # one frame per hop, hop <= 10 ms
    for r in rows:
        assert float(r["ready_s"]) >= float(r["time_s"])
        if not r["f0_hz"]:
            assert r["note"] == r["cents"] == r["register"] == ""
        else:
            assert r["register"] in ("steady", "weakening", "jumped")
    assert "A4" in capsys.readouterr().out


def test_steady_a4_reads_zero_cents_and_agrees_with_aubio(tmp_path):
    # The fixture is a 440.000 Hz tone (ISO 16:1975 A4); aubio's yinfft is an outside reference.
    import aubio

    out = tmp_path / "a4.csv"
    analyse_file(AUDIO / "steady_a4_48k.wav", TuningSettings(), csv_path=out)
    rows = [r for r in read_frame_log(out) if r["note"] == "A4"]
    ours = _median_cents(rows)
    assert abs(ours) < 0.1

    audio, rate = sf.read(AUDIO / "steady_a4_48k.wav", dtype="float32")
    hop = 512
    pitch = aubio.pitch("yinfft", 4096, hop, rate)
    pitch.set_unit("Hz")
    # aubio returns its own buffer: copy each value out at once
    est = np.array([float(pitch(audio[i : i + hop])[0]) for i in range(0, len(audio) - hop, hop)])
    aubio_cents = 1200 * np.log2(np.median(est[est > 400]) / 440.0)
    assert abs(ours - aubio_cents) < 1.0  # aubio's own resolution is about a cent here


def test_temperature_correction_worked_example(tmp_path):
    # REFERENCES §3 worked example: an instrument in tune at 20 °C plays +17.5 c sharp at 26 °C;
    # corrected to 20 °C the same reading is about 0.
    rate = 48000
    t = np.arange(int(1.0 * rate)) / rate
    freq = 440.0 * 2 ** (17.5 / 1200)
    tone = 0.1 * np.sin(2 * np.pi * freq * t) + 0.03 * np.sin(2 * np.pi * 2 * freq * t)
    path = tmp_path / "warm.wav"
    sf.write(path, tone.astype(np.float32), rate)
    out = tmp_path / "warm.csv"
    assert main(["analyze", str(path), "--csv", str(out), "--temp", "26", "--ref-temp", "20"]) == 0
    rows = [r for r in read_frame_log(out) if r["f0_hz"]]
    assert _median_cents(rows, "cents_raw") == pytest.approx(17.5, abs=0.05)
    assert abs(_median_cents(rows, "cents")) < 0.3
    assert rows[0]["temp_c"] == "26.00" and rows[0]["ref_temp_c"] == "20.00"


@pytest.mark.parametrize("rate", [8000, 192000])
def test_rates_outside_the_analyser_range_are_resampled(tmp_path, rate):
    # A sine of known frequency keeps its frequency through resampling (definition).
    t = np.arange(rate) / rate
    path = tmp_path / f"tone_{rate}.wav"
    sf.write(path, (0.2 * np.sin(2 * np.pi * 523.2511 * t)).astype(np.float32), rate)
    result = analyse_file(path, TuningSettings(), csv_path=tmp_path / "o.csv")
    assert any("resampled" in w for w in result.warnings)
    rows = [r for r in read_frame_log(tmp_path / "o.csv") if r["note"] == "C5"]
    assert len(rows) > 50
    assert abs(_median_cents(rows)) < 0.1  # C5 = 523.2511 Hz at A4 = 440 (REFERENCES §1)


def test_multichannel_is_mixed_to_mono(tmp_path):
    rate = 48000
    t = np.arange(rate) / rate
    six = np.stack([0.05 * np.sin(2 * np.pi * 349.2282 * t)] * 6, axis=1)
    path = tmp_path / "six.wav"
    sf.write(path, six.astype(np.float32), rate)
    result = analyse_file(path, TuningSettings())
    assert result.channels == 6
    assert [n.note for n in result.notes] == ["F4"]
    # six equal channels of amplitude 0.05 mix to a sine of RMS 0.05/sqrt(2): -29.03 dBFS
    assert result.notes[0].level_dbfs == pytest.approx(20 * math.log10(0.05 / math.sqrt(2)), abs=0.1)


def test_phrase_summary_lists_notes_and_register_events():
    truth = json.loads((AUDIO / "phrase_wren_48k_24bit.json").read_text())
    result = analyse_file(AUDIO / "phrase_wren_48k_24bit.wav", TuningSettings())
    held = [n.note for n in result.notes]
    for expected in ("F4", "G4", "A4", "C5"):
        assert expected in held
    kinds = [e.kind for n in result.notes for e in n.events if e.kind != "weakening"]
    assert kinds == [j["kind"] for j in truth["jumps"]]
    # each jump names the note it went to: the fixture's truth sounds 783.99 Hz and
    # 1046.50 Hz after them, G5 and C6 in equal temperament at A4 = 440 Hz (MIDI 79 and 84
    # in f = A4 2^((m - 69)/12), REFERENCES section 1), not the fingered G4 and C5
    sounding = [e.sounding_note for n in result.notes for e in n.events if e.kind != "weakening"]
    assert [j["sounding_f0_after_hz"] for j in truth["jumps"]] == [783.99, 1046.502]
    assert sounding == ["G5", "C6"]


def test_folder_with_bad_files_analyses_the_good_and_lists_the_bad(tmp_path, capsys):
    folder = tmp_path / "mixed"
    folder.mkdir()
    shutil.copy(AUDIO / "steady_a4_48k.wav", folder / "good.wav")
    for name in ("empty.wav", "not_audio.wav", "header_only.wav"):
        shutil.copy(AUDIO / "bad" / name, folder / name)
    status = main(["analyze", str(folder), "--csv-dir", str(tmp_path / "logs")])
    captured = capsys.readouterr()
    assert status == 1
    assert (tmp_path / "logs" / "good.csv").exists()
    assert "3 of 4 files could not be analysed" in captured.err
    for name in ("empty.wav", "not_audio.wav", "header_only.wav"):
        lines = [ln for ln in captured.err.splitlines() if name in ln and ln.startswith("error:")]
        assert len(lines) == 1


def test_missing_file_and_bad_options_give_one_line(tmp_path, capsys):
    assert main(["analyze", str(tmp_path / "nope.wav")]) == 1
    assert "no such file" in capsys.readouterr().err
    two = [str(AUDIO / "steady_a4_48k.wav"), str(AUDIO / "silence_48k.wav")]
    assert main(["analyze", *two, "--csv", str(tmp_path / "x.csv")]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: --csv takes one input") and "\n" not in err


def test_hum_silence_and_noise_yield_no_notes():
    for name in ("hum_50hz_48k.wav", "silence_48k.wav", "white_noise_48k.wav"):
        result = analyse_file(AUDIO / name, TuningSettings())
        assert result.voiced_frames == 0, name
        assert result.notes == ()
