"""Level optimisation (least squares over level energies) on invented level systems.

All level systems here are invented: random energies, random line sets, Gaussian noise
of the stated size. The checks are statistical properties every correct weighted
least-squares solution has (unit-variance normalised errors, covariance = Monte-Carlo
spread), closed forms worked by hand, and the project's wavelength module.
"""

import numpy as np
import pytest

from finefit.errors import FinefitError
from finefit.lines.classify import KnownLevel
from finefit.lines.levelopt import optimise_levels, solve_level_system
from finefit.lines.wavelengths import vacuum_to_air


def invented_system(rng, n_levels=30, n_lines=120, connected=True):
    """Levels of alternating parity and random lines between them (invented)."""
    e = np.sort(rng.uniform(0.0, 40000.0, n_levels))
    e[0] = 0.0
    levels = [KnownLevel(f"L{i:03d}", float(e[i]), 1.0, "even" if i % 2 == 0 else "odd")
              for i in range(n_levels)]
    pairs = set()
    if connected:  # a spanning chain first, so that every level is reachable
        for i in range(1, n_levels):
            j = int(rng.integers(0, i))
            pairs.add((min(i, j), max(i, j)))
    while len(pairs) < n_lines:
        i, j = rng.choice(n_levels, 2, replace=False)
        pairs.add((int(min(i, j)), int(max(i, j))))
    lo = np.array([p[0] for p in pairs])
    up = np.array([p[1] for p in pairs])
    u = rng.uniform(0.001, 0.02, lo.size)  # cm^-1, lines of very different quality
    return levels, e, lo, up, u


def run(levels, lo, up, sigma, u, **kw):
    cls = [[(levels[a].id, levels[b].id)] for a, b in zip(lo, up, strict=True)]
    return optimise_levels(levels, sigma, u, cls, **kw)


def test_normalised_errors_have_unit_spread_over_many_seeds():
    # lines generated from known levels with noise of their stated uncertainty; the
    # energies come back within their stated uncertainties (Gauss-Markov): over many
    # invented systems (E_opt - E_true) / u_opt has spread 1, and the errors whitened by
    # the covariance (d = L w with C = L L^T) are independent with mean 0 and spread 1
    z, white, chi2, dof = [], [], 0.0, 0
    for seed in range(150):
        rng = np.random.default_rng(seed)
        levels, e, lo, up, u = invented_system(rng)
        sigma = e[up] - e[lo] + rng.normal(0.0, u)
        opt = run(levels, lo, up, sigma, u)
        assert opt.reference == "L000" and len(opt.parts) == 1
        d = np.array([opt.levels[i][0] for i in opt.covariance_ids]) - e[1:]
        z.extend(d / np.array([opt.levels[i][1] for i in opt.covariance_ids]))
        white.extend(np.linalg.solve(np.linalg.cholesky(opt.covariance), d))
        chi2 += opt.chi2
        dof += opt.dof
    z, white = np.array(z), np.array(white)
    assert white.size == z.size == 150 * 29
    # 4350 independent unit normals: mean within 3/sqrt(n) = 0.046, spread within 0.04
    assert abs(white.mean()) < 0.046
    assert white.std() == pytest.approx(1.0, abs=0.04)
    # the plain normalised errors are correlated within a system (common reference)
    assert z.std() == pytest.approx(1.0, abs=0.1)
    assert chi2 / dof == pytest.approx(1.0, abs=0.03)  # 150 x 91 degrees of freedom


def test_uncertainties_agree_with_monte_carlo_spread():
    # one invented system, 1000 noise realisations: the spread of every level energy and
    # of every Ritz wavenumber matches the uncertainty from the covariance within 10 %
    rng = np.random.default_rng(42)
    levels, e, lo, up, u = invented_system(rng, n_levels=20, n_lines=50)
    used = np.ones(lo.size, dtype=bool)
    first = solve_level_system(len(levels), lo, up, e[up] - e[lo], u, used, e, 0)
    energies, ritz = [], []
    for _ in range(1000):
        sol = solve_level_system(len(levels), lo, up, e[up] - e[lo] + rng.normal(0, u), u,
                                 used, e, 0)
        energies.append(sol.energy)
        ritz.append(sol.ritz)
    spread = np.std(energies, axis=0)[1:]
    assert spread / first.uncertainty[1:] == pytest.approx(np.ones(19), rel=0.10)
    r_spread = np.std(ritz, axis=0)
    assert r_spread / first.ritz_uncertainty == pytest.approx(np.ones(lo.size), rel=0.10)
    # Ritz values are better than the measured lines wherever a level has several lines
    assert np.median(first.ritz_uncertainty / u) < 1.0


