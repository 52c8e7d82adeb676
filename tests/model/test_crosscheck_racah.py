"""Independent cross-check: intermediate-coupling levels of two non-equivalent electrons.

Nothing from finefit is used except its public API (``Model``, ``solve``). Two
independent calculations are implemented here with sympy.physics.wigner and numpy:

1. Racah algebra in the coupled basis |(l1 l2)L, (s1 s2)S; J>: closed forms for the
   direct (F^k) and exchange (G^k) coefficients with one 6j symbol, spin-orbit with a
   9j symbol (tensor-operator formulas of Racah 1942 / Edmonds 1957).
2. Slater determinants |a(m1 ms1) b(m2 ms2)| with Gaunt coefficients (Condon &
   Shortley 1935 ch. VI), spin-orbit from explicit l, s matrices, J found from J^2.

The two are compared with each other (a check of this file's own formulas) and with
finefit, level by level for every J, after the E_av convention of CONVENTIONS.md:
every operator except E_av is traceless over the configuration's states.

Radial integrals are the plain F^k, G^k (not F_k = F^k/D_k). Parameter values are
random numbers (fixed seed), not data.
"""

from functools import cache

import numpy as np
import pytest
from sympy.physics.wigner import wigner_3j, wigner_6j, wigner_9j

from finefit import Model

LETTERS = "spdfghi"
TOL = 1e-6  # cm^-1


# --------------------------------------------------------------------------------------
# Angular factors (floats, cached)
# --------------------------------------------------------------------------------------
@cache
def w3j(a, b, c, d, e, f):
    return float(wigner_3j(a, b, c, d, e, f))


@cache
def w6j(a, b, c, d, e, f):
    return float(wigner_6j(a, b, c, d, e, f))


@cache
def w9j(a, b, c, d, e, f, g, h, i):
    return float(wigner_9j(a, b, c, d, e, f, g, h, i))


def red_c(l1, k, l2):
    """<l1||C^k||l2> = (-1)^l1 sqrt((2l1+1)(2l2+1)) (l1 k l2; 0 0 0).

    Edmonds 1957 eq. (5.4.5).  # from memory
    """
    return (-1) ** l1 * np.sqrt((2 * l1 + 1) * (2 * l2 + 1)) * w3j(l1, k, l2, 0, 0, 0)


def red_j(j):
    """<j||J||j> = sqrt(j(j+1)(2j+1)), Edmonds 1957 eq. (5.4.3).  # from memory

    Reduced matrix elements throughout in the Edmonds convention
    <j m|T^k_q|j' m'> = (-1)^(j-m) (j k j'; -m q m') <j||T^k||j'>.
    """
    return np.sqrt(j * (j + 1) * (2 * j + 1))


def gaunt(k, l, m, lp, mp):
    """c^k(l m; l' m') = (-1)^m sqrt((2l+1)(2l'+1)) (l k l'; 0 0 0)(l k l'; -m, m-m', m').

    Condon & Shortley 1935 ch. VI, sec. 6 (the c^k of their Table 1^6); same
    definition as the two-electron formula of CONVENTIONS.md.  # from memory
    """
    if abs(m - mp) > k:
        return 0.0
    return (
        (-1) ** m
        * np.sqrt((2 * l + 1) * (2 * lp + 1))
        * w3j(l, k, lp, 0, 0, 0)
        * w3j(l, k, lp, -m, m - mp, mp)
    )


def ks_direct(l1, l2):
    return list(range(2, 2 * min(l1, l2) + 1, 2))


def ks_exchange(l1, l2):
    return list(range(abs(l1 - l2), l1 + l2 + 1, 2))


def parse(conf):
    """'3d 4p' -> ((n1, l1), (n2, l2)), labels like '3d'."""
    (a, b) = conf.split()
    return a, b, LETTERS.index(a[-1]), LETTERS.index(b[-1])


def names(conf):
    a, b, l1, l2 = parse(conf)
    out = {}
    for k in ks_direct(l1, l2):
        out[("F", k)] = f"{conf}: F{k}({a},{b})"
    for k in ks_exchange(l1, l2):
        out[("G", k)] = f"{conf}: G{k}({a},{b})"
    if l1 > 0:
        out[("z", 1)] = f"{conf}: zeta({a})"
    if l2 > 0:
        out[("z", 2)] = f"{conf}: zeta({b})"
    return out


