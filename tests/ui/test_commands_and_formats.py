"""The command registry resolves to actions, and the table formats never cut a number
silently (no terminal needed)."""

import inspect

import pytest

from finefit.ui.app import WorkspaceApp
from finefit.ui.commands import COMMANDS, VIEWS
from finefit.ui.formatting import Column, clip, decimals_for, fit_columns, pack_status, value_error
from finefit.ui.screens import key_text


def test_every_registered_command_resolves_to_an_action():
    seen_keys = set()
    for c in COMMANDS:
        method = getattr(WorkspaceApp, f"action_{c.name}", None)
        assert callable(method), c.action
        if "(" in c.action:  # show_tab('levels'): the argument names a view
            arg = c.action[c.action.index("(") + 1:-1].strip("'\"")
            assert arg in VIEWS or arg.lstrip("-").isdigit()
            assert len(inspect.signature(method).parameters) == 2
        assert set(c.views) <= set(VIEWS), c.action
        for key in c.keys.split(","):
            assert key not in seen_keys, key  # one key, one command
            seen_keys.add(key)
        assert key_text(c.keys)
    bound = {b.action for b in WorkspaceApp.BINDINGS}
    assert bound == {c.action for c in COMMANDS}


def test_columns_fit_whole_or_not_at_all():
    cols = [Column("id", "id", 4), Column("label", "label", 30, shrink_to=8),
            Column("e", "E", 10), Column("pur", "%LS", 3, required=False),
            Column("lead", "leading", 30, required=False, shrink_to=16)]
    shown = fit_columns(cols, 60)
    assert sum(c.width + 2 for c in shown) <= 60
    assert [c.key for c in shown] == ["id", "label", "e", "pur"]
    narrow = fit_columns([Column("id", "id", 4), Column("label", "label", 30, shrink_to=8),
                          Column("e", "E", 10)], 30)
    assert [c.width for c in narrow] == [4, 10, 10]  # the label gave way, not the number


def test_clip_marks_what_it_cuts():
    assert clip("3d6(3P2)4s 4P", 20) == "3d6(3P2)4s 4P"
    assert clip("3d6(3P2)4s 4P", 8) == "3d6(3P2…"


@pytest.mark.parametrize("scale, decimals", [(362.0, 2), (3.15, 2), (0.35, 2),
                                             (0.021, 3), (0.0021, 4), (None, 2)])
def test_decimals_show_two_significant_digits(scale, decimals):
    assert decimals_for(scale) == decimals


def test_value_error_to_two_significant_digits():
    # rounding convention of the Guide to the expression of uncertainty (GUM 7.2.6):
    # the uncertainty to at most two significant digits, the value to the same place
    assert value_error(85063.2571, 660.4) == ("85063", "660")
    assert value_error(402.123456, 0.0213) == ("402.123", "0.021")
    assert value_error(1.5, float("inf")) == ("1.50", "")


def test_status_keeps_priority_zero_parts():
    parts = [(0, "fitting…"), (0, "unsaved"), (0, "σ = 3.15"), (4, "Δ -0.2"),
             (2, "excluded L003 and a long description"), (5, "N 70 free 13 eval 30")]
    text = pack_status(parts, 40)
    assert len(text) <= 40
    assert text.startswith("fitting… │ unsaved │ σ = 3.15")


def test_repeated_component_labels_are_numbered():
    # jj labels of a d^6 subshell do not carry every intermediate coupling, so two
    # different basis states can share one label (seen in the iron-group demo)
    from finefit.ui.pictures import composition_bars

    text = composition_bars([("3d6(3/2^2 5/2^4;4)4s(1/2)", 0.23), ("3d6(5/2^6;0)4s(1/2)", 0.2),
                             ("3d6(3/2^2 5/2^4;4)4s(1/2)", 0.1)], 40).plain
    assert "4s(1/2) [1]" in text and "4s(1/2) [2]" in text
    assert "(5/2^6;0)4s(1/2) [" not in text