def test_sparse_path_matches_dense_covariance():
    rng = np.random.default_rng(7)
    levels, e, lo, up, u = invented_system(rng, n_levels=40, n_lines=160)
    sigma = e[up] - e[lo] + rng.normal(0.0, u)
    dense = run(levels, lo, up, sigma, u)
    sparse = run(levels, lo, up, sigma, u, dense_limit=0)
    assert sparse.covariance is None and dense.covariance.shape == (39, 39)
    for lid, (energy, unc) in dense.levels.items():
        assert sparse.levels[lid][0] == pytest.approx(energy, abs=1e-9)
        assert sparse.levels[lid][1] == pytest.approx(unc, rel=1e-9)
    for a, b in zip(dense.lines, sparse.lines, strict=True):
        assert b.ritz_uncertainty == pytest.approx(a.ritz_uncertainty, rel=1e-9)


def triangle(u1=0.01, u2=0.01, u3=0.02, s3=150.02):
    levels = [KnownLevel("a", 0.0, 0.0, "even"), KnownLevel("b", 100.0, 1.0, "odd"),
              KnownLevel("c", 250.0, 1.0, "odd")]
    cls = [[("a", "b")], [("a", "c")], [("b", "c")]]
    return levels, np.array([100.01, 250.0, s3]), np.array([u1, u2, u3]), cls


def test_hand_worked_ritz_uncertainty_of_a_closed_triangle():
    # worked by hand: lines a-b (u1), a-c (u2), b-c (u3), a fixed. The Ritz value of b-c
    # is the weighted mean of its direct measurement (variance u3^2) and the indirect one
    # sigma_ac - sigma_ab (variance u1^2 + u2^2), so its variance is
    # 1 / (1/u3^2 + 1/(u1^2 + u2^2)) (weighted mean: Bevington & Robinson, Data Reduction
    # and Error Analysis, ch. 4). Likewise E_b: 1 / (1/u1^2 + 1/(u2^2 + u3^2)).
    levels, s, u, cls = triangle()
    opt = optimise_levels(levels, s, u, cls)
    u1, u2, u3 = u
    bc = next(x for x in opt.lines if (x.lower, x.upper) == ("b", "c"))
    assert bc.ritz_uncertainty == pytest.approx(
        np.sqrt(1 / (1 / u3**2 + 1 / (u1**2 + u2**2))), rel=1e-12)
    assert opt.levels["b"][1] == pytest.approx(np.sqrt(1 / (1 / u1**2 + 1 / (u2**2 + u3**2))),
                                               rel=1e-12)
    # the value itself: weighted mean of 150.02 (w = 1/0.0004) and 150.0 - 0.01 (w = 1/0.0002)
    assert bc.ritz == pytest.approx((150.02 / 4e-4 + 149.99 / 2e-4) / (1 / 4e-4 + 1 / 2e-4),
                                    abs=1e-9)
    assert opt.ritz("b", "c")[1] == pytest.approx(bc.ritz_uncertainty, rel=1e-12)


def test_ritz_uncertainties_against_direct_propagation():
    # the Ritz wavenumbers are linear in the observed ones: propagate the line
    # uncertainties through numerical derivatives d Ritz / d sigma_i (re-solving), which
    # does not use the covariance matrix at all, and compare; also the wavelengths
    levels, s, u, cls = triangle(0.004, 0.011, 0.007)
    base = optimise_levels(levels, s, u, cls)
    h = 1e-4
    jac = []
    for i in range(3):
        d = np.zeros(3)
        d[i] = h
        up_ = optimise_levels(levels, s + d, u, cls)
        dn_ = optimise_levels(levels, s - d, u, cls)
        jac.append([(a.ritz - b.ritz) / (2 * h) for a, b in zip(up_.lines, dn_.lines,
                                                                 strict=True)])
    jac = np.array(jac)  # (observed line, Ritz line)
    direct = np.sqrt((jac**2 * (u**2)[:, None]).sum(axis=0))
    got = np.array([x.ritz_uncertainty for x in base.lines])
    assert got == pytest.approx(direct, rel=1e-6)
    # vacuum wavelength: lambda = 1e8 / sigma, so u_lambda = lambda^2 u_sigma / 1e8
    for x in base.lines:
        lam = lambda sig: 1e8 / sig  # noqa: E731
        num = abs(lam(x.ritz + 1e-3) - lam(x.ritz - 1e-3)) / 2e-3 * x.ritz_uncertainty
        assert x.vacuum_wavelength_uncertainty == pytest.approx(num, rel=1e-6)