# --------------------------------------------------------------------------------------
# Route 1: Racah algebra in |(l1 l2)L (s1 s2)S J>
# --------------------------------------------------------------------------------------
def term_energy(l1, l2, L, S, F, G):
    """Electrostatic energy of the term (l1 l2) 2S+1L, k = 0 omitted (in E_av).

    E = sum_k f_k F^k + g_k G^k,
      f_k = (-1)^(l1+l2+L) <l1||C^k||l1><l2||C^k||l2> {l1 l2 L; l2 l1 k},
      g_k = (-1)^S <l1||C^k||l2>^2 {l1 l2 L; l1 l2 k}.
    Racah 1942 (Phys. Rev. 62, 438) eqs. for two non-equivalent electrons;
    f_k follows from Edmonds 1957 eq. (7.1.6)
    for C^k(1).C^k(2); g_k from the exchange term -<ab|g|ba> with the phases
    (-1)^(l1+l2-L) (orbital) and (-1)^(1-S) (spin) of interchanging the electrons.
    # from memory
    """
    e = 0.0
    for k, fk in F.items():
        e += (
            (-1) ** (l1 + l2 + L)
            * red_c(l1, k, l1)
            * red_c(l2, k, l2)
            * w6j(l1, l2, L, l2, l1, k)
            * fk
        )
    for k, gk in G.items():
        e += (-1) ** S * red_c(l1, k, l2) ** 2 * w6j(l1, l2, L, l1, l2, k) * gk
    return e


def red_l_coupled(l1, l2, L, Lp, which):
    """<(l1 l2)L||l(i)||(l1 l2)L'>, Edmonds 1957 eqs. (7.1.7) (i = 1), (7.1.8) (i = 2).

    (7.1.7): <j1 j2 J||T^k(1)||j1' j2 J'> = (-1)^(j1+j2+J'+k) [J,J']^1/2
             {j1 J j2; J' j1' k} <j1||T^k||j1'>
    (7.1.8): <j1 j2 J||U^k(2)||j1 j2' J'> = (-1)^(j1+j2+J+k) [J,J']^1/2
             {j2 J j1; J' j2' k} <j2||U^k||j2'>          # from memory
    Used both for orbital (l1, l2) and spin (1/2, 1/2) spaces.
    """
    root = np.sqrt((2 * L + 1) * (2 * Lp + 1))
    if which == 1:
        phase = (-1) ** int(round(l1 + l2 + Lp + 1))
        return phase * root * w6j(l1, L, l2, Lp, l1, 1) * red_j(l1)
    phase = (-1) ** int(round(l1 + l2 + L + 1))
    return phase * root * w6j(l2, L, l1, Lp, l2, 1) * red_j(l2)


def spin_orbit_element(l1, l2, L, S, Lp, Sp, J, which):
    """<(l1 l2)L (s1 s2)S J| l(i).s(i) |(l1 l2)L' (s1 s2)S' J>.

    l.s = -sqrt(3) [l^(1) x s^(1)]^(0); for a scalar (k = 0) double tensor
    <LSJ M|X^0|L'S'J M> = <LSJ||X^0||L'S'J>/sqrt(2J+1), and Edmonds 1957 eq. (7.1.5)
    <LSJ||[T^1 U^1]^0||L'S'J> = (2J+1) {L L' 1; S S' 1; J J 0} <L||T^1||L'><S||U^1||S'>.
    # from memory
    """
    half = 0.5
    ninej = w9j(L, Lp, 1, S, Sp, 1, J, J, 0)
    if ninej == 0.0:
        return 0.0
    lr = red_l_coupled(l1, l2, L, Lp, which)
    sr = red_l_coupled(half, half, S, Sp, which)
    return -np.sqrt(3.0) * np.sqrt(2 * J + 1) * ninej * lr * sr


