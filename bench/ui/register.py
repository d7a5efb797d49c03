"""The register banner: settled, weakening (early warning), overblown, vented, or a cracked attack."""

from __future__ import annotations

from dataclasses import dataclass

from rich.text import Text
from textual.reactive import reactive

from bench.ui.lineview import LineView


@dataclass(frozen=True, slots=True)
class _Look:
    """Class suffix, border pattern and words of one register state."""

    name: str
    pattern: str
    title: str
    detail: str


_LOOKS = {
    "silent": _Look("silent", " ", "register", "waiting for a held note"),
    "steady": _Look("steady", " ", "REGISTER SETTLED", "fundamental holding"),
    "weakening": _Look(
        "weakening",
        "\u00b7 ",
        "WEAKENING",
        "odd harmonics fading \u2014 the note is close to breaking",
    ),
    "overblown": _Look(
        "overblown",
        "\u25b2 ",
        "OVERBLOWN",
        "jumped an octave up \u2014 odd harmonics gone; too much breath",
    ),
    "vented": _Look(
        "vented",
        "\u25c6\u25c7",
        "VENTED",
        "jumped an octave up through a leak or half-open hole \u2014 odd harmonics gone",
    ),
    "cracked": _Look(
        "cracked",
        "\u2575 ",
        "CRACKED ATTACK",
        "the note spoke an upper register first \u2014 the fundamental holds now",
    ),
}


def register_look(register: str | None, jump: str | None) -> str:
    """Name of the banner look for a frame's register state and jump kind.

    >>> register_look("jumped", "vented"), register_look("weakening", None), register_look("steady", "cracked")
    ('vented', 'weakening', 'cracked')
    """
    if register == "jumped":
        return "vented" if jump == "vented" else "overblown"
    if register == "steady" and jump == "cracked":
        return "cracked"
    return register if register in ("steady", "weakening") else "silent"


class RegisterBanner(LineView):
    """Full-width banner of the register monitor.

    Each state has its own words, border pattern and colour: a plain line while settled,
    a dotted border when weakening, rising triangles when overblown, diamonds when vented,
    short ticks for a moment after a cracked attack.
    """

    DEFAULT_CSS = "RegisterBanner { height: 3; }"

    register: reactive[str | None] = reactive(None)
    """``Frame.register``: "steady", "weakening", "jumped" or None."""
    jump: reactive[str | None] = reactive(None)
    """``Frame.jump``: "overblown", "vented", "cracked" or None."""

    def _refresh_look(self) -> None:
        look = register_look(self.register, self.jump)
        self.show_one_class(f"-{look}", ("-silent", "-steady", "-weakening", "-overblown", "-vented", "-cracked"))

    def watch_register(self) -> None:
        self._refresh_look()

    def watch_jump(self) -> None:
        self._refresh_look()

    @property
    def look(self) -> str:
        """Name of the look in force ("silent", "steady", "weakening", "overblown", "vented", "cracked")."""
        return register_look(self.register, self.jump)

    def render(self) -> Text:
        width = max(self.content_size.width, 10)
        look = _LOOKS[self.look]
        border = (look.pattern * width)[:width]
        middle = f"{look.title}  \u00b7  {look.detail}"
        if len(middle) > width:
            middle = look.title if len(look.title) <= width else look.title[:width]
        text = Text(no_wrap=True, overflow="crop", justify="center")
        text.append(border + "\n")
        if self.content_size.height < 3:  # a short screen: one edge is enough to tell the look
            text.append(middle.center(width), style="bold")
            return text
        text.append(middle.center(width) + "\n", style="bold")
        text.append(border)
        return text