def test_single_line_level_gets_that_lines_uncertainty():
    rng = np.random.default_rng(3)
    levels, e, lo, up, u = invented_system(rng, n_levels=10, n_lines=25)
    # add two levels seen in one line each: one from the reference, one from level 5
    levels += [KnownLevel("X1", 50000.0, 1.0, "odd"), KnownLevel("X2", 51000.0, 1.0, "odd")]
    e = np.append(e, [50000.0, 51000.0])
    lo = np.append(lo, [0, 5])
    up = np.append(up, [10, 11])
    u = np.append(u, [0.007, 0.009])
    sigma = e[up] - e[lo] + 0.003
    opt = run(levels, lo, up, sigma, u)
    assert opt.levels["X1"][1] == pytest.approx(0.007, rel=1e-12)  # from the fixed level
    assert opt.levels["X2"][1] == pytest.approx(np.hypot(0.009, opt.levels["L005"][1]),
                                                rel=1e-9)
    for lid in ("X1", "X2"):
        assert "single line" in opt.details[lid].flags
        (line,) = opt.lines_of(lid)
        assert "defines level" in line.flags and line.normalised is None
        assert line.residual == pytest.approx(0.0, abs=1e-9)
    # the Ritz value of the defining line is the line itself
    assert opt.lines_of("X1")[0].ritz_uncertainty == pytest.approx(0.007, rel=1e-9)
    assert opt.lines_of("X2")[0].ritz_uncertainty == pytest.approx(0.009, rel=1e-9)


def test_misclassified_line_is_flagged():
    rng = np.random.default_rng(11)
    levels, e, lo, up, u = invented_system(rng, n_levels=25, n_lines=110)
    sigma = e[up] - e[lo] + rng.normal(0.0, u)
    # line 40 is given to a wrong pair of levels: its wavenumber is 0.15 cm-1 off
    # (many times any uncertainty) from the pair it is classified to
    sigma[40] += 0.15
    opt = run(levels, lo, up, sigma, u)
    z = np.array([abs(x.normalised) if x.normalised is not None else 0.0 for x in opt.lines])
    bad = opt.lines[40]
    assert "outlier" in bad.flags and abs(bad.normalised) > 10
    assert int(np.argmax(z)) == 40  # the worst line is the misclassified one
    assert "outlier line" in opt.details[bad.upper].flags
    # it drags its levels, so some honest lines of those levels look bad too; without
    # it the rest is clean (3 sigma: about 0.3 false flags expected among 109)
    keep = np.arange(lo.size) != 40
    clean = run(levels, lo[keep], up[keep], sigma[keep], u[keep])
    assert sum("outlier" in x.flags for x in clean.lines) <= 2
    assert clean.chi2 < opt.chi2 / 5


def test_disconnected_part_is_reported_with_its_own_reference():
    rng = np.random.default_rng(5)
    a_levels, a_e, a_lo, a_up, a_u = invented_system(rng, n_levels=12, n_lines=30)
    b_levels, b_e, b_lo, b_up, b_u = invented_system(rng, n_levels=6, n_lines=9)
    b_levels = [KnownLevel(f"M{i}", lv.energy + 60000.0, lv.J, lv.parity)
                for i, lv in enumerate(b_levels)]
    levels = a_levels + b_levels + [KnownLevel("lonely", 99999.0, 1.0, "odd")]
    e = np.concatenate([a_e, b_e + 60000.0, [99999.0]])
    lo = np.concatenate([a_lo, b_lo + 12])
    up = np.concatenate([a_up, b_up + 12])
    u = np.concatenate([a_u, b_u])
    sigma = e[up] - e[lo] + rng.normal(0.0, u)
    opt = run(levels, lo, up, sigma, u)
    assert [r for r, _ in opt.parts] == ["L000", "M0"]
    assert sorted(opt.parts[1][1]) == [f"M{i}" for i in range(6)]
    assert opt.unconnected == ["lonely"]
    assert any("2 parts" in w for w in opt.warnings)
    m0 = opt.details["M0"]
    assert m0.uncertainty == 0.0 and m0.energy == 60000.0 and "reference" in m0.flags
    assert all("disconnected" in opt.details[f"M{i}"].flags for i in range(6))
    assert all(opt.details[f"M{i}"].reference == "M0" for i in range(6))
    # within the second part the energies are good relative to its own reference
    for i in range(1, 6):
        energy, unc = opt.levels[f"M{i}"]
        assert abs(energy - e[12 + i]) < 5 * unc
    # choosing the reference in the second part puts that part first
    opt2 = run(levels, lo, up, sigma, u, reference="M2")
    assert opt2.reference == "M2" and opt2.parts[0][0] == "M2"
    assert opt2.parts[1][0] == "L000"


