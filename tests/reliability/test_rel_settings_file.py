"""Item 3 of the reliability issue: the settings file is the user's.

Reproduction (before): a settings.toml with one bad key (``tonic = "H"`` beside valid
``a4_hz = 415.0`` and ``temperament = "meantone4"``) lost every saved value, and the first
change on the screen rewrote the file with defaults (comments gone, no backup); a symlinked
settings.toml was replaced by a plain file; a file nested 100 000 levels deep stopped bench
with ``RecursionError``.

Outside references: TOML v1.0.0 (toml.io/en/v1.0.0): comments start with ``#`` and a table is
the key/value pairs below its ``[header]``; ``tomllib`` (Python standard library) is the reader
of record here. A4 = 415 Hz is the baroque pitch (*common practice*); "H" is the German name of
B and no pitch-class name in English notation (*common practice*).
"""

from __future__ import annotations

import dataclasses
import tomllib

import pytest

from bench.config import read_saved_settings, save_settings, settings_path

USER_FILE = """# my workshop settings: do not lose this comment
[tuning]
a4_hz = 415.0   # baroque pitch for the Wren
temperament = "meantone4"
tonic = "H"
favourite_wood = "boxwood"   # a key bench does not know

[workshop]
bench = 3
"""


@pytest.fixture
def user_file():
    path = settings_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(USER_FILE, encoding="utf-8")
    return path


def test_one_bad_key_falls_back_alone_and_is_reported(user_file, capsys):
    saved = read_saved_settings()
    assert saved.settings.a4_hz == 415.0
    assert saved.settings.temperament == "meantone4"
    assert saved.settings.tonic == "C"  # only the bad key keeps its default
    assert saved.from_file == {"a4_hz", "temperament"}
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("warning: saved setting tonic = 'H'")


def test_saving_keeps_comments_unknown_keys_and_a_backup(user_file, capsys):
    saved = read_saved_settings()
    save_settings(dataclasses.replace(saved.settings, temp_c=18.0))
    text = user_file.read_text(encoding="utf-8")
    assert "# my workshop settings: do not lose this comment" in text
    assert "a4_hz = 415.0   # baroque pitch for the Wren" in text  # unchanged line kept as it was
    assert 'favourite_wood = "boxwood"   # a key bench does not know' in text
    data = tomllib.loads(text)
    assert data["workshop"] == {"bench": 3}
    assert data["tuning"]["temp_c"] == 18.0 and data["tuning"]["tonic"] == "C"
    backup = user_file.with_name("settings.toml.bak")
    assert backup.read_text(encoding="utf-8") == USER_FILE


def test_a_linked_settings_file_stays_a_link_and_its_target_is_updated(tmp_path):
    target = tmp_path / "dotfiles" / "bench.toml"
    target.parent.mkdir()
    target.write_text("[tuning]\na4_hz = 442.0  # orchestra\n", encoding="utf-8")
    link = settings_path()
    link.parent.mkdir(parents=True, exist_ok=True)
    link.symlink_to(target)
    saved = read_saved_settings()
    assert saved.settings.a4_hz == 442.0
    save_settings(dataclasses.replace(saved.settings, tonic="F"))
    assert link.is_symlink() and link.resolve() == target.resolve()
    text = target.read_text(encoding="utf-8")
    assert "a4_hz = 442.0  # orchestra" in text and tomllib.loads(text)["tuning"]["tonic"] == "F"


@pytest.mark.parametrize(("depth", "words"), [(100_000, "more than"), (40_000, "too deep")])
def test_a_deeply_nested_file_is_refused_cleanly(capsys, depth, words):
    # 100 000 levels (the reproduction) is refused by the size limit; 40 000 levels fit in it
    # and reach the TOML reader, whose recursion is caught.
    path = settings_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    original = "x = " + "[" * depth + "]" * depth + "\n"
    path.write_text(original, encoding="utf-8")
    saved = read_saved_settings()  # no RecursionError
    assert saved.from_file == frozenset() and saved.settings.a4_hz == 440.0
    err = capsys.readouterr().err
    assert words in err and err.count("\n") == 1
    save_settings(dataclasses.replace(saved.settings, a4_hz=430.0))
    assert tomllib.loads(path.read_text(encoding="utf-8"))["tuning"]["a4_hz"] == 430.0
    assert path.with_name("settings.toml.bak").read_text(encoding="utf-8") == original  # kept


def test_headless_run_starts_with_a_deeply_nested_settings_file():
    from bench.cli import main

    path = settings_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("x = " + "[" * 100_000 + "]" * 100_000 + "\n", encoding="utf-8")
    assert main(["run", "--no-ui", "--input", "demo", "--duration", "0.3"]) == 0


@pytest.mark.timeout(30)
def test_a_settings_file_that_is_a_pipe_is_not_opened(capsys):
    import os

    path = settings_path()
    path.parent.mkdir(parents=True, exist_ok=True)
    os.mkfifo(path)
    saved = read_saved_settings()  # returns at once (a blocking open would hang here)
    assert saved.from_file == frozenset()
    assert "named pipe" in capsys.readouterr().err
