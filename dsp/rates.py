"""Sample rates the analyser takes: the one place the accepted range is written."""

from __future__ import annotations

__all__ = ["MAX_SAMPLE_RATE", "MIN_SAMPLE_RATE", "RESAMPLE_RATE"]

MIN_SAMPLE_RATE = 16000
"""Lowest sample rate the analyser takes, Hz."""
MAX_SAMPLE_RATE = 96000
"""Highest sample rate the analyser takes, Hz."""
RESAMPLE_RATE = 48000
"""Rate a recording outside the range is resampled to before analysis, Hz."""
