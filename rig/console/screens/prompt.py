"""An operator prompt from the sequence as a modal yes/no question, answered with F6 or F7."""

from __future__ import annotations

from collections.abc import Callable
from typing import ClassVar

from textual import events
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static


class PromptScreen(ModalScreen[bool]):
    """Waits for the operator; the bench is already safe (the prompt step opened everything).

    No answer is a key a barcode scanner can type: a scan is letters and digits ended by Enter,
    so a label scanned at the prompt must neither answer it nor stop the run.  The answers are
    function keys, and typed keys only earn a line saying which keys answer.
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
        Binding("f6", "answer(True)", "Yes, done"),
        Binding("f7", "answer(False)", "No"),
        Binding("f8", "stop", "Stop & make safe"),
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
        self.ignored_keys = 0

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static(f"OPERATOR ACTION ({self.step_id})", id="prompt-title")
            yield Static(self.text, id="prompt-text", markup=False)  # the file's words
            no = "F7 = no (the run stops)" if self.stops_run else "F7 = no (the step fails)"
            yield Static(f"F6 = yes, done   {no}   F8 = stop the run", id="prompt-keys")

    def on_key(self, event: events.Key) -> None:
        if event.is_printable or event.key == "enter":
            event.stop()
            self.ignored_keys += 1
            if self.ignored_keys == 1:
                self.notify("answer with F6 (yes) or F7 (no); typed keys are ignored here")

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)

    def action_stop(self) -> None:
        self._on_stop()
