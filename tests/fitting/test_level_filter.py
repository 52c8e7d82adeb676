"""The level filter language (finefit.fitting.level_filter), on invented levels."""

from types import SimpleNamespace

import pytest

from finefit.fitting.level_filter import FilterError, parse_filter
from finefit.fitting.settings import ObservedLevel

# invented levels of an iron-group-like list (test data only)
LEVELS = [
    ObservedLevel(id="L001", energy=0.0, J=4.5, parity="even", configuration="3d6 4s",
                  label="3d6(5D)4s 6D"),
    ObservedLevel(id="L002", energy=389.1, J=3.5, parity="even", configuration="3d6 4s",
                  label="3d6(5D)4s 6D", include=False),
    ObservedLevel(id="L003", energy=19396.3, J=4.5, parity="even", configuration="3d7",
                  label="3d7 4F", state=1),
    ObservedLevel(id="L004", energy=38458.9, J=4.5, parity="odd", configuration=None,
                  label=None),
]


def row(residual, calc, conf, mismatch=False):
    return SimpleNamespace(residual=residual, label_mismatch=mismatch, calc_label=calc,
                           configuration=conf)


ROWS = {"L001": row(0.5, "3d6(5D)4s 6D", "3d6 4s"), "L002": row(-3.0, "3d6(5D)4s 6D", "3d6 4s"),
        "L003": row(12.0, "3d6(3F2)4s 4F", "3d6 4s", mismatch=True),
        "L004": row(-1.0, "3d6(5D)4p 4F°", "3d6 4p")}


def shown(text, sigma=2.0):
    f = parse_filter(text)
    return [lv.id for lv in LEVELS if f.matches(lv, ROWS[lv.id], sigma)]


@pytest.mark.parametrize("text, ids", [
    ("", ["L001", "L002", "L003", "L004"]),
    ("c=3d6 4s", ["L001", "L002"]),           # spaces between subshells, as written
    ("c=3d64s", ["L001", "L002"]),
    ("c=3d6 4s J=9/2", ["L001"]),
    ("J=7/2,9/2 p=even", ["L001", "L002", "L003"]),
    ("J=4.5", ["L001", "L003", "L004"]),
    ("c=3d6 4p", ["L004"]),                   # the attached state's, where none is given
    ("p=o", ["L004"]),
    ("6D", ["L001", "L002"]),
    ("4F", ["L003", "L004"]),                 # the attached state's label counts too
    ("label=4F", ["L003"]),
    ("id=L001,L004", ["L001", "L004"]),
    ("e>1000", ["L003", "L004"]),
    ("e=0..400", ["L001", "L002"]),
    ("oc>2", ["L002", "L003"]),
    ("oc>2s", ["L003"]),                      # in units of sigma = 2
    ("is=excluded", ["L002"]),
    ("is=pinned", ["L003"]),
    ("is=mismatch", ["L003"]),
    ("is=outlier", ["L003"]),
    ("is=incl,pin", ["L003"]),
])
def test_filter_terms(text, ids):
    assert shown(text) == ids


def test_before_a_fit_rows_are_missing():
    f = parse_filter("oc>1")
    assert not f.matches(LEVELS[0], None, None)
    assert parse_filter("c=3d7").matches(LEVELS[2], None, None)


@pytest.mark.parametrize("text, word", [
    ("foo=bar", "foo"), ("J=7/3", "7/3"), ("p=up", "parity"), ("e>abc", "abc"),
    ("is=weird", "is="), ("e=5", "e=a..b"), ("c>3d7", "only e and oc"), ("J=", "no value"),
])
def test_bad_terms_say_what_is_wrong(text, word):
    with pytest.raises(FilterError) as err:
        parse_filter(text)
    assert word in str(err.value)
