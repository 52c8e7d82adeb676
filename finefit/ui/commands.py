"""One registry of workspace commands: it feeds the key bindings, the footer, the help
screen, the command palette and the check of which keys apply in which view, so these
can never disagree."""

from __future__ import annotations

from dataclasses import dataclass

VIEWS = ("levels", "params", "corr", "resid", "diagram", "lines", "diag")


@dataclass(frozen=True)
class Command:
    action: str  # App action name (without "action_")
    keys: str  # Textual key list, comma separated
    title: str  # palette title, our own wording
    help: str
    show: bool = True  # in the footer
    views: tuple[str, ...] = ()  # the views where it applies (empty: every view)
    priority: bool = False  # before the focused widget's own keys (Home, End)

    @property
    def name(self) -> str:
        """The action's method name without arguments (``show_tab('levels')`` -> show_tab)."""
        return self.action.split("(")[0]


LEVELS = ("levels",)

COMMANDS: tuple[Command, ...] = (
    Command("toggle_include", "space", "Include / exclude level",
            "Take the selected level out of the fit, or back in", views=LEVELS),
    Command("reattach", "r", "Reattach level", "Pick the computed state the level belongs to "
            "(taking a state another level holds exchanges the two, labels included)",
            views=LEVELS),
    Command("edit", "e,enter", "Edit", "Edit the selected level's energy, uncertainty and "
            "label, or the selected parameter's value and bounds", views=("levels", "params"),
            priority=True),  # before the table's own Enter
    Command("add_level", "a", "Add level", "Add an observed level (it starts excluded: check "
            "where it attaches, then include it with Space)", show=False),
    Command("delete_level", "x,delete", "Delete level", "Delete the selected observed level",
            show=False, views=LEVELS),
    Command("toggle_vary", "v", "Vary / fix parameter", "Toggle whether the selected parameter "
            "varies; fixing keeps its fitted value", views=("params",)),
    Command("link", "l", "Link group", "Put the selected parameter into a link group (vary "
            "together with fixed ratios), or out of it", show=False, views=("params",)),
    Command("apply_swap", "s", "Apply exchange", "Apply the selected suspected exchange of two "
            "levels (states and labels), undoable", views=("diag",)),
    Command("undo", "u,ctrl+z", "Undo", "Undo the last edit"),
    Command("redo", "U,ctrl+y", "Redo", "Redo the edit undone last", show=False),
    Command("refit", "f", "Refit now", "Run the fit again with the current settings",
            show=False),
    Command("save", "w,ctrl+s", "Write session", "Save the session file (atomic, keeps a "
            "backup) with the fitted values on screen; the values they replace are kept as a "
            "parameter set"),
    Command("keep_set", "k", "Keep fit as set", "Save the current fit as a named parameter set",
            show=False),
    Command("adopt_fit", "y", "Adopt fitted values", "Make the fitted values the session's "
            "starting values (undoable; saved with w)", show=False),
    Command("load_set", "o", "Start from a set", "Take a saved parameter set's values as "
            "the starting values", show=False),
    Command("compare_sets", "C", "Compare with a set", "Compare the current fit with a saved "
            "parameter set, parameter by parameter", show=False),
    Command("filter", "slash", "Filter levels", "Show only levels matching a filter: words, "
            "c=3d6 4s  J=7/2,9/2  p=odd  e>20000  oc>2s  is=excluded (see the form)",
            show=False),
    Command("toggle_outliers", "exclamation_mark", "Outliers only",
            "Show only levels with |O-C| above 2 sigma", show=False),
    Command("cycle_sort", "t", "Sort levels", "Cycle the sort order: energy, |O-C|, id, J "
            "(the cursor goes to the first row)", show=False, views=LEVELS),
    Command("toggle_detail", "d", "Detail pane", "Show or hide the composition pane",
            views=LEVELS),
    Command("detail_down", "right_square_bracket", "Scroll detail down",
            "Scroll the composition pane down", show=False, views=LEVELS),
    Command("detail_up", "left_square_bracket", "Scroll detail up",
            "Scroll the composition pane up", show=False, views=LEVELS),
    Command("first_row", "home", "First row", "Go to the first row", show=False,
            views=("levels", "params", "diag"), priority=True),
    Command("last_row", "end", "Last row", "Go to the last row", show=False,
            views=("levels", "params", "diag"), priority=True),
    Command("previous_point", "left", "Previous level", "O-C plot: select the level below "
            "in energy", show=False, views=("resid",)),
    Command("next_point", "right", "Next level", "O-C plot: select the level above in energy",
            show=False, views=("resid",)),
    Command("corr_columns(-1)", "less_than_sign", "Correlation columns left",
            "Correlation view: show the columns to the left", show=False, views=("corr",)),
    Command("corr_columns(1)", "greater_than_sign", "Correlation columns right",
            "Correlation view: show the columns to the right", show=False, views=("corr",)),
    Command("show_tab('levels')", "1", "Levels view", "Observed levels", show=False),
    Command("show_tab('params')", "2", "Parameters view", "Fitted parameters", show=False),
    Command("show_tab('corr')", "3", "Correlation view", "Correlation matrix", show=False),
    Command("show_tab('resid')", "4", "O-C plot", "O-C against energy; the selected level "
            "is '@' (left and right move it)", show=False),
    Command("show_tab('diagram')", "5", "Level diagram", "Levels by configuration and J",
            show=False),
    Command("show_tab('lines')", "6", "Lines of the level", "Predicted E1 lines of the "
            "selected level (needs both parities) and its observed lines from the last "
            "level optimisation", show=False),
    Command("show_tab('diag')", "7", "Diagnosis", "What to check: suspected exchanges, label "
            "mismatches, undetermined parameters, fit warnings", show=False),
    Command("optimise_levels", "O", "Optimise levels from lines", "Optimise the observed "
            "levels from a line list (Ritz least squares) and take them over (undoable); the "
            "lines view then lists each level's observed lines", show=False),
    Command("cycle_diagram", "c", "Diagram configuration", "Show one configuration (or all) "
            "in the level diagram", show=False, views=("diagram",)),
    Command("help", "question_mark,f1", "Keys", "List every key"),
    Command("quit_workspace", "q", "Quit", "Leave the workspace (asks if unsaved; so does "
            "ctrl+q)"),
)
