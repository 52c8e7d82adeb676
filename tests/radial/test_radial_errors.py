"""Bad input and non-convergence give FinefitError naming the offending token."""

from __future__ import annotations

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from finefit.errors import FinefitError
from finefit.radial import hartree_fock, hydrogenic
from finefit.radial._config import complete_configuration


@pytest.mark.parametrize(
    "conf,token",
    [
        ("3d6 4x2", "4x2"),  # unknown orbital letter
        ("2p7", "2p7"),  # over-full subshell
        ("2d", "2d"),  # l >= n
        ("1s2 1s", "1s"),  # subshell twice
        ("3d6 ,4s", ",4s"),  # unreadable token
    ],
)
def test_bad_tokens_are_named(conf, token):
    with pytest.raises(FinefitError) as err:
        hartree_fock(conf, Z=26)
    assert err.value.item == token
    assert token in str(err.value)


def test_too_many_electrons_names_configuration():
    with pytest.raises(FinefitError) as err:
        hartree_fock("3d10 4s2 4p6", Z=16)
    assert err.value.item == "3d10 4s2 4p6"


def test_core_that_cannot_be_closed():
    # neutral Fe with only 3d7 written: 4s would have to hold one electron
    with pytest.raises(FinefitError) as err:
        hartree_fock("3d7", Z=26)
    assert err.value.item == "3d7"


@pytest.mark.parametrize(
    "kwargs,item",
    [
        ({"Z": 0}, "Z"),
        ({"Z": 2.5}, "Z"),
        ({"Z": "Fe"}, "Z"),
        ({"Z": 10, "charge": 10}, "charge"),
        ({"Z": 10, "charge": 0.5}, "charge"),
        ({"Z": 10, "grid_step": 1.0}, "grid_step"),
        ({"Z": 10, "tolerance": 0.0}, "tolerance"),
        ({"Z": 10, "max_iterations": 0}, "max_iterations"),
        ({"Z": 10, "r_max": -3.0}, "r_max"),
    ],
)
def test_bad_numbers_are_named(kwargs, item):
    with pytest.raises(FinefitError) as err:
        hartree_fock("2p6", **kwargs)
    assert err.value.item == item


def test_empty_configuration():
    with pytest.raises(FinefitError):
        hartree_fock("   ", Z=10)


def test_non_convergence_is_a_finefit_error():
    with pytest.raises(FinefitError) as err:
        hartree_fock("3d6 4s2", Z=26, max_iterations=3)
    assert "did not converge" in str(err.value)
    assert err.value.item == "3d6 4s2"
    assert isinstance(err.value, ValueError)


def test_unknown_orbital_and_unit_named():
    hf = hydrogenic("1s 2p", Z=1, grid_step=0.1)
    with pytest.raises(FinefitError) as err:
        hf.orbital_energy("3d")
    assert err.value.item == "3d"
    with pytest.raises(FinefitError) as err:
        hf.slater_integral(1, "1s", "2p", "2p", "4f")
    assert err.value.item == "4f"
    with pytest.raises(FinefitError) as err:
        hf.F(0, "1s", unit="eV")
    assert err.value.item == "eV"
    with pytest.raises(FinefitError) as err:
        hf.slater_integral(-1, "1s", "1s", "1s", "1s")
    assert err.value.item == "k"


def test_ci_integral_needs_same_element():
    a = hydrogenic("2p", Z=2, grid_step=0.1)
    b = hydrogenic("2p", Z=3, grid_step=0.1)
    with pytest.raises(FinefitError):
        a.configuration_interaction_integral(1, "2p", "2p", "2p", "2p", b)


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=20), st.integers(min_value=-5, max_value=130))
def test_configuration_parsing_never_crashes(text, Z):
    # Anything the user types is either accepted or rejected with a FinefitError
    try:
        full = complete_configuration(text, max(Z, 1), 0)
    except FinefitError:
        return
    assert full.n_electrons == max(Z, 1)
