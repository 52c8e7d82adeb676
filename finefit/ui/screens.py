"""Modal screens of the workspace: help, edits, pickers, confirmations."""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, OptionList, Static
from textual.widgets.option_list import Option

from finefit.ui.commands import COMMANDS

KEY_NAMES = {"space": "Space", "slash": "/", "exclamation_mark": "!", "question_mark": "?",
             "enter": "Enter", "delete": "Delete"}


def key_text(keys: str) -> str:
    return ", ".join(KEY_NAMES.get(k, k) for k in keys.split(","))


class HelpScreen(ModalScreen[None]):
    """Every key of the workspace, from the command registry."""

    BINDINGS = [Binding("escape,q,question_mark,f1", "dismiss", "Close")]

    def compose(self) -> ComposeResult:
        lines = Text()
        lines.append("finefit workspace — keys\n\n", style="bold")
        for c in COMMANDS:
            lines.append(f"{key_text(c.keys):>18}  ", style="bold")
            lines.append(f"{c.title}: {c.help}\n")
        lines.append("\n")
        lines.append(f"{'ctrl+p':>18}  ", style="bold")
        lines.append("Command palette (every command above by name)\n")
        lines.append(f"{'Escape':>18}  ", style="bold")
        lines.append("Close this screen or a dialog\n")
        with VerticalScroll(id="help-body"):
            yield Static(lines, id="help-text")

    def action_dismiss(self) -> None:  # type: ignore[override]
        self.dismiss(None)


class FormScreen(ModalScreen[dict | None]):
    """A small form: labelled inputs, Enter to accept, Escape to cancel."""

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, title: str, fields: list[tuple[str, str, str]], note: str = "") -> None:
        super().__init__()
        self.form_title = title
        self.fields = fields  # (key, label, initial text)
        self.note = note

    def compose(self) -> ComposeResult:
        with Vertical(id="form"):
            yield Label(Text(self.form_title, style="bold"))
            if self.note:
                yield Static(Text(self.note), classes="note")
            for key, label, initial in self.fields:
                yield Label(Text(label))
                yield Input(value=initial, id=f"f-{key}")
            yield Static("", id="form-error", markup=False)
            yield Static(Text("Enter: accept   Escape: cancel", style="dim"))

    def on_input_submitted(self, event: Input.Submitted) -> None:
        inputs = list(self.query(Input))
        idx = inputs.index(event.input)
        if idx < len(inputs) - 1:
            inputs[idx + 1].focus()
            return
        self.dismiss({key: self.query_one(f"#f-{key}", Input).value for key, _, _ in self.fields})

    def show_error(self, message: str) -> None:
        self.query_one("#form-error", Static).update(Text(message, style="bold red"))

    def action_cancel(self) -> None:
        self.dismiss(None)


class PickScreen(ModalScreen[int | None]):
    """Choose one line of a list (e.g. the computed state to attach a level to)."""

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, title: str, options: list[Text], highlight: int | None = None) -> None:
        super().__init__()
        self.pick_title = title
        self.options = options
        self.highlight = highlight

    def compose(self) -> ComposeResult:
        with Vertical(id="pick"):
            yield Label(Text(self.pick_title, style="bold"))
            yield OptionList(*[Option(t, id=str(i)) for i, t in enumerate(self.options)],
                             id="pick-list")
            yield Static(Text("Enter: choose   Escape: cancel", style="dim"))

    def on_mount(self) -> None:
        ol = self.query_one(OptionList)
        if self.highlight is not None:
            ol.highlighted = self.highlight
        ol.focus()

    def on_option_list_option_selected(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(int(event.option.id))

    def action_cancel(self) -> None:
        self.dismiss(None)


class ChoiceScreen(ModalScreen[str | None]):
    """A question with a few single-key answers."""

    def __init__(self, question: str, choices: list[tuple[str, str]]) -> None:
        super().__init__()
        self.question = question
        self.choices = choices  # (key, label)

    def compose(self) -> ComposeResult:
        with Vertical(id="choice"):
            yield Static(Text(self.question, style="bold"))
            with Horizontal(id="choice-buttons"):
                for key, label in self.choices:
                    yield Button(f"[{key}] {label}", id=f"c-{key}")

    def on_key(self, event) -> None:
        for key, _ in self.choices:
            if event.key == key:
                event.stop()
                self.dismiss(key)
                return
        if event.key == "escape":
            event.stop()
            self.dismiss(None)

    def on_button_pressed(self, event: Button.Pressed) -> None:
        self.dismiss(event.button.id[2:])
