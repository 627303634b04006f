"""An operator prompt from the sequence as a modal yes/no question, answered with y or n."""

from __future__ import annotations

from collections.abc import Callable
from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static


class PromptScreen(ModalScreen[bool]):
    """Waits for the operator; the bench is already safe (the prompt step opened everything).

    Enter is deliberately not an answer: a barcode scanner ends every scan with Enter.
    """

    DEFAULT_CSS = """
    PromptScreen { align: center middle; }
    PromptScreen > Vertical {
        width: 70; height: auto; border: thick $accent; padding: 1 2; background: $surface;
    }
    PromptScreen #prompt-title { text-style: bold; margin-bottom: 1; }
    PromptScreen #prompt-keys { margin-top: 1; text-style: bold; }
    """

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("y", "answer(True)", "Yes, done"),
        Binding("n", "answer(False)", "No"),
        Binding("s", "stop", "Stop & make safe"),
    ]

    def __init__(
        self, step_id: str, text: str, on_stop: Callable[[], None], *, stops_run: bool = False
    ) -> None:
        super().__init__()
        self._on_stop = on_stop
        self.step_id = step_id
        self.text = text
        self.stops_run = stops_run
        """A no ends the run (the sequence's ``declined = "stop"``), not only the step."""

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static(f"OPERATOR ACTION ({self.step_id})", id="prompt-title")
            yield Static(self.text, id="prompt-text", markup=False)  # the file's words
            no = "n = no (the run stops)" if self.stops_run else "n = no (the step fails)"
            yield Static(f"y = yes, done     {no}     s = stop the run", id="prompt-keys")

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)

    def action_stop(self) -> None:
        self._on_stop()
