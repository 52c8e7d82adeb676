import pytest

from finefit.session import Session

# C I 2p2 levels, C. E. Moore, Atomic Energy Levels, NSRDS-NBS 35 (1971), Vol. I  # from memory
C_I_2P2 = [
    (0.00, 0, "2p2 3P"),
    (16.40, 1, "2p2 3P"),
    (43.40, 2, "2p2 3P"),
    (10192.63, 2, "2p2 1D"),
    (21648.01, 0, "2p2 1S"),
]


@pytest.fixture
def carbon_session():
    s = Session.new(["2p2"], Z=6, charge=0, name="C I")
    s.set_parameter("2p2: Eav", 10000.0, vary=True)
    s.set_parameter("2p2: F2(2p)", 45000.0, vary=True)
    s.set_parameter("2p2: zeta(2p)", 20.0, vary=True)
    for e, J, lab in C_I_2P2:
        s.add_level(energy=e, J=J, parity="even", configuration="2p2", label=lab,
                    uncertainty=0.1)
    return s
