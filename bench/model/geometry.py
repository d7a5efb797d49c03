"""Instrument geometry files: the bore, the top, the tone holes and the fingerings.

The format is bench's own TOML. Distances are millimetres from the blown end (the top) down the
bore; diameters are inner diameters in millimetres::

    [instrument]
    name = "test-tube"
    title = "a plain tube"              # optional
    [bore]
    points_mm = [[0, 14.0], [300, 14.0]]   # [distance from the blown end, inner diameter]
    [top]
    kind = "open"                       # "open": a plain unflanged open end; "window": see below
    [[holes]]                           # from the top down
    position_mm = 200.0                 # centre of the hole
    diameter_mm = 6.0                   # or inner_diameter_mm and outer_diameter_mm (undercut)
    chimney_mm = 3.0                    # wall thickness at the hole
    label = "h1"                        # optional
    thumb = false                       # optional: the hole is on the back, under the thumb
    [fingerings]                        # one letter per hole in [[holes]] order
    closed = "x"                        # x closed, o open, h half-covered
    open = "o"
    "G#5" = { holes = "x", register = 2 }   # a fingering that sounds its name in mode 2

A duct flute's top is a window::

    [top]
    kind = "window"
    width_mm = 12.0                     # across the bore
    length_mm = 4.5                     # from the channel exit to the edge
    end_correction_mm = 7.0             # optional; fitted from captures (see bench.model.fit)

Every error is one :class:`~bench.errors.GeometryError` line naming the file, the key and what
to do.
"""

from __future__ import annotations

import math
import re
import tomllib
from dataclasses import dataclass
from importlib import resources
from itertools import pairwise
from pathlib import Path
from typing import Any, Literal

from bench.errors import GeometryError

__all__ = [
    "BUILTIN_GEOMETRIES",
    "MAX_FILE_BYTES",
    "PROFILE_GEOMETRIES",
    "Fingering",
    "Geometry",
    "Hole",
    "Top",
    "builtin_geometry",
    "geometry_for_profile",
    "geometry_to_toml",
    "load_geometry",
    "parse_geometry_text",
]

MAX_FILE_BYTES = 256 * 1024
"""Largest geometry file read, bytes (a real instrument needs a few kilobytes)."""

BUILTIN_GEOMETRIES: dict[str, str] = {
    "wren-alto": "wren_alto.toml",
    "wren-soprano": "wren_soprano.toml",
}
"""Built-in geometries of the invented Hollin Lane Flute Works, by name -> package data file."""
PROFILE_GEOMETRIES: dict[str, str] = {"alto": "wren-alto", "soprano": "wren-soprano"}
"""The built-in geometry of an instrument profile, by profile name (the other profiles have none)."""

HoleState = Literal["x", "o", "h"]
_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.#-]*$")
_TOML_LINE_RE = re.compile(r"\(at line (\d+), column \d+\)")


@dataclass(frozen=True, slots=True)
class Hole:
    """One tone hole.

    Attributes
    ----------
    position_mm : float > 0, mm
        Distance of the hole's centre from the blown end.
    inner_diameter_mm : float > 0, mm
        Diameter where the hole meets the bore (larger than the outer one when undercut).
    outer_diameter_mm : float > 0, mm
        Diameter at the outside of the wall, where the finger covers it.
    chimney_mm : float > 0, mm
        Height of the hole's chimney (the wall thickness at the hole).
    label : str
        Name shown in tables (``h1``, ``thumb`` ...).
    thumb : bool
        True for the thumb hole on the back of the instrument.
    """

    position_mm: float
    inner_diameter_mm: float
    outer_diameter_mm: float
    chimney_mm: float
    label: str
    thumb: bool = False

    @property
    def undercut(self) -> bool:
        """True when the hole widens towards the bore."""
        return self.inner_diameter_mm != self.outer_diameter_mm


@dataclass(frozen=True, slots=True)
class Top:
    """The blown end.

    Attributes
    ----------
    kind : "open" | "window"
        ``open``: a plain unflanged open end of the bore's top diameter; ``window``: a duct
        flute's window, an inertance of ``end_correction_mm`` of air over the window's area.
    width_mm, length_mm : float > 0, mm
        Window size (``window`` only); its area is their product.
    end_correction_mm : float >= 0, mm
        Length of air over the window's area that moves with the window's opening (its
        inertance, Ernoult & Fabre 2017); fit it from captures.
    """

    kind: Literal["open", "window"] = "open"
    width_mm: float = 0.0
    length_mm: float = 0.0
    end_correction_mm: float = 0.0

    @property
    def area_mm2(self) -> float:
        """Window area, mm^2 (0 for an open top)."""
        return self.width_mm * self.length_mm


