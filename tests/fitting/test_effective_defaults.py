"""Defaults of the effective operators in a new session, and the spin-orbit ab initio option."""

import pytest

from finefit import hartree_fock
from finefit.cli import main
from finefit.model.estimates import TYPICAL_D, TYPICAL_F, default_link, typical_value
from finefit.session import Session, load


def test_new_iron_group_session_varies_alpha_and_beta_at_typical_values():
    s = Session.new(["3d6 4s", "3d7"], Z=26, charge=1)
    for c in ("3d6 4s", "3d7"):
        a, b = s.parameters[f"{c}: alpha(3d)"], s.parameters[f"{c}: beta(3d)"]
        assert a.vary and b.vary  # common practice in d-shell fits
        assert a.value == TYPICAL_D["alpha"] > 0 and b.value == TYPICAL_D["beta"] < 0
    assert not s.parameters["3d6 4s | 3d7: R2(3d4s,3d3d)"].vary
    assert s.parameters["3d6 4s: zeta(3d)"].value == 0.0  # ab initio fills it


def test_new_lanthanide_session():
    s = Session.new(["4f2"], Z=59, charge=3)
    for short in ("alpha", "beta", "gamma"):
        p = s.parameters[f"4f2: {short}(4f)"]
        assert p.vary and p.value == TYPICAL_F[short]
    # signs of the usual lanthanide values (# common practice): beta < 0 < alpha, gamma
    assert TYPICAL_F["beta"] < 0 < TYPICAL_F["alpha"] < TYPICAL_F["gamma"]


def test_p_shell_corrections_stay_fixed_at_zero():
    s = Session.new(["2p2"], Z=6)
    p = s.parameters["2p2: alpha(2p)"]
    assert not p.vary and p.value == 0.0


def test_old_session_file_keeps_its_model(tmp_path):
    # a file written before beta(3d) existed: the new parameter enters fixed at 0
    s = Session.new(["3d2"], Z=22, charge=2)
    s.set_parameter("3d2: F2(3d)", 50000.0)
    text = s.to_toml()
    start = text.index('[parameters."3d2: beta(3d)"]')
    end = text.find("\n[", start + 10)
    p = tmp_path / "old.toml"
    p.write_text(text[:start] + (text[end + 1 :] if end >= 0 else ""))
    old = load(p)
    beta = old.parameters["3d2: beta(3d)"]
    assert beta.value == 0.0 and not beta.vary
    assert old.parameters["3d2: F2(3d)"].value == 50000.0


def test_typical_values_and_links_helpers():
    assert typical_value("beta(4f)") == TYPICAL_F["beta"]
    assert typical_value("alpha(2p)") == 0.0
    assert typical_value("F2(3d)") == 0.0
    assert default_link("4f2", "M2(4f)") == "4f2: M(4f)"
    assert default_link("4f2", "P6(4f)") == "4f2: P(4f)"
    assert default_link("4f2", "beta(4f)") is None
    # the usual fixed ratios (# common practice): M2/M0 = 0.56, M4/M0 = 0.31, P4/P2 = 0.75,
    # P6/P2 = 0.5
    assert TYPICAL_F["M2"] / TYPICAL_F["M0"] == pytest.approx(0.56)
    assert TYPICAL_F["M4"] / TYPICAL_F["M0"] == pytest.approx(0.31, abs=0.005)
    assert TYPICAL_F["P4"] / TYPICAL_F["P2"] == pytest.approx(0.75)
    assert TYPICAL_F["P6"] / TYPICAL_F["P2"] == pytest.approx(0.5)


def test_ab_initio_zeta_is_blume_watson_unless_asked(tmp_path):
    s = Session.new(["3d2"], Z=22, charge=2)
    s.fill_ab_initio()
    hf = hartree_fock("3d2", Z=22, charge=2)
    bw = hf.zeta("3d")
    cf = hf.zeta("3d", method="central-field")
    assert s.parameters["3d2: zeta(3d)"].ab_initio == pytest.approx(bw)
    assert bw < 0.9 * cf
    s.fill_ab_initio(zeta_method="central-field")
    assert s.parameters["3d2: zeta(3d)"].ab_initio == pytest.approx(cf)
    # effective operators keep their values through the ab initio step
    assert s.parameters["3d2: beta(3d)"].value == TYPICAL_D["beta"]
    p = tmp_path / "s.toml"
    assert main(["new", str(p), "-c", "3d2", "--Z", "22", "--charge", "2"]) == 0
    assert main(["abinitio", str(p), "--zeta", "central-field"]) == 0
    assert load(p).parameters["3d2: zeta(3d)"].ab_initio == pytest.approx(cf)
    assert main(["abinitio", str(p), "--zeta", "relativistic"]) == 2