def test_blends_are_excluded_or_share_their_weight():
    levels, s, u, cls = triangle()
    levels = levels + [KnownLevel("d", 400.0, 2.0, "even")]
    s = np.append(s, [150.0, 300.0])
    u = np.append(u, [0.01, 0.01])
    # line 4 carries two classifications (a blend): b-d and c-d... wavenumbers of both
    cls = cls + [[("c", "d"), ("b", "d")], [("b", "d")]]
    excl = optimise_levels(levels, s, u, cls)
    blended = [x for x in excl.lines if x.line == 3]
    assert len(blended) == 2
    assert all(not x.used and {"blend", "excluded"} <= set(x.flags) for x in blended)
    # excluded: d is fixed by its one remaining line b-d (300.0 from E_b)
    assert "single line" in excl.details["d"].flags
    shared = optimise_levels(levels, s, u, cls, blends="share")
    assert all(x.used for x in shared.lines)
    # sharing: the same as two separate lines, each with uncertainty u sqrt(2)
    manual = optimise_levels(levels, np.append(s, 150.0),
                             np.array([0.01, 0.01, 0.02, 0.01 * np.sqrt(2), 0.01,
                                       0.01 * np.sqrt(2)]),
                             cls[:3] + [[("c", "d")], [("b", "d")], [("b", "d")]])
    for lid in "bcd":
        assert shared.levels[lid][0] == pytest.approx(manual.levels[lid][0], abs=1e-10)
        assert shared.levels[lid][1] == pytest.approx(manual.levels[lid][1], rel=1e-10)
    with pytest.raises(FinefitError, match="blends"):
        optimise_levels(levels, s, u, cls, blends="ignore")


def test_ritz_air_wavelengths_agree_with_the_wavelength_module():
    # visible and infrared lines: the air wavelength of every Ritz value is the wavelength
    # module's conversion of 1e8 / Ritz; its uncertainty is that conversion applied at
    # lambda +- u (direct propagation), close to u_vac / n (air dispersion is ~1e-5)
    levels = [KnownLevel("g", 0.0, 0.0, "even"), KnownLevel("p", 17000.0, 1.0, "odd"),
              KnownLevel("q", 24000.0, 1.0, "odd"), KnownLevel("r", 40000.0, 2.0, "even")]
    s = np.array([17000.123, 24000.456, 22999.877, 15999.544, 60000.0 - 59990.0])
    cls = [[("g", "p")], [("g", "q")], [("p", "r")], [("q", "r")], []]
    u = np.full(5, 0.01)
    opt = optimise_levels(levels, s, u, cls)
    assert list(opt.unclassified) == [4]
    for x in opt.lines:
        assert x.vacuum_wavelength == pytest.approx(1e8 / x.ritz, rel=1e-15)
        assert x.air_wavelength == pytest.approx(vacuum_to_air(1e8 / x.ritz), abs=1e-9)
        lam, ul = x.vacuum_wavelength, x.vacuum_wavelength_uncertainty
        direct = (vacuum_to_air(lam + ul) - vacuum_to_air(lam - ul)) / 2
        assert x.air_wavelength_uncertainty == pytest.approx(direct, rel=1e-6)
        n = lam / x.air_wavelength
        assert x.air_wavelength_uncertainty * n / ul == pytest.approx(1.0, abs=1e-4)
    # below 2000 A there is no air wavelength (vacuum, common practice)
    uv = optimise_levels(levels[:2] + [KnownLevel("z", 60000.0, 1.0, "odd")],
                         np.array([60000.0]), np.array([0.01]), [[("g", "z")]])
    assert uv.lines[0].air_wavelength is None


def test_bad_input_names_the_line():
    levels, s, u, cls = triangle()
    with pytest.raises(FinefitError, match="line 2"):
        optimise_levels(levels, s, u, [cls[0], [("a", "nowhere")], cls[2]])
    with pytest.raises(FinefitError, match="line 3"):
        optimise_levels(levels, s, np.array([0.01, 0.01, 0.0]), cls)
    with pytest.raises(FinefitError, match="no classified line"):
        optimise_levels(levels, s, u, [[], [], []])
    with pytest.raises(FinefitError, match="reference"):
        optimise_levels(levels, s, u, cls, reference="zz")
