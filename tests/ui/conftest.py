"""Shared pieces of the screen tests: an app that records its notifications, a fake engine."""

from __future__ import annotations

from pathlib import Path

import pytest

from bench.tuning import TuningSettings
from bench.ui.app import BenchApp
from ui_fakes import FakeEngine


class RecordingApp(BenchApp):
    """The bench app, keeping every notification as (message, severity)."""

    def __init__(self, *args, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self.notes: list[tuple[str, str]] = []

    def notify(self, message, *, title="", severity="information", timeout=None, markup=True):
        self.notes.append((str(message), severity))
        return super().notify(message, title=title, severity=severity, timeout=timeout, markup=markup)

    def errors(self) -> list[str]:
        return [m for m, s in self.notes if s == "error"]


@pytest.fixture
def engine() -> FakeEngine:
    return FakeEngine(TuningSettings())


@pytest.fixture
def make_app(tmp_path: Path):
    def make(engine, **kwargs) -> RecordingApp:
        kwargs.setdefault("log_dir", tmp_path / "logs")
        kwargs.setdefault("settings_path", tmp_path / "settings.toml")
        return RecordingApp(engine, **kwargs)

    return make


async def until(pilot, condition, timeout_s: float = 10.0) -> None:
    """Let the app run until ``condition()`` holds; fail after ``timeout_s`` of waiting."""
    waited = 0.0
    while not condition():
        await pilot.pause(0.05)
        waited += 0.05
        assert waited < timeout_s, "the screen did not get there in time"