@dataclass(frozen=True, slots=True)
class Fingering:
    """One fingering: which holes are closed, and in which mode it sounds its named note.

    Attributes
    ----------
    name : str
        Its name: a note name (``F4``, ``G#5``) or any word (``closed``).
    holes : str
        One letter per hole in the geometry's order: ``x`` closed, ``o`` open, ``h`` half.
    register : int >= 1
        The mode (1 fundamental, 2 octave, 3 twelfth) in which it sounds its named note.
    """

    name: str
    holes: str
    register: int = 1


@dataclass(frozen=True, slots=True)
class Geometry:
    """An instrument's geometry (see the module docstring for the file format).

    Attributes
    ----------
    name, title : str
    bore_mm : tuple of (float, float)
        (distance from the blown end, inner diameter) in mm, rising distance, first at 0.
    top : Top
    holes : tuple of Hole
        From the top down.
    fingerings : tuple of Fingering
    source : str
        Where it was read from.
    """

    name: str
    title: str
    bore_mm: tuple[tuple[float, float], ...]
    top: Top
    holes: tuple[Hole, ...] = ()
    fingerings: tuple[Fingering, ...] = ()
    source: str = "<geometry>"

    @property
    def length_mm(self) -> float:
        """Length of the bore from the blown end to the foot, mm."""
        return self.bore_mm[-1][0]

    def diameter_at(self, position_mm: float) -> float:
        """Inner bore diameter at a distance from the blown end (linear between points), mm."""
        pts = self.bore_mm
        for (z0, d0), (z1, d1) in pairwise(pts):
            if z0 <= position_mm <= z1:
                return d0 if z1 == z0 else d0 + (d1 - d0) * (position_mm - z0) / (z1 - z0)
        return pts[-1][1] if position_mm > pts[-1][0] else pts[0][1]

    def fingering(self, name: str) -> Fingering:
        """The fingering of that name; GeometryError naming the choices if there is none."""
        for f in self.fingerings:
            if f.name == name:
                return f
        raise GeometryError(
            f"{self.source}: no fingering {name!r}; use one of "
            + ", ".join(f.name for f in self.fingerings)
        )


# --- reading -----------------------------------------------------------------------------

_TOP_KEYS = {"instrument", "bore", "top", "holes", "fingerings"}
_INSTRUMENT_KEYS = {"name", "title"}
_BORE_KEYS = {"points_mm"}
_TOP_OPEN_KEYS = {"kind"}
_TOP_WINDOW_KEYS = {"kind", "width_mm", "length_mm", "area_mm2", "end_correction_mm"}
_HOLE_KEYS = {
    "position_mm", "diameter_mm", "inner_diameter_mm", "outer_diameter_mm", "chimney_mm",
    "label", "thumb",
}  # fmt: skip
_FINGERING_KEYS = {"holes", "register"}
_WINDOW_END_CORRECTION_PER_RADIUS = 1.7
"""Default window end correction in window radii when none is given (a starting guess for the
fit; the radiation term alone is 0.695 R_w, Ernoult & Fabre 2017, and the channel and edge add
about as much again -- a modelling choice, from memory)."""


class _Reader:
    """Checks one parsed TOML document, raising one-line errors that name file and key."""

    def __init__(self, where: str) -> None:
        self.where = where

    def fail(self, key: str, message: str) -> GeometryError:
        return GeometryError(f"{self.where}: {key}: {message}")

    def table(self, data: dict[str, Any], key: str, required: bool = True) -> dict[str, Any]:
        value = data.get(key)
        if value is None and not required:
            return {}
        if not isinstance(value, dict):
            raise self.fail(f"[{key}]", f"missing or not a table; add a [{key}] section")
        return value

    def only(self, table: dict[str, Any], allowed: set[str], where: str) -> None:
        for key in table:
            if key not in allowed:
                raise self.fail(
                    f"{where}.{key}", f"unknown key; use one of {', '.join(sorted(allowed))}"
                )

    def number(
        self, table: dict[str, Any], key: str, where: str, minimum: float = 0.0,
        maximum: float = 10000.0, required: bool = True, default: float = 0.0,
        inclusive: bool = False,
    ) -> float:
        if key not in table:
            if required:
                raise self.fail(f"{where}.{key}", "missing; add it (a number of millimetres)")
            return default
        value = table[key]
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise self.fail(f"{where}.{key}", f"{value!r} is not a number; write e.g. {key} = 6.0")
        v = float(value)
        low_ok = v >= minimum if inclusive else v > minimum
        if not (math.isfinite(v) and low_ok and v <= maximum):
            rel = ">=" if inclusive else ">"
            raise self.fail(
                f"{where}.{key}", f"{value!r} is out of range; give a value {rel} {minimum:g} and <= {maximum:g}"
            )
        return v


