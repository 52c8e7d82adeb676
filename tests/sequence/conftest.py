from pathlib import Path

import pytest

from finefit.session import Session

LEVELS = Path(__file__).resolve().parents[1] / "data" / "levels"

# the 3d2 sequence in tests/data/levels (see its README): file, Z, charge
REAL_3D2 = [("Sc_II.tsv", 21, 1), ("Ti_III.tsv", 22, 2), ("V_IV.tsv", 23, 3)]


def real_member(name: str, Z: int, charge: int) -> Session:
    """A published 3d2 level list imported as it is, Hartree-Fock starts, alpha varied
    (the Trees correction is needed for 3d2: common practice); beta held at 0 (with nine
    levels and six free parameters it takes over part of F2 differently in each member,
    and the trend of F2 along the sequence is what this model follows)."""
    s = Session.new(["3d2"], Z=Z, charge=charge)
    s.import_levels(LEVELS / name)
    s.fill_ab_initio()
    s.set_parameter("3d2: alpha(3d)", 30.0, vary=True)
    s.set_parameter("3d2: beta(3d)", 0.0, vary=False)
    return s


@pytest.fixture(scope="session")
def real_3d2() -> list[Session]:
    return [real_member(*x) for x in REAL_3D2]
