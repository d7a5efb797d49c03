"""Note names for the workflow modules, spelled and parsed by the tuning model
(:mod:`bench.tuning.notes`: ``C4``, ``F#5``, ``Bb3``; C4 = MIDI 60), and MIDI numbers of
frequencies in equal temperament.
"""

from __future__ import annotations

import math

from bench.tuning import notes as _notes


def parse_note(text: str) -> int:
    """MIDI number of a note name in scientific pitch notation.

    Raises
    ------
    SettingsError
        ``text`` is not a note name.

    Examples
    --------
    >>> parse_note("F4"), parse_note("Bb3"), parse_note("C#5")
    (65, 58, 73)
    """
    return _notes.parse_note(text)


def note_name(midi: int, flats: bool = False) -> str:
    """Note name of a MIDI number (sharps unless ``flats``).

    Examples
    --------
    >>> note_name(65), note_name(70), note_name(70, flats=True)
    ('F4', 'A#4', 'Bb4')
    """
    return _notes.note_name(int(midi), flats=flats)


def midi_of_freq(freq_hz: float, a4_hz: float = 440.0) -> int:
    """Nearest equal-tempered MIDI number of a frequency.

    Examples
    --------
    >>> midi_of_freq(349.23), midi_of_freq(415.0, a4_hz=415.0)
    (65, 69)
    """
    return round(69 + 12 * math.log2(freq_hz / a4_hz))


def freq_of_midi(midi: int, a4_hz: float = 440.0) -> float:
    """Equal-tempered frequency of a MIDI number, Hz.

    >>> round(freq_of_midi(65), 3)
    349.228
    """
    return float(a4_hz * 2.0 ** ((midi - 69) / 12))