def parse_geometry_text(text: str, where: str = "<geometry>") -> Geometry:
    """Build a :class:`Geometry` from TOML text (format: module docstring).

    Parameters
    ----------
    text : str
        The TOML document.
    where : str
        File name used in error messages.

    Returns
    -------
    Geometry

    Raises
    ------
    GeometryError
        One line: ``<where>: <key>: <what is wrong>; <what to do>``.

    Examples
    --------
    >>> g = parse_geometry_text('[instrument]\\nname = "t"\\n[bore]\\npoints_mm = [[0, 14], [300, 14]]\\n'
    ...                         '[top]\\nkind = "open"\\n')
    >>> g.length_mm, g.diameter_at(150.0), g.holes
    (300.0, 14.0, ())
    """
    r = _Reader(where)
    if len(text.encode("utf-8", errors="replace")) > MAX_FILE_BYTES:
        raise r.fail("file", f"larger than {MAX_FILE_BYTES // 1024} KiB; a geometry is a few KiB, check the file")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = _TOML_LINE_RE.search(msg)
        line = m.group(1) if m else "1"
        raise r.fail(f"line {line}", f"not valid TOML ({_TOML_LINE_RE.sub('', msg).strip()}); fix the syntax") from None
    except (ValueError, RecursionError):
        raise r.fail("file", "not valid TOML (a huge number or brackets nested too deep); fix the file") from None
    for key in data:
        if key not in _TOP_KEYS:
            raise r.fail(key, f"unknown section; use {', '.join(sorted(_TOP_KEYS))}")

    inst = r.table(data, "instrument")
    r.only(inst, _INSTRUMENT_KEYS, "instrument")
    name = inst.get("name")
    if not isinstance(name, str) or not _NAME_RE.match(name):
        raise r.fail("instrument.name", f"{name!r} is missing or not a plain name; write e.g. name = \"wren-alto\"")
    title = inst.get("title", name)
    if not isinstance(title, str):
        raise r.fail("instrument.title", f"{title!r} is not text; write title = \"...\" in quotes")

    bore = r.table(data, "bore")
    r.only(bore, _BORE_KEYS, "bore")
    pts_raw = bore.get("points_mm")
    if not isinstance(pts_raw, list) or len(pts_raw) < 2 or len(pts_raw) > 1000:
        raise r.fail("bore.points_mm", "needs 2 to 1000 [distance, diameter] pairs, e.g. [[0, 14.0], [300, 14.0]]")
    pts: list[tuple[float, float]] = []
    for i, p in enumerate(pts_raw):
        if (
            not isinstance(p, list) or len(p) != 2
            or any(isinstance(v, bool) or not isinstance(v, int | float) for v in p)
        ):
            raise r.fail(f"bore.points_mm[{i}]", f"{p!r} is not a [distance, diameter] pair of numbers")
        z, d = float(p[0]), float(p[1])
        if not (math.isfinite(z) and math.isfinite(d) and 0.5 <= d <= 500.0 and 0.0 <= z <= 10000.0):
            raise r.fail(f"bore.points_mm[{i}]", f"{p!r} is out of range; distance 0-10000 mm, diameter 0.5-500 mm")
        if i == 0 and z != 0.0:
            raise r.fail("bore.points_mm[0]", f"starts at {z:g} mm; the first point is the blown end, distance 0")
        if pts and z <= pts[-1][0]:
            raise r.fail(f"bore.points_mm[{i}]", f"distance {z:g} mm does not rise; list points from the top down")
        pts.append((z, d))

    top_t = r.table(data, "top")
    kind = top_t.get("kind")
    if kind == "open":
        r.only(top_t, _TOP_OPEN_KEYS, "top")
        top = Top("open")
    elif kind == "window":
        r.only(top_t, _TOP_WINDOW_KEYS, "top")
        if "area_mm2" in top_t:
            if "width_mm" in top_t or "length_mm" in top_t:
                raise r.fail("top.area_mm2", "given with width_mm/length_mm; give either the area or the two sides")
            area = r.number(top_t, "area_mm2", "top", maximum=1e5)
            width = length = math.sqrt(area)
        else:
            width = r.number(top_t, "width_mm", "top", maximum=500.0)
            length = r.number(top_t, "length_mm", "top", maximum=500.0)
        default_ec = _WINDOW_END_CORRECTION_PER_RADIUS * math.sqrt(width * length / math.pi)
        ec = r.number(top_t, "end_correction_mm", "top", required=False, default=default_ec,
                      maximum=1000.0, inclusive=True)
        top = Top("window", width, length, ec)
    else:
        raise r.fail("top.kind", f"{kind!r} is not a top; use \"open\" or \"window\"")

    holes_raw = data.get("holes", [])
    if not isinstance(holes_raw, list) or any(not isinstance(h, dict) for h in holes_raw):
        raise r.fail("holes", "must be [[holes]] tables, one per hole")
    if len(holes_raw) > 64:
        raise r.fail("holes", f"{len(holes_raw)} holes; at most 64 are modelled")
    length_mm = pts[-1][0]
    holes: list[Hole] = []
    for i, h in enumerate(holes_raw):
        w = f"holes[{i}]"
        r.only(h, _HOLE_KEYS, w)
        pos = r.number(h, "position_mm", w, maximum=length_mm)
        if pos >= length_mm:
            raise r.fail(f"{w}.position_mm", f"{pos:g} mm is not inside the bore (length {length_mm:g} mm)")
        if holes and pos <= holes[-1].position_mm:
            raise r.fail(f"{w}.position_mm", f"{pos:g} mm is not below the hole before it; list holes from the top down")
        if "diameter_mm" in h:
            if "inner_diameter_mm" in h or "outer_diameter_mm" in h:
                raise r.fail(f"{w}.diameter_mm", "given with inner/outer diameters; give diameter_mm or both of those")
            d_in = d_out = r.number(h, "diameter_mm", w, maximum=200.0)
        else:
            if "inner_diameter_mm" not in h and "outer_diameter_mm" not in h:
                raise r.fail(f"{w}.diameter_mm", "missing; add diameter_mm (or inner_diameter_mm and outer_diameter_mm)")
            d_in = r.number(h, "inner_diameter_mm", w, maximum=200.0)
            d_out = r.number(h, "outer_diameter_mm", w, maximum=200.0)
        chimney = r.number(h, "chimney_mm", w, maximum=200.0)
        bore_d = _diameter_at(pts, pos)
        if d_in >= bore_d:
            raise r.fail(f"{w}.{'diameter_mm' if d_in == d_out else 'inner_diameter_mm'}",
                         f"{d_in:g} mm is not smaller than the bore there ({bore_d:.3g} mm); give a smaller hole")
        label = h.get("label", f"h{i + 1}")
        if not isinstance(label, str) or not label.strip():
            raise r.fail(f"{w}.label", f"{label!r} is not a name; write label = \"h1\"")
        if any(prev.label == label for prev in holes):
            raise r.fail(f"{w}.label", f"{label!r} is already the label of another hole; give each hole its own label")
        thumb = h.get("thumb", False)
        if not isinstance(thumb, bool):
            raise r.fail(f"{w}.thumb", f"{thumb!r} is not true or false")
        holes.append(Hole(pos, d_in, d_out, chimney, label, thumb))

    fing_t = r.table(data, "fingerings", required=False)
    fingerings: list[Fingering] = []
    for fname, value in fing_t.items():
        w = f"fingerings.{fname}"
        if not _NAME_RE.match(fname) or len(fname) > 40:
            raise r.fail(w, "a fingering's name is letters, digits, #, ., - or _ (a note such as \"G#5\", or a word)")
        register = 1
        if isinstance(value, dict):
            r.only(value, _FINGERING_KEYS, w)
            reg = value.get("register", 1)
            if isinstance(reg, bool) or not isinstance(reg, int) or not 1 <= reg <= 8:
                raise r.fail(f"{w}.register", f"{reg!r} is not a mode 1-8; write register = 2 for the octave")
            register = reg
            value = value.get("holes")
        if not isinstance(value, str):
            raise r.fail(w, f"{value!r} is not a string of x/o/h; write e.g. {fname} = \"{'x' * len(holes)}\"")
        pattern = value.strip().replace(" ", "")
        if len(pattern) != len(holes) or any(c not in "xoh" for c in pattern):
            raise r.fail(
                w,
                f"{value!r} must have one letter x, o or h for each of the {len(holes)} holes, "
                f"e.g. \"{'x' * len(holes)}\"",
            )
        fingerings.append(Fingering(fname, pattern, register))
    return Geometry(name, title, tuple(pts), top, tuple(holes), tuple(fingerings), where)


