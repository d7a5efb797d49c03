"""A one-line entry dialog for a typed value (A4, air temperature, a note to lock to)."""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label


class ValueDialog(ModalScreen[str | None]):
    """Ask for one value; dismiss with the text typed (Enter) or None (Escape).

    The dialog only collects text: the app parses and validates it, and reports a bad
    value in one line without stopping.

    Parameters
    ----------
    prompt : str
        What to type, e.g. "A4 in Hz (300-500) or a standard name".
    value : str
        Text the field starts with (the value in force).
    hint : str
        One line under the field, e.g. the accepted range.
    """

    BINDINGS: ClassVar[list[BindingType]] = [Binding("escape", "cancel", "Leave unchanged")]

    def __init__(self, prompt: str, value: str = "", hint: str = "") -> None:
        super().__init__()
        self._prompt = prompt
        self._value = value
        self._hint = hint

    def compose(self) -> ComposeResult:
        with Vertical(id="value-dialog"):
            yield Label(self._prompt, id="value-prompt")
            yield Input(value=self._value, select_on_focus=True, id="value-input")
            yield Label(self._hint, id="value-hint")
            yield Label("Enter applies  \u00b7  Esc leaves it as it was", id="value-keys")

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.dismiss(event.value)

    def action_cancel(self) -> None:
        self.dismiss(None)
