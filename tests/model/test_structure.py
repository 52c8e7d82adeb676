"""Structure of the model: state counts, J blocks, centre of gravity, limits, symmetry."""

from math import comb

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from finefit import FinefitError, Model


@pytest.mark.parametrize(
    "configs, n_states",
    [
        (["2p2"], comb(6, 2)),
        (["3d3"], comb(10, 3)),
        (["3d6 4s"], comb(10, 6) * 2),
        (["4f2 5d"], comb(14, 2) * 10),
        (["3d6 4s", "3d7", "3d5 4s2"], comb(10, 6) * 2 + comb(10, 7) + comb(10, 5)),
        (["3p6 3d2", "3p4 3d4"], comb(10, 2) + comb(6, 4) * comb(10, 4)),
    ],
)
def test_state_count_is_product_of_binomials(configs, n_states):
    # number of determinants = prod over subshells of C(4l+2, N) (Condon & Shortley §7.1)
    model = Model(configs)
    assert model.n_determinants == n_states
    assert sum((2 * J + 1) * n for J, n in model.block_dimensions.items()) == n_states


def test_closed_subshells_add_nothing():
    # CONVENTIONS.md: '2p6 3d' has the levels of '3d'
    a = Model("2p6 3d")
    assert a.block_dimensions == {1.5: 1, 2.5: 1}
    assert [p.split(": ")[1] for p in a.parameters] == ["Eav", "zeta(3d)"]


def test_no_f_k_for_single_hole():
    # CONVENTIONS.md: no F^k(nl) for a subshell with fewer than two electrons or two holes
    names = Model("2p5 3p").parameters
    assert not any("F2(2p)" in n for n in names)
    assert "2p5 3p: G0(2p,3p)" in names


def test_subshell_active_in_both_when_full_in_one():
    model = Model(["3p6 3d2", "3p4 3d4"])
    names = model.parameters
    assert "3p4 3d4: F2(3p,3d)" in names
    assert not any(n.startswith("3p6 3d2: F2(3p") for n in names)  # constant for a full 3p
    assert any(n.startswith("3p6 3d2 | 3p4 3d4: R") for n in names)


def random_values(model, rng, scale=2000.0):
    vals = {}
    for name in model.parameters:
        short = name.split(": ")[1]
        if short == "Eav":
            vals[name] = rng.uniform(-5000, 5000)
        elif short.startswith("zeta"):
            vals[name] = rng.uniform(-800, 800)
        elif short.startswith("alpha"):
            vals[name] = rng.uniform(-50, 50)
        else:
            vals[name] = rng.uniform(0, scale) * (40 if short[1] in "246" else 5)
    return vals


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 2**31 - 1))
def test_centre_of_gravity_is_eav(seed):
    # CONVENTIONS.md E_av convention: sum (2J+1) E / sum (2J+1) = E_av per configuration
    model = _COG_MODEL
    rng = np.random.default_rng(seed)
    vals = random_values(model, rng)
    for n in model.parameters:
        if " | " in n:
            vals[n] = 0.0  # without configuration interaction
    sol = model.solve(vals)
    for cfg in model.configurations:
        lev = [x for x in sol.levels if x.configuration == cfg]
        w = np.array([2 * x.J + 1 for x in lev])
        e = np.array([x.energy for x in lev])
        assert (w * e).sum() / w.sum() == pytest.approx(vals[f"{cfg}: Eav"], abs=1e-6)


_COG_MODEL = Model(["3d2", "3d 4s", "4s2"])


def test_lande_interval_rule_small_zeta():
    # Landé interval rule: E(J) - E(J-1) = A J within a term, first order in zeta
    # (Landé 1923; Condon & Shortley 1935)  # from memory
    model = Model("3d2")
    sol = model.solve({"3d2: F2(3d)": 60000.0, "3d2: F4(3d)": 40000.0, "3d2: zeta(3d)": 1.0})
    f = sorted((x.J, x.energy) for x in sol.levels if x.label == "3d2 3F")
    (j2, e2), (j3, e3), (j4, e4) = f
    assert (e4 - e3) / (e3 - e2) == pytest.approx(4 / 3, rel=1e-3)