def _diameter_at(pts: list[tuple[float, float]], z: float) -> float:
    """Bore diameter at ``z`` by linear interpolation, mm."""
    for (z0, d0), (z1, d1) in pairwise(pts):
        if z0 <= z <= z1:
            return d0 + (d1 - d0) * (z - z0) / (z1 - z0)
    return pts[-1][1]


def load_geometry(path: str | Path) -> Geometry:
    """Read a geometry file, or a built-in geometry by name (``wren-alto``).

    Parameters
    ----------
    path : str or Path
        A ``.toml`` file, or a name in :data:`BUILTIN_GEOMETRIES`.

    Raises
    ------
    GeometryError
        Missing, unreadable, too large or invalid file (one line).
    """
    text_path = str(path)
    if text_path in BUILTIN_GEOMETRIES:
        return builtin_geometry(text_path)
    p = Path(path)
    if not p.exists() and not p.is_symlink():
        raise GeometryError(f"{p}: file: not found; give a geometry .toml or one of {', '.join(BUILTIN_GEOMETRIES)}")
    from bench.safeio import FileRefused, read_text_file

    try:  # bounded, and only a regular file: a pipe or /dev/zero is refused, never read forever
        text = read_text_file(p, limit_bytes=MAX_FILE_BYTES)
    except FileRefused as exc:
        raise GeometryError(f"{p}: file: cannot be used ({exc}); give a geometry .toml") from None
    return parse_geometry_text(text, str(p))


