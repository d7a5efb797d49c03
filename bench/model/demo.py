"""The demo instrument's notes, rendered from a geometry through the model.

The demo plays a built-in Wren (the alto, or the soprano for the soprano profile) with two
holes deliberately off (:data:`DEMO_HOLES_OFF_MM`: h3 bored 0.3 mm too small, h5 0.4 mm too
large), so that ``bench model suggest`` on the demo's captures finds those holes. The demo source
(:mod:`bench.sources.demo`) asks :func:`demo_notes` for the frequency of each note it plays
instead of keeping a table of its own.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

from bench.model.acoustics import air_at
from bench.model.geometry import Geometry, builtin_geometry
from bench.model.instrument import playing_frequencies
from bench.model.suggest import apply_cut

__all__ = [
    "DEMO_BORE_C",
    "DEMO_GEOMETRY",
    "DEMO_HOLES_OFF_MM",
    "DemoNote",
    "demo_geometry",
    "demo_notes",
]

DEMO_GEOMETRY = "wren-alto"
"""The built-in geometry the demo plays when no other is asked for."""
DEMO_HOLES_OFF_MM: Mapping[str, float] = {"h3": -0.3, "h5": 0.4}
"""Holes put off on purpose, by label: diameter change in mm (negative: too small)."""
DEMO_BORE_C = 25.0
"""Air in the demo's bore, degC: a bore warmed by breath in a 20 degC room."""


@dataclass(frozen=True, slots=True)
class DemoNote:
    """One note the demo plays.

    Attributes
    ----------
    name : str
        The fingering's name (its note).
    register : int >= 1
        The mode it sounds in.
    holes : str
        The fingering (x/o/h per hole).
    freq_hz : float, Hz
        What the off instrument plays, from the model.
    """

    name: str
    register: int
    holes: str
    freq_hz: float


def demo_geometry(off_mm: Mapping[str, float] = DEMO_HOLES_OFF_MM, geometry: str = DEMO_GEOMETRY) -> Geometry:
    """The demo's geometry: the built-in ``geometry`` with ``off_mm`` applied to its holes."""
    g = builtin_geometry(geometry)
    labels = [h.label for h in g.holes]
    for label, delta in off_mm.items():
        i = labels.index(label)
        g = apply_cut(g, i, "enlarge" if delta > 0 else "wax", abs(delta))
    return g


def demo_notes(
    temp_c: float = DEMO_BORE_C,
    rh_percent: float = 60.0,
    off_mm: Mapping[str, float] = DEMO_HOLES_OFF_MM,
    geometry: str = DEMO_GEOMETRY,
) -> list[DemoNote]:
    """Every fingering of the demo instrument in the mode it is named for, from the model.

    Parameters
    ----------
    temp_c : float, degC
        Air in the bore (25: a bore warmed by breath in a 20 degC room).
    rh_percent : float, percent
    off_mm : mapping of str to float
        Holes put off, by label (see :data:`DEMO_HOLES_OFF_MM`).
    geometry : str
        A built-in geometry's name (``wren-alto``, ``wren-soprano``).

    Returns
    -------
    list of DemoNote
        In the geometry's fingering order.

    Examples
    --------
    >>> notes = {n.name: n for n in demo_notes()}
    >>> round(notes["F4"].freq_hz)  # every hole closed: the holes put off do not matter
    349
    >>> notes["D5"].freq_hz < 587.33 * 2 ** (-5 / 1200)  # h3 too small: D5 is flat
    True
    >>> round({n.name: n for n in demo_notes(geometry="wren-soprano")}["C5"].freq_hz)
    523
    """
    g = demo_geometry(off_mm, geometry)
    air = air_at(temp_c, rh_percent)
    modes = max(f.register for f in g.fingerings)
    res = playing_frequencies(g, [f.holes for f in g.fingerings], air, modes)
    return [DemoNote(f.name, f.register, f.holes, float(res.freq_hz[i, f.register - 1]))
            for i, f in enumerate(g.fingerings)]
