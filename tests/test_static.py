"""The static checks the project keeps at zero: mypy in strict mode over ``bench/`` and ``dsp/``
(configured in pyproject.toml) and ruff with its default rules. Both tools are pinned in the
``test`` extra, so a new release of either cannot turn the suite red by itself."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", *args], cwd=ROOT, capture_output=True, text=True, timeout=600)


def test_mypy_strict_reports_nothing():
    res = _run("mypy")
    assert res.returncode == 0, res.stdout[-4000:] + res.stderr[-2000:]
    assert "Success: no issues found" in res.stdout


def test_ruff_reports_nothing():
    res = _run("ruff", "check", "bench", "dsp")
    assert res.returncode == 0, res.stdout[-4000:] + res.stderr[-2000:]