def racah_levels(l1, l2, F, G, z1, z2):
    """{J: sorted energies}, electrostatic made traceless over all 4(2l1+1)(2l2+1) states."""
    terms = [(L, S) for L in range(abs(l1 - l2), l1 + l2 + 1) for S in (0, 1)]
    e_ls = {(L, S): term_energy(l1, l2, L, S, F, G) for (L, S) in terms}
    n_states = 4 * (2 * l1 + 1) * (2 * l2 + 1)
    assert sum((2 * L + 1) * (2 * S + 1) for L, S in terms) == n_states
    shift = sum((2 * L + 1) * (2 * S + 1) * e for (L, S), e in e_ls.items()) / n_states
    levels = {}
    for J in range(0, l1 + l2 + 2):
        basis = [(L, S) for (L, S) in terms if abs(L - S) <= J <= L + S]
        if not basis:
            continue
        h = np.zeros((len(basis), len(basis)))
        for i, (L, S) in enumerate(basis):
            h[i, i] = e_ls[(L, S)] - shift
            for j, (Lp, Sp) in enumerate(basis):
                h[i, j] += z1 * spin_orbit_element(l1, l2, L, S, Lp, Sp, J, 1)
                h[i, j] += z2 * spin_orbit_element(l1, l2, L, S, Lp, Sp, J, 2)
        assert np.allclose(h, h.T, atol=1e-10)
        levels[J] = np.linalg.eigvalsh(h)
    return levels


# --------------------------------------------------------------------------------------
# Route 2: Slater determinants |a(m1 ms1) b(m2 ms2)| (Condon & Shortley 1935)
# --------------------------------------------------------------------------------------
def ang_mom(j):
    """(jz, j+, j-) for angular momentum j in the basis m = j, j-1, ..., -j.

    <m+1|j+|m> = sqrt(j(j+1) - m(m+1)), Condon & Shortley 1935 ch. III (their phase).
    # from memory
    """
    ms = np.arange(j, -j - 1, -1)
    jz = np.diag(ms)
    jp = np.zeros((len(ms), len(ms)))
    for i in range(1, len(ms)):
        m = ms[i]
        jp[i - 1, i] = np.sqrt(j * (j + 1) - m * (m + 1))
    return jz, jp, jp.T


def determinant_levels(l1, l2, F, G, z1, z2):
    """{J: sorted energies} from the determinant matrix.

    Determinants |a b| with a = (l1 m1 ms1) first; for non-equivalent a, b they are in
    one-to-one correspondence with the product states (m1, ms1, m2, ms2).
    H_ij = <a_i b_i|g|a_j b_j> - <a_i b_i|g|b_j a_j>   (Condon & Shortley 1935 ch. VI, 6^8)
    <ab|g|cd> = d(ms_a,ms_c) d(ms_b,ms_d) d(m_a+m_b, m_c+m_d)
                sum_k c^k(a;c) c^k(d;b) R^k(ab,cd)
    (Condon & Shortley 1935 ch. VI, 8^6; CONVENTIONS.md writes it without the
    d(m_a+m_b, m_c+m_d), which is implied there). One-electron operators
    act on the product states directly (no reordering of a, b).  # from memory
    """
    m1s = list(range(l1, -l1 - 1, -1))
    m2s = list(range(l2, -l2 - 1, -1))
    sps = [0.5, -0.5]
    states = [(m1, s1, m2, s2) for m1 in m1s for s1 in sps for m2 in m2s for s2 in sps]
    n = len(states)
    h = np.zeros((n, n))
    for i, (m1, s1, m2, s2) in enumerate(states):
        for j, (n1, t1, n2, t2) in enumerate(states):
            v = 0.0
            if m1 + m2 != n1 + n2:
                continue
            if s1 == t1 and s2 == t2:  # direct: c = a', d = b'
                for k, fk in F.items():
                    v += gaunt(k, l1, m1, l1, n1) * gaunt(k, l2, n2, l2, m2) * fk
            if s1 == t2 and s2 == t1:  # exchange: c = b', d = a'
                for k, gk in G.items():
                    v -= gaunt(k, l1, m1, l2, n2) * gaunt(k, l1, n1, l2, m2) * gk
            h[i, j] = v
    h -= np.trace(h) / n * np.eye(n)  # E_av convention (l.s is traceless already)

    # one-electron operators on the ordered product space l1 x s1 x l2 x s2
    def embed(ops):
        out = ops[0]
        for o in ops[1:]:
            out = np.kron(out, o)
        return out

    lz1, lp1, lm1 = ang_mom(l1)
    lz2, lp2, lm2 = ang_mom(l2)
    sz, sp, sm = ang_mom(0.5)
    e1, e2, es = np.eye(2 * l1 + 1), np.eye(2 * l2 + 1), np.eye(2)

    def one(op, slot):
        ops = [e1, es, e2, es]
        ops[slot] = op
        return embed(ops)

    def two(op_a, slot_a, op_b, slot_b):
        ops = [e1, es, e2, es]
        ops[slot_a] = op_a
        ops[slot_b] = op_b
        return embed(ops)

    # l.s = lz sz + (l+ s- + l- s+)/2
    ls1 = two(lz1, 0, sz, 1) + 0.5 * (two(lp1, 0, sm, 1) + two(lm1, 0, sp, 1))
    ls2 = two(lz2, 2, sz, 3) + 0.5 * (two(lp2, 2, sm, 3) + two(lm2, 2, sp, 3))
    h = h + z1 * ls1 + z2 * ls2

    jz = one(lz1, 0) + one(sz, 1) + one(lz2, 2) + one(sz, 3)
    jp = one(lp1, 0) + one(sp, 1) + one(lp2, 2) + one(sp, 3)
    j2 = jp.T @ jp + jz @ jz + jz  # J^2 = J- J+ + Jz^2 + Jz
    assert np.allclose(h, h.T, atol=1e-10)

    levels = {}
    mz = np.diag(jz)
    for J in range(0, l1 + l2 + 2):
        idx = np.flatnonzero(np.isclose(mz, J))  # M = J sub-space
        if idx.size == 0:
            continue
        w, v = np.linalg.eigh(j2[np.ix_(idx, idx)])
        sel = v[:, np.isclose(w, J * (J + 1))]  # states of this J with M = J
        if sel.shape[1] == 0:
            continue
        hj = sel.T @ h[np.ix_(idx, idx)] @ sel
        levels[J] = np.linalg.eigvalsh(0.5 * (hj + hj.T))
    return levels


