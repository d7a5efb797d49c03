"""Geometry files: the minimal form reads exactly as written; bad input is one clear line."""

from __future__ import annotations

import pytest

from bench.errors import BenchError, GeometryError
from bench.model.geometry import MAX_FILE_BYTES, load_geometry, parse_geometry_text

MINIMAL = """\
[instrument]
name = "test-tube"
[bore]
points_mm = [[0, 14.0], [300, 14.0]]   # [distance from the blown end, inner diameter]
[top]
kind = "open"                          # a plain unflanged open end; "window" takes its own keys
[[holes]]                              # from the top down
position_mm = 200.0
diameter_mm = 6.0
chimney_mm = 3.0
[fingerings]                           # one letter per hole in [[holes]] order: x closed, o open, h half
closed = "x"
open = "o"
"""


def test_minimal_form_reads_exactly_as_written(tmp_path):
    path = tmp_path / "tube.toml"
    path.write_text(MINIMAL, encoding="utf-8")
    g = load_geometry(path)
    assert g.name == "test-tube"
    assert g.bore_mm == ((0.0, 14.0), (300.0, 14.0))
    assert g.top.kind == "open"
    assert len(g.holes) == 1
    h = g.holes[0]
    assert (h.position_mm, h.inner_diameter_mm, h.outer_diameter_mm, h.chimney_mm) == (200.0, 6.0, 6.0, 3.0)
    assert not h.undercut and not h.thumb
    assert [(f.name, f.holes, f.register) for f in g.fingerings] == [("closed", "x", 1), ("open", "o", 1)]
    assert g.source == str(path)


def test_window_undercut_thumb_and_register_keys():
    text = MINIMAL.replace('kind = "open"', 'kind = "window"\nwidth_mm = 12.0\nlength_mm = 4.0\nend_correction_mm = 6.5')
    text = text.replace("diameter_mm = 6.0", "inner_diameter_mm = 6.5\nouter_diameter_mm = 5.5\nthumb = true")
    text += '"G#5" = { holes = "h", register = 2 }\n'
    g = parse_geometry_text(text, "w.toml")
    assert (g.top.kind, g.top.area_mm2, g.top.end_correction_mm) == ("window", 48.0, 6.5)
    assert g.holes[0].undercut and g.holes[0].thumb
    assert g.fingering("G#5").register == 2 and g.fingering("G#5").holes == "h"


@pytest.mark.parametrize(
    ("change", "match"),
    [
        (("chimney_mm = 3.0\n", ""), r"w\.toml: holes\[0\]\.chimney_mm: missing; add it"),
        (("diameter_mm = 6.0", "diameter_mm = 16.0"), r"holes\[0\]\.diameter_mm: 16 mm is not smaller than the bore"),
        (("position_mm = 200.0", "position_mm = 300.0"), r"holes\[0\]\.position_mm: 300 mm is not inside the bore"),
        (('open = "o"', 'open = "oo"'), r"fingerings\.open: 'oo' must have one letter x, o or h for each of the 1 holes"),
        (('open = "o"', 'open = "q"'), r"fingerings\.open"),
        (('kind = "open"', 'kind = "bell"'), r"top\.kind: 'bell' is not a top; use \"open\" or \"window\""),
        (("[[0, 14.0], [300, 14.0]]", "[[0, 14.0], [0, 14.0]]"), r"bore\.points_mm\[1\]: distance 0 mm does not rise"),
        (("[[0, 14.0], [300, 14.0]]", "[[5, 14.0], [300, 14.0]]"), r"bore\.points_mm\[0\]: starts at 5 mm"),
        (("chimney_mm = 3.0", "chimney_mm = 3.0\nwidth = 2"), r"holes\[0\]\.width: unknown key; use one of"),
        (("chimney_mm = 3.0", 'chimney_mm = "3"'), r"holes\[0\]\.chimney_mm: '3' is not a number"),
        (('name = "test-tube"', 'name = "test-tube'), r"w\.toml: line 2: not valid TOML"),
        (("[top]\nkind", "[tops]\nkind"), r"tops: unknown section"),
        (('open = "o"', '"=SUM(A1)" = "o"'), r"fingerings\.=SUM\(A1\): a fingering's name is letters"),
        (("chimney_mm = 3.0\n[fingerings]", ('chimney_mm = 3.0\nlabel = "a"\n[[holes]]\nposition_mm = 250.0\n'
                                              'diameter_mm = 5.0\nchimney_mm = 3.0\nlabel = "a"\n[fingerings]')),
         r"holes\[1\]\.label: 'a' is already the label"),
    ],
)
def test_bad_input_is_one_line_naming_file_and_key(change, match):
    text = MINIMAL.replace(*change)
    assert text != MINIMAL
    with pytest.raises(GeometryError, match=match) as info:
        parse_geometry_text(text, "w.toml")
    assert "\n" not in str(info.value)
    assert isinstance(info.value, BenchError)


def test_missing_and_oversized_files(tmp_path):
    with pytest.raises(GeometryError, match=r"nope\.toml: file: not found; give a geometry \.toml"):
        load_geometry(tmp_path / "nope.toml")
    big = tmp_path / "big.toml"
    big.write_text(MINIMAL + "#" * (MAX_FILE_BYTES + 1), encoding="utf-8")
    with pytest.raises(GeometryError, match=r"big\.toml: file: .* more than the \d+ a file"):
        load_geometry(big)


def test_a_device_or_a_pipe_is_refused_not_read_forever(tmp_path):
    # /dev/zero never ends and a named pipe with no writer never answers: both must be refused
    # in one line (they hung `bench model predict` before)
    import os

    with pytest.raises(GeometryError, match=r"/dev/zero: file: .*character device"):
        load_geometry("/dev/zero")
    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)
    with pytest.raises(GeometryError, match=r"pipe\.toml: file: .*named pipe"):
        load_geometry(fifo)
