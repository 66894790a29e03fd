"""A small modal that asks for a file path."""

from __future__ import annotations

from textual import on
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label


class PathScreen(ModalScreen[str | None]):
    """Ask for a path; returns it, or None on Escape."""

    BINDINGS = [("escape", "cancel", "cancel")]

    def __init__(self, prompt: str, value: str = ""):
        super().__init__()
        self._prompt = prompt
        self._value = value

    def compose(self) -> ComposeResult:
        with Vertical(id="path-box"):
            yield Label(self._prompt)
            yield Input(value=self._value, id="path-input")
            yield Label("Enter to confirm, Escape to cancel", classes="hint")

    @on(Input.Submitted, "#path-input")
    def _confirm(self, event: Input.Submitted) -> None:
        self.dismiss(event.value.strip() or None)

    def action_cancel(self) -> None:
        self.dismiss(None)