# --------------------------------------------------------------------------------------
# finefit
# --------------------------------------------------------------------------------------
def finefit_levels(conf, values, eav=0.0):
    model = Model([conf])
    sol = model.solve({f"{conf}: Eav": eav, **values})
    out = {}
    weight_sum = 0.0
    n = 0
    for lev in sol.levels:
        J = int(round(lev.J))
        assert abs(lev.J - J) < 1e-12
        out.setdefault(J, []).append(lev.energy)
        weight_sum += (2 * J + 1) * lev.energy
        n += 2 * J + 1
    return {J: np.sort(e) for J, e in out.items()}, weight_sum / n, n


def split(conf, params):
    """params keyed like names(): ('F', k), ('G', k), ('z', i) -> (F, G, z1, z2)."""
    F = {k: v for (t, k), v in params.items() if t == "F"}
    G = {k: v for (t, k), v in params.items() if t == "G"}
    return F, G, params.get(("z", 1), 0.0), params.get(("z", 2), 0.0)


def assert_same(mine, theirs, what):
    assert sorted(mine) == sorted(theirs), f"{what}: J values {sorted(mine)} vs {sorted(theirs)}"
    for J in mine:
        a, b = np.sort(mine[J]), np.sort(theirs[J])
        assert a.shape == b.shape, f"{what}: J={J} has {a.size} vs {b.size} levels"
        dev = np.max(np.abs(a - b))
        assert dev < TOL, f"{what}: J={J} max |dE| = {dev:.3e} cm^-1\n{a}\n{b}"


CONFS = ["3d 4p", "2p 3d", "4f 5d", "2p 3p", "3d 4s", "2p 3s", "4f 5p"]


def random_params(conf, rng):
    """Random magnitudes of the usual order (cm^-1); invented values, not data."""
    out = {}
    for key in names(conf):
        t = key[0]
        if t == "F":
            out[key] = rng.uniform(1000.0, 40000.0)
        elif t == "G":
            out[key] = rng.uniform(500.0, 20000.0)
        else:
            out[key] = rng.uniform(50.0, 3000.0)
    return out


