"""One registry of workspace commands: it feeds the key bindings, the help screen and
the command palette, so the three can never disagree."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Command:
    action: str  # App action name (without "action_")
    keys: str  # Textual key list, comma separated
    title: str  # palette title, our own wording
    help: str
    show: bool = True  # in the footer


COMMANDS: tuple[Command, ...] = (
    Command("toggle_include", "space", "Include / exclude level",
            "Take the selected level out of the fit, or back in"),
    Command("reattach", "r", "Reattach level", "Pick the computed state the level belongs to"),
    Command("edit", "e,enter", "Edit", "Edit the selected level's energy and uncertainty, or "
            "the selected parameter's value and bounds"),
    Command("add_level", "a", "Add level", "Add an observed level", show=False),
    Command("delete_level", "x,delete", "Delete level", "Delete the selected observed level",
            show=False),
    Command("toggle_vary", "v", "Vary / fix parameter", "Toggle whether the selected parameter "
            "varies"),
    Command("link", "l", "Link group", "Put the selected parameter into a link group (vary "
            "together with fixed ratios), or out of it", show=False),
    Command("undo", "u,ctrl+z", "Undo", "Undo the last edit"),
    Command("redo", "U,ctrl+y", "Redo", "Redo the edit undone last", show=False),
    Command("refit", "f", "Refit now", "Run the fit again with the current settings",
            show=False),
    Command("save", "w,ctrl+s", "Write session", "Save the session file (atomic, keeps a "
            "backup)"),
    Command("keep_set", "k", "Keep fit as set", "Save the current fit as a named parameter set",
            show=False),
    Command("adopt_fit", "y", "Adopt fitted values", "Make the fitted values the session's "
            "starting values (undoable; saved with w)", show=False),
    Command("load_set", "o", "Start from a set", "Take a saved parameter set's values as "
            "the starting values", show=False),
    Command("filter", "slash", "Filter levels", "Show only levels matching configuration, J, "
            "parity or text", show=False),
    Command("toggle_outliers", "exclamation_mark", "Outliers only",
            "Show only levels with |O-C| above 2 sigma", show=False),
    Command("cycle_sort", "t", "Sort levels", "Cycle the sort order: energy, |O-C|, id, J",
            show=False),
    Command("toggle_detail", "d", "Detail pane", "Show or hide the composition pane"),
    Command("show_tab('levels')", "1", "Levels view", "Observed levels", show=False),
    Command("show_tab('params')", "2", "Parameters view", "Fitted parameters", show=False),
    Command("show_tab('corr')", "3", "Correlation view", "Correlation matrix", show=False),
    Command("show_tab('resid')", "4", "O-C plot", "O-C against energy", show=False),
    Command("show_tab('diagram')", "5", "Level diagram", "Levels by configuration and J",
            show=False),
    Command("show_tab('lines')", "6", "Lines of the level", "Predicted E1 lines of the "
            "selected level (needs both parities), and its observed lines after O",
            show=False),
    Command("optimise_levels", "O", "Optimise levels from lines", "Optimise the observed "
            "levels from a line list (Ritz least squares) and take them over (undoable); the "
            "lines view then lists each level's observed lines", show=False),
    Command("cycle_diagram", "c", "Diagram configuration", "Show one configuration (or all) "
            "in the level diagram", show=False),
    Command("help", "question_mark,f1", "Keys", "List every key"),
    Command("quit_workspace", "q", "Quit", "Leave the workspace (asks if unsaved)"),
)
