"""Modal screens of the workspace: help, edits, pickers, confirmations, comparisons."""

from __future__ import annotations

from rich.table import Table
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Button, DataTable, Input, Label, OptionList, Static
from textual.widgets.option_list import Option

from finefit.ui.commands import COMMANDS

KEY_NAMES = {"space": "Space", "slash": "/", "exclamation_mark": "!", "question_mark": "?",
             "enter": "Enter", "delete": "Delete", "left_square_bracket": "[",
             "right_square_bracket": "]", "home": "Home", "end": "End", "left": "←",
             "right": "→", "less_than_sign": "<", "greater_than_sign": ">"}

FLAG_LEGEND = ("flag column: x excluded  p pinned to a state  ≠ label disagrees with the "
               "attached state  ! |O-C| > 2σ  !! |O-C| > 3σ")


def key_text(keys: str) -> str:
    return ", ".join(KEY_NAMES.get(k, k) for k in keys.split(","))


class HelpScreen(ModalScreen[None]):
    """Every key of the workspace, from the command registry."""

    BINDINGS = [Binding("escape,q,question_mark,f1", "dismiss", "Close")]

    def compose(self) -> ComposeResult:
        table = Table.grid(padding=(0, 2))
        table.add_column(justify="right", style="bold", no_wrap=True)
        table.add_column(ratio=1)  # long help wraps inside its column, not to column 0
        for c in COMMANDS:
            table.add_row(key_text(c.keys), f"{c.title}: {c.help}")
        table.add_row("", "")
        table.add_row("ctrl+p", "Command palette (every command above by name)")
        table.add_row("Escape", "Close this screen or a dialog")
        table.add_row("", "")
        table.add_row("", FLAG_LEGEND)
        self.table = table
        with VerticalScroll(id="help-body"):
            yield Static(Text("finefit workspace — keys", style="bold"))
            yield Static(table, id="help-text")

    def on_mount(self) -> None:
        self.query_one("#help-body").focus()  # arrows and Page Down scroll the help

    def plain_text(self, width: int = 100) -> str:
        """The help as plain text of the given width (as it wraps on screen)."""
        from rich.console import Console

        console = Console(width=width, record=True, file=None, color_system=None)
        with console.capture() as cap:
            console.print(self.table)
        return cap.get()

    def action_dismiss(self) -> None:  # type: ignore[override]
        self.dismiss(None)


class FormScreen(ModalScreen[dict | None]):
    """A small form: one line per field; Enter accepts from any field, Tab and the arrow
    keys move between fields, Escape cancels."""

    BINDINGS = [Binding("escape", "cancel", "Cancel"),
                Binding("down", "app.focus_next", "Next field", show=False),
                Binding("up", "app.focus_previous", "Previous field", show=False)]

    def __init__(self, title: str, fields: list[tuple[str, str, str]], note: str = "") -> None:
        super().__init__()
        self.form_title = title
        self.fields = fields  # (key, label, initial text)
        self.note = note

    def compose(self) -> ComposeResult:
        with VerticalScroll(id="form", can_focus=False):
            yield Label(Text(self.form_title, style="bold"))
            if self.note:
                yield Static(Text(self.note), classes="note")
            for key, label, initial in self.fields:
                with Horizontal(classes="field"):
                    yield Label(Text(label + ":"), classes="field-label")
                    yield Input(value=initial, id=f"f-{key}", compact=True)
            yield Static("", id="form-error", markup=False)
            yield Static(Text("Enter: accept   Tab/↓: next field   Escape: cancel",
                              style="dim"))

    def on_mount(self) -> None:
        self.query(Input).first().focus()

    def on_input_submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.dismiss({key: self.query_one(f"#f-{key}", Input).value for key, _, _ in self.fields})

    def show_error(self, message: str) -> None:
        self.query_one("#form-error", Static).update(Text(message, style="bold"))

    def action_cancel(self) -> None:
        self.dismiss(None)


class PickScreen(ModalScreen[int | None]):
    """Choose one line of a list (e.g. the computed state to attach a level to)."""

    BINDINGS = [Binding("escape", "cancel", "Cancel")]

    def __init__(self, title: str, options: list[Text], highlight: int | None = None,
                 header: Text | None = None) -> None:
        super().__init__()
        self.pick_title = title
        self.options = options
        self.highlight = highlight
        self.header = header

    def compose(self) -> ComposeResult:
        with Vertical(id="pick"):
            yield Label(Text(self.pick_title, style="bold"))
            if self.header is not None:
                yield Static(self.header, classes="pick-header")
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
    """A question with a few single-key answers; the arrow keys move between buttons."""

    BINDINGS = [Binding("left,up,shift+tab", "app.focus_previous", show=False),
                Binding("right,down,tab", "app.focus_next", show=False)]

    def __init__(self, question: str, choices: list[tuple[str, str]]) -> None:
        super().__init__()
        self.question = question
        self.choices = choices  # (key, label)

    def compose(self) -> ComposeResult:
        with Vertical(id="choice"):
            yield Static(Text(self.question, style="bold"))
            with Horizontal(id="choice-buttons"):
                for key, label in self.choices:
                    # Text, not str: "[s]" would be read as markup and vanish
                    yield Button(Text(f"[{key}] {label}"), id=f"c-{key}")

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


class TableScreen(ModalScreen[None]):
    """A read-only table (e.g. a parameter set compared with the current fit)."""

    BINDINGS = [Binding("escape,q", "close", "Close")]

    def __init__(self, title: str, columns: list[str], rows: list[list[Text]],
                 note: str = "") -> None:
        super().__init__()
        self.table_title = title
        self.columns = columns
        self.rows = rows
        self.note = note

    def compose(self) -> ComposeResult:
        with Vertical(id="pick"):
            yield Label(Text(self.table_title, style="bold"))
            if self.note:
                yield Static(Text(self.note), classes="note")
            yield DataTable(id="screen-table", cursor_type="row")
            yield Static(Text("Escape: close", style="dim"))

    def on_mount(self) -> None:
        t = self.query_one(DataTable)
        for c in self.columns:
            t.add_column(c)
        for r in self.rows:
            t.add_row(*r)
        t.focus()

    def action_close(self) -> None:
        self.dismiss(None)
