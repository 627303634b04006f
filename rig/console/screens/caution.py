"""The cautions for bench work, shown once when the console opens, acknowledged by a key.

Which cautions is the one decision every front end shares (``rig.cautions.cautions_for``),
over every sequence the console offers: the harness caution on a harness bench, the well's
before a screen of a sensor in a hot well."""

from __future__ import annotations

from typing import ClassVar

from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Static


class CautionScreen(ModalScreen[bool]):
    """Blocks the console until the operator confirms having read the cautions."""

    DEFAULT_CSS = """
    CautionScreen { align: center middle; }
    CautionScreen > Vertical {
        width: 72; height: auto; border: double $warning; padding: 1 2; background: $surface;
    }
    CautionScreen #caution-title { text-style: bold; margin-bottom: 1; }
    CautionScreen .caution-text { margin-bottom: 1; }
    CautionScreen #caution-keys { margin-top: 1; text-style: bold; }
    """

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("enter", "acknowledge", "I have read the cautions")
    ]

    def __init__(self, cautions: list[str], bench_label: str = "") -> None:
        super().__init__()
        self.cautions = cautions
        self.bench_label = bench_label

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static("CAUTION: bench work", id="caution-title")
            for n, text in enumerate(self.cautions):
                yield Static(text, classes="caution-text", id=f"caution-{n}", markup=False)
            if self.bench_label:
                yield Static(self.bench_label, id="caution-bench", markup=False)
            yield Static("Press Enter to confirm you have read this.", id="caution-keys")

    def action_acknowledge(self) -> None:
        self.dismiss(True)
