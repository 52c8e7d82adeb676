"""Ab initio starting values joined to sessions (configuration-average Hartree-Fock)."""

import pytest

from finefit.cli import main
from finefit.fitting.starting import DEFAULT_SCALES
from finefit.session import Session, load


@pytest.fixture(scope="module")
def neon_session():
    s = Session.new(["2p5 3p"], Z=10, charge=0)
    s.add_level(energy=149000.0, J=3, parity="even", label="2p5(2P°)3p 3D")
    return s


def test_default_scales_are_common_practice():
    # common practice: Slater integrals at 0.85 of Hartree-Fock, zeta unscaled
    assert DEFAULT_SCALES == {"F": 0.85, "G": 0.85, "R": 0.85, "zeta": 1.0}


def test_fill_stores_ab_initio_and_scaled_starts(neon_session):
    s = neon_session
    res = s.fill_ab_initio()
    from finefit import hartree_fock

    hf = hartree_fock("2p5 3p", Z=10)
    assert res.ab_initio["2p5 3p: F2(2p,3p)"] == pytest.approx(hf.F(2, "2p", "3p"))
    assert res.ab_initio["2p5 3p: G0(2p,3p)"] == pytest.approx(hf.G(0, "2p", "3p"))
    assert res.ab_initio["2p5 3p: zeta(2p)"] == pytest.approx(hf.zeta("2p"))
    p = s.parameters["2p5 3p: F2(2p,3p)"]
    assert p.ab_initio == pytest.approx(hf.F(2, "2p", "3p"))
    assert p.value == pytest.approx(0.85 * p.ab_initio)
    assert s.parameters["2p5 3p: zeta(2p)"].value == pytest.approx(hf.zeta("2p"))
    # physical range for neutral neon 2p5 3p: zeta(2p) some hundreds of cm-1
    # (observed about 520 cm-1, from memory)
    assert 400 < s.parameters["2p5 3p: zeta(2p)"].value < 800
    # E_av shifted so that the lowest computed level is the lowest observed one
    sol = s.solve()["even"]
    assert sol.levels[0].energy == pytest.approx(149000.0, abs=1e-6)


def test_ratios_refer_to_ab_initio(neon_session):
    r = neon_session.report()
    assert r.ratio_reference["2p5 3p: F2(2p,3p)"] == "ab initio"
    assert r.ratios["2p5 3p: F2(2p,3p)"] == pytest.approx(0.85)


def test_cli_abinitio_and_custom_scale(tmp_path, capsys):
    p = tmp_path / "s.toml"
    assert main(["new", str(p), "-c", "2p5 3p", "--Z", "10"]) == 0
    assert main(["abinitio", str(p), "--scale", "F=0.8"]) == 0
    s = load(p)
    f = s.parameters["2p5 3p: F2(2p,3p)"]
    assert f.value == pytest.approx(0.8 * f.ab_initio)
    assert main(["abinitio", str(p), "--scale", "Q=1"]) == 2
