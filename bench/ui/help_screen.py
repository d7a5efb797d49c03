"""The key guide: every key of the bench screen, listed from the bindings themselves."""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Label, Static


class KeyGuide(ModalScreen[None]):
    """A scrollable table of keys and what they do; any of Esc, q, ? or F1 closes it.

    Parameters
    ----------
    rows : iterable of (str, str)
        (keys as shown to the user, description), in the order to list them.
    """

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape,q,question_mark,f1", "close", "Close the key guide"),
    ]

    def __init__(self, rows: Iterable[tuple[str, str]]) -> None:
        super().__init__()
        self.rows = tuple(rows)

    def compose(self) -> ComposeResult:
        width = max((len(keys) for keys, _ in self.rows), default=4)
        with Vertical(id="key-guide"):
            yield Label("Keys of the bench screen", id="key-guide-title")
            with VerticalScroll(id="key-guide-rows"):
                for keys, description in self.rows:
                    yield Static(f"{keys:>{width}}   {description}", classes="key-row")
            yield Label("Ctrl+P opens the command list  \u00b7  Esc closes this guide", id="key-guide-foot")

    def action_close(self) -> None:
        self.dismiss(None)


def binding_rows(bindings: Iterable[Binding], key_display: Callable[[Binding], str]) -> list[tuple[str, str]]:
    """(keys, description) rows of bindings, keys joined by " / ".

    The description is the binding's tooltip (the full sentence), else its description.
    ``key_display`` turns one binding into the text a user sees for its key.
    """
    rows: dict[str, list[str]] = {}
    for binding in bindings:
        words = binding.tooltip or binding.description
        if not words:
            continue
        rows.setdefault(words, []).append(key_display(binding))
    return [(" / ".join(dict.fromkeys(keys)), description) for description, keys in rows.items()]
