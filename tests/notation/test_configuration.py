"""Configuration and J notation (CONVENTIONS.md: configurations, J)."""

import pytest

from finefit import FinefitError
from finefit.notation import format_j, parse_configuration, parse_j
from finefit.notation.labels import check_ls_label


@pytest.mark.parametrize(
    "text, parity, n_el",
    [
        ("3d6 4s", "even", 7),
        ("3d6.4s", "even", 7),
        ("2p5 3p", "even", 6),
        ("4f2 5d", "even", 3),
        ("4f 5d", "odd", 2),
        ("3s2 3p", "odd", 3),
    ],
)
def test_parse_and_parity(text, parity, n_el):
    # parity (-1)^(sum of l): CONVENTIONS.md
    c = parse_configuration(text)
    assert c.parity == parity
    assert c.n_electrons == n_el


def test_written_order_is_kept():
    c = parse_configuration("3d6.4s")
    assert [s.name for s in c.subshells] == ["3d", "4s"]
    assert str(c) == "3d6 4s"


@pytest.mark.parametrize(
    "text, token",
    [("3x2 4s", "3x2"), ("3d11", "3d11"), ("2d", "2d"), ("1p", "1p"), ("3d 3d", "3d"), ("", "")],
)
def test_bad_configurations_name_the_token(text, token):
    with pytest.raises(FinefitError) as err:
        parse_configuration(text)
    assert err.value.item == token


@pytest.mark.parametrize(
    "text, value", [("7/2", 3.5), ("3.5", 3.5), (3, 3.0), ("0", 0.0), (2.5, 2.5)]
)
def test_parse_j(text, value):
    assert parse_j(text) == value


@pytest.mark.parametrize("text", ["7/3", "-1", "abc", "1.25", True, 1e308, float("inf"), "1e400"])
def test_bad_j(text):
    with pytest.raises(FinefitError):
        parse_j(text)


def test_format_j():
    assert format_j(3.5) == "7/2"
    assert format_j(2.0) == "2"


@pytest.mark.parametrize(
    "label", ["3d6(5D)4s 6D", "2p5(2P°)3p 3D", "2p5(2P*)3p 3D", "3d5(6S)4s(7S)4p 8P°", "3d3 2D3"]
)
def test_good_ls_labels(label):
    assert "*" not in check_ls_label(label)


@pytest.mark.parametrize("label", ["3d6(5D 4s 6D", "3q6(5D)4s 6D", "3d6(5D)4s", "3d6(5D)4s 6d"])
def test_malformed_ls_labels(label):
    with pytest.raises(FinefitError):
        check_ls_label(label)