def test_jj_limit_large_zeta():
    # jj limit: for 2p 3s with zeta >> G the levels group by the p electron's j:
    # j = 3/2 (J = 1, 2) lies 3 zeta/2 above j = 1/2 (J = 0, 1)
    # (Condon & Shortley 1935, jj coupling)  # from memory
    model = Model("2p 3s")
    zeta = 10000.0
    sol = model.solve({"2p 3s: G1(2p,3s)": 30.0, "2p 3s: zeta(2p)": zeta})
    e = sorted(x.energy for x in sol.levels)
    low, high = np.mean(e[:2]), np.mean(e[2:])
    assert high - low == pytest.approx(1.5 * zeta, rel=2e-3)
    for lev in sol.levels:
        assert sol.purity(lev, "jj") > 0.99
        if model.block_dimensions[lev.J] > 1:  # a lone state is pure in every scheme
            assert sol.best_scheme(lev) in ("jj", "JK")
            assert sol.purity(lev, "LS") < 0.9


@pytest.mark.parametrize("l, n", [(1, 2), (2, 3), (2, 4), (3, 2)])
def test_particle_hole_conjugation(l, n):
    # l^N and l^(4l+2-N) have the same terms; zeta changes sign (Condon & Shortley 1935;
    # Racah 1942)  # from memory
    letter = "spdf"[l]
    shell = f"{l + 1 if l < 3 else 4}{letter}"
    a = Model(f"{shell}{n}")
    b = Model(f"{shell}{4 * l + 2 - n}")
    rng = np.random.default_rng(l * 10 + n)
    fk = {f"F{k}({shell})": rng.uniform(1e4, 6e4) for k in range(2, 2 * l + 1, 2)}
    zeta = 700.0
    va = {f"{shell}{n}: {k}": v for k, v in fk.items()} | {f"{shell}{n}: zeta({shell})": zeta}
    vb = {f"{shell}{4 * l + 2 - n}: {k}": v for k, v in fk.items()} | {
        f"{shell}{4 * l + 2 - n}: zeta({shell})": -zeta
    }
    ea = sorted((x.J, round(x.energy, 6)) for x in a.solve(va).levels)
    eb = sorted((x.J, round(x.energy, 6)) for x in b.solve(vb).levels)
    assert ea == eb
    la = sorted(x.label.split(" ", 1)[1] for x in a.solve(va).levels)
    lb = sorted(x.label.split(" ", 1)[1] for x in b.solve(vb).levels)
    assert [t.rstrip("°") for t in la] == [t.rstrip("°") for t in lb]


def test_independent_of_orbital_enumeration_order():
    configs = ["3d2", "3d 4s"]
    base = Model(configs)
    rng = np.random.default_rng(11)
    vals = random_values(base, rng)
    ref = base.solve(vals)
    n = base.basis.spin_orbitals.count
    for seed in range(3):
        perm = np.random.default_rng(seed).permutation(n)
        other = Model(configs, orbital_permutation=perm)
        assert other.parameters == base.parameters
        sol = other.solve(vals)
        assert sol.energies == pytest.approx(ref.energies, abs=1e-8)
        assert [x.label for x in sol.levels] == [x.label for x in ref.levels]
        assert [x.g for x in sol.levels] == pytest.approx([x.g for x in ref.levels], abs=1e-10)


def test_configuration_interaction_parameters_and_naming():
    model = Model(["3d2", "3d 4s"])
    # CONVENTIONS.md naming: a, b of the first configuration, c, d of the second
    assert "3d2 | 3d 4s: R2(3d3d,3d4s)" in model.parameters
    m3 = Model(["3d6 4s", "3d7", "3d5 4s2"])
    assert "3d7 | 3d5 4s2: R2(3d3d,4s4s)" in m3.parameters


def test_ci_mixes_configurations():
    model = Model(["3d2", "3d 4s"])
    vals = {"3d2: Eav": 0.0, "3d 4s: Eav": 100.0, "3d2 | 3d 4s: R2(3d3d,3d4s)": 3000.0}
    sol = model.solve(vals)
    mixed = [sol.composition(x, "LS") for x in sol.levels]
    assert any(len({c.configuration for c in comp if c.fraction > 0.05}) == 2 for comp in mixed)


def test_bad_inputs_name_the_item():
    with pytest.raises(FinefitError) as e:
        Model(["3d2", "3d 4p"])  # mixed parity
    assert e.value.item == "3d 4p"
    with pytest.raises(FinefitError) as e:
        Model("3k2")
    assert e.value.item == "3k2"
    model = Model("3d2")
    with pytest.raises(FinefitError) as e:
        model.solve({"3d2: F6(3d)": 1.0})
    assert e.value.item == "3d2: F6(3d)"
    with pytest.raises(FinefitError) as e:
        model.block(7)
    assert e.value.item == "J"
    with pytest.raises(FinefitError):
        model.solve({"3d2: F2(3d)": "lots"})
    with pytest.raises(FinefitError):
        model.solve({"3d2: F2(3d)": float("nan")})
