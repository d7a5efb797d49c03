"""Tuning model: notes, pitch standards, temperaments, air temperature correction.

Pure, like ``dsp``: no files are read here except by the explicit custom-temperament loader.
"""

from bench.tuning.mapping import NoteMapping, TuningSettings, map_frequency

__all__ = ["NoteMapping", "TuningSettings", "map_frequency"]
