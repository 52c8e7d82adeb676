"""Vacuum/air conversion against published check values."""

import numpy as np
import pytest

import finefit
from finefit import FinefitError


def test_conventions_example_pair():
    # CONVENTIONS.md wavelength example: 5854.1101 A vacuum <-> 5852.4878 A air, the
    # Birch & Downs (1994) formula as given by Morton (2000, ApJS 130, 403)  # from memory
    assert finefit.vacuum_to_air(5854.1101) == pytest.approx(5852.4878, abs=2e-4)
    assert finefit.air_to_vacuum(5852.4878) == pytest.approx(5854.1101, abs=2e-4)


@pytest.mark.parametrize(
    "air, vacuum",
    [
        (5889.950, 5891.583),  # Na I D2, air and vacuum values  # from memory
        (5895.924, 5897.558),  # Na I D1  # from memory
        (6562.80, 6564.61),  # H-alpha (fine-structure mean)  # from memory
        (4861.33, 4862.69),  # H-beta  # from memory
    ],
)
def test_known_lines(air, vacuum):
    assert finefit.air_to_vacuum(air) == pytest.approx(vacuum, abs=0.01)
    assert finefit.vacuum_to_air(vacuum) == pytest.approx(air, abs=0.01)


def test_round_trip_and_arrays():
    lam = np.linspace(2000.0, 20000.0, 1001)
    back = finefit.air_to_vacuum(finefit.vacuum_to_air(lam))
    assert np.max(np.abs(back - lam)) < 1e-9
    assert finefit.vacuum_to_air(lam).shape == lam.shape


def test_below_2000_is_an_error_and_reported_in_vacuum():
    with pytest.raises(FinefitError):
        finefit.vacuum_to_air(1215.67)
    from finefit.lines import reported_wavelength

    lam, in_air = reported_wavelength(np.array([1215.67, 6564.61]))
    assert lam[0] == 1215.67 and not in_air[0]  # Lyman alpha stays in vacuum (common practice)
    assert lam[1] == pytest.approx(6562.80, abs=0.01) and in_air[1]


def test_air_range_is_switchable():
    from finefit.session import Session

    s = Session.new(["3s", "3p"], Z=11)
    s.set_parameter("3p: Eav", 16960.0)
    lines, _ = s.predict_lines({("3s", "3p"): 4.3})
    assert all(x.air_wavelength is not None for x in lines)  # 589 nm: in air by default
    lines, _ = s.predict_lines({("3s", "3p"): 4.3}, air_range=(0.0, 0.0))
    assert all(x.air_wavelength is None for x in lines)