def builtin_geometry(name: str) -> Geometry:
    """A built-in geometry of the invented Hollin Lane Flute Works (``wren-alto`` ...)."""
    if name not in BUILTIN_GEOMETRIES:
        raise GeometryError(f"{name}: file: no such built-in geometry; use one of {', '.join(BUILTIN_GEOMETRIES)}")
    text = resources.files("bench.model").joinpath(BUILTIN_GEOMETRIES[name]).read_text(encoding="utf-8")
    return parse_geometry_text(text, f"built-in {name}")


def geometry_for_profile(profile_name: str) -> str | None:
    """Name of the built-in geometry of an instrument profile, None when it has none.

    >>> geometry_for_profile("soprano"), geometry_for_profile("tenor")
    ('wren-soprano', None)
    """
    return PROFILE_GEOMETRIES.get(profile_name)


def geometry_to_toml(geometry: Geometry, header: str = "") -> str:
    """The geometry as TOML text that :func:`parse_geometry_text` reads back to the same geometry.

    Parameters
    ----------
    geometry : Geometry
    header : str
        Comment lines put first (each line gets a ``#``).

    Examples
    --------
    >>> g = parse_geometry_text('[instrument]\\nname = "t"\\n[bore]\\npoints_mm = [[0, 14], [300, 14]]\\n'
    ...                         '[top]\\nkind = "open"\\n')
    >>> from dataclasses import replace
    >>> parse_geometry_text(geometry_to_toml(g)) == replace(g, source="<geometry>")
    True
    """
    import tomli_w

    top: dict[str, Any] = {"kind": geometry.top.kind}
    if geometry.top.kind == "window":
        top.update(width_mm=geometry.top.width_mm, length_mm=geometry.top.length_mm,
                   end_correction_mm=round(geometry.top.end_correction_mm, 4))
    holes: list[dict[str, Any]] = []
    for h in geometry.holes:
        entry: dict[str, Any] = {"label": h.label, "position_mm": h.position_mm}
        if h.undercut:
            entry.update(inner_diameter_mm=round(h.inner_diameter_mm, 4), outer_diameter_mm=round(h.outer_diameter_mm, 4))
        else:
            entry["diameter_mm"] = round(h.inner_diameter_mm, 4)
        entry["chimney_mm"] = h.chimney_mm
        if h.thumb:
            entry["thumb"] = True
        holes.append(entry)
    fingerings: dict[str, Any] = {
        f.name: f.holes if f.register == 1 else {"holes": f.holes, "register": f.register}
        for f in geometry.fingerings
    }
    doc: dict[str, Any] = {
        "instrument": {"name": geometry.name, "title": geometry.title},
        "bore": {"points_mm": [[z, d] for z, d in geometry.bore_mm]},
        "top": top,
    }
    if holes:
        doc["holes"] = holes
    if fingerings:
        doc["fingerings"] = fingerings
    comment = "".join(f"# {line}\n" for line in header.splitlines())
    return comment + tomli_w.dumps(doc)
