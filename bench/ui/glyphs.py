"""Block-character glyphs, five rows tall, for figures read from across the workshop.

Each glyph is drawn on a grid of ``#`` (ink) and ``.`` (paper); :func:`render_big` turns a
string into five lines of full-block characters, each ink cell ``scale`` characters wide.
"""

from __future__ import annotations

from collections.abc import Sequence

from rich.style import Style
from rich.text import Text

GLYPH_ROWS = 5

_GLYPHS: dict[str, tuple[str, ...]] = {
    "A": (".###.", "#...#", "#####", "#...#", "#...#"),
    "B": ("####.", "#...#", "####.", "#...#", "####."),
    "C": (".####", "#....", "#....", "#....", ".####"),
    "D": ("####.", "#...#", "#...#", "#...#", "####."),
    "E": ("#####", "#....", "####.", "#....", "#####"),
    "F": ("#####", "#....", "####.", "#....", "#...."),
    "G": (".####", "#....", "#..##", "#...#", ".####"),
    "#": (".#.#.", "#####", ".#.#.", "#####", ".#.#."),
    "b": ("#...", "#...", "###.", "#..#", "###."),
    "0": (".###.", "#...#", "#...#", "#...#", ".###."),
    "1": ("..#..", ".##..", "..#..", "..#..", ".###."),
    "2": ("####.", "....#", ".###.", "#....", "#####"),
    "3": ("####.", "....#", ".###.", "....#", "####."),
    "4": ("#...#", "#...#", "#####", "....#", "....#"),
    "5": ("#####", "#....", "####.", "....#", "####."),
    "6": (".###.", "#....", "####.", "#...#", ".###."),
    "7": ("#####", "....#", "...#.", "..#..", "..#.."),
    "8": (".###.", "#...#", ".###.", "#...#", ".###."),
    "9": (".###.", "#...#", ".####", "....#", ".###."),
    "+": (".....", "..#..", "#####", "..#..", "....."),
    "-": (".....", ".....", "#####", ".....", "....."),
    ".": ("..", "..", "..", "..", "#."),
    " ": ("...", "...", "...", "...", "..."),
}
_ALIASES = {"\N{MINUS SIGN}": "-", "\N{MUSIC SHARP SIGN}": "#", "\N{MUSIC FLAT SIGN}": "b"}
_GAP = 1  # paper columns between glyphs


def glyph_width(text: str, scale: int = 1) -> int:
    """Width in terminal cells of ``text`` drawn by :func:`render_big`.

    >>> glyph_width("F#5"), glyph_width("F#5", scale=2)
    (17, 34)
    """
    widths = [len(_glyph(ch)[0]) * scale for ch in text]
    return sum(widths) + _GAP * scale * max(len(widths) - 1, 0)


def render_big(text: str, scale: int = 1) -> list[str]:
    """Draw ``text`` as five lines of block characters.

    Parameters
    ----------
    text : str
        Letters A-G, ``#``, ``b`` (flat), digits, ``+``, ``-``, ``.`` and space; any other
        character is drawn as a space.
    scale : int >= 1
        Terminal cells per grid column.

    Returns
    -------
    list of str
        ``GLYPH_ROWS`` lines of equal length.

    Examples
    --------
    >>> for line in render_big("-1"):
    ...     print(line.replace(" ", "_").replace("\u2588", "#"))
    ________#__
    _______##__
    #####___#__
    ________#__
    _______###_
    """
    rows = []
    for r in range(GLYPH_ROWS):
        cells = []
        for ch in text:
            pattern = _glyph(ch)[r]
            cells.append("".join(("\u2588" if p == "#" else " ") * scale for p in pattern))
        rows.append((" " * (_GAP * scale)).join(cells))
    return rows


def _glyph(ch: str) -> tuple[str, ...]:
    """Grid of one character; unknown characters are blank."""
    ch = _ALIASES.get(ch, ch)
    return _GLYPHS.get(ch) or _GLYPHS.get(ch.upper()) or _GLYPHS[" "]


def text_from_cells(chars: list[str], styles: Sequence[str | Style]) -> Text:
    """One line of Rich text from per-cell characters and styles, one span per run of a style.

    Fewer spans make the screen cheaper to draw than one span per cell.
    """
    line = Text(no_wrap=True, overflow="crop")
    start = 0
    for i in range(1, len(chars) + 1):
        if i == len(chars) or styles[i] != styles[start]:
            line.append("".join(chars[start:i]), styles[start])
            start = i
    return line
