"""Save the job somewhere else: a one-field prompt for a folder, shown when the workspace
cannot be written (a file where its folder should be, a full disk, no permission). What to
do with the folder is :meth:`trueturn.ui.jobfile.JobKeeper.move_to`; this is only the form."""

from __future__ import annotations

from pathlib import Path

from textual.app import ComposeResult
from textual.binding import Binding
from textual.content import Content
from textual.screen import ModalScreen
from textual.widgets import Footer, Input, Static


class SaveFolderPrompt(ModalScreen[Path | None]):
    """Ask for a folder; Enter gives it, Escape gives None."""

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, why: str, suggestion: Path) -> None:
        super().__init__(id="save-folder")
        self.why = why
        self.suggestion = suggestion

    def compose(self) -> ComposeResult:
        yield Static(Content.assemble(  # the reason is text, never markup
            ("The job is not saved", "bold"),
            f": {self.why}\nEvery step is kept in memory. Type a folder to save it in "
            "(Enter: save, Escape: cancel)."), classes="form-title")
        yield Input(value=str(self.suggestion), id="save-folder-path")
        yield Footer()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        text = event.value.strip()
        self.dismiss(Path(text) if text else None)

    def action_cancel(self) -> None:
        self.dismiss(None)