# --------------------------------------------------------------------------------------
# Checks of this file's own formulas
# --------------------------------------------------------------------------------------
def test_sp_textbook():
    # Condon & Shortley 1935 Table 1^7 (sp): 1P - 3P = 2 G_1 = 2 G^1/3, G_1 = G^1/3.
    # from memory
    F, G = {}, {1: 3000.0}
    e1p = term_energy(0, 1, 1, 0, F, G)
    e3p = term_energy(0, 1, 1, 1, F, G)
    assert e1p - e3p == pytest.approx(2 * 3000.0 / 3, abs=1e-9)
    # one p electron with an s spectator, zeta only: j = 3/2 at zeta/2, j = 1/2 at -zeta
    # (elementary: l.s = [j(j+1) - l(l+1) - s(s+1)]/2).
    lev = racah_levels(0, 1, {}, {}, 0.0, 400.0)
    assert np.allclose(lev[2], [200.0])
    assert np.allclose(lev[1], [-400.0, 200.0])
    assert np.allclose(lev[0], [-400.0])


def test_pd_textbook():
    # Condon & Shortley 1935 Table 2^7 (pd), F_2 = F^2/35, G_1 = G^1/15, G_3 = G^3/245:
    #   1P: 7F_2 + G_1 + 63G_3     3P: 7F_2 - G_1 - 63G_3
    #   1D: -7F_2 - 3G_1 + 21G_3   3D: -7F_2 + 3G_1 - 21G_3
    #   1F: 2F_2 + 6G_1 + 3G_3     3F: 2F_2 - 6G_1 - 3G_3       (F0 omitted)  # from memory
    # Consistency of the recalled direct row: sum (2L+1) f_2 = 3*7 - 5*7 + 7*2 = 0, as it
    # must (C^2(1).C^2(2) is traceless over the product space).
    table = {1: (7, 1, 63), 2: (-7, -3, 21), 3: (2, 6, 3)}
    for L, (f2, g1, g3) in table.items():
        for S in (0, 1):
            sign = 1 if S == 0 else -1
            want = f2 + sign * (g1 + g3)
            got = term_energy(1, 2, L, S, {2: 35.0}, {1: 15.0, 3: 245.0})
            assert got == pytest.approx(want, abs=1e-9), (L, S)


@pytest.mark.parametrize("conf", CONFS)
def test_two_routes_agree(conf):
    rng = np.random.default_rng(20240611)
    _, _, l1, l2 = parse(conf)
    F, G, z1, z2 = split(conf, random_params(conf, rng))
    assert_same(
        racah_levels(l1, l2, F, G, z1, z2),
        determinant_levels(l1, l2, F, G, z1, z2),
        f"{conf} Racah vs determinants",
    )


# --------------------------------------------------------------------------------------
# finefit against the independent calculation
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("conf", CONFS)
def test_parameter_names(conf):
    assert sorted(Model([conf]).parameters) == sorted([f"{conf}: Eav", *names(conf).values()])


@pytest.mark.parametrize("conf", CONFS)
def test_finefit_random_parameters(conf):
    rng = np.random.default_rng(12345)
    _, _, l1, l2 = parse(conf)
    params = random_params(conf, rng)
    F, G, z1, z2 = split(conf, params)
    mine = racah_levels(l1, l2, F, G, z1, z2)
    eav = 51234.5
    theirs, centroid, n = finefit_levels(conf, {names(conf)[k]: v for k, v in params.items()}, eav)
    # E_av convention: (2J+1)-weighted centre of gravity is E_av (CONVENTIONS.md)
    assert n == 4 * (2 * l1 + 1) * (2 * l2 + 1)
    assert centroid == pytest.approx(eav, abs=TOL)
    assert_same(mine, {J: e - eav for J, e in theirs.items()}, f"{conf} random")


@pytest.mark.parametrize(
    "conf,key",
    [(c, k) for c in CONFS for k in names(c)],
    ids=lambda x: x if isinstance(x, str) else f"{x[0]}{x[1]}",
)
def test_finefit_single_parameter(conf, key):
    """One parameter alone at 1000 cm^-1: localises any disagreement to one operator."""
    _, _, l1, l2 = parse(conf)
    params = {key: 1000.0}
    F, G, z1, z2 = split(conf, params)
    mine = racah_levels(l1, l2, F, G, z1, z2)
    theirs, centroid, _ = finefit_levels(conf, {names(conf)[key]: 1000.0})
    assert centroid == pytest.approx(0.0, abs=TOL)
    assert_same(mine, theirs, f"{conf} {names(conf)[key]} alone")
