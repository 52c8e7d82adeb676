"""Line classification and level search on a synthetic (invented) line list."""

import numpy as np
import pytest

from finefit.lines.classify import KnownLevel, classify_lines, search_level


def invented_levels(seed=0, n_even=40, n_odd=40):
    rng = np.random.default_rng(seed)
    out = []
    for parity, n, base in (("even", n_even, 0.0), ("odd", n_odd, 30000.0)):
        for i in range(n):
            out.append(KnownLevel(f"{parity[0]}{i}", float(base + rng.uniform(0, 20000)),
                                  float(rng.integers(0, 9) / 2 + (0.5 if i % 2 else 0.0)),
                                  parity))
    return out


def lines_of(levels, rng, noise=0.005):
    from finefit.lines.classify import ritz_transitions

    sigma, lo, up = ritz_transitions(levels)
    keep = rng.random(sigma.size) < 0.6  # not every allowed line is seen
    return sigma[keep] + rng.normal(0, noise, keep.sum()), lo[keep], up[keep]


def test_synthetic_list_is_classified_completely():
    # invented data: every line comes from two known levels; all must be classified
    rng = np.random.default_rng(1)
    levels = invented_levels()
    w, lo, up = lines_of(levels, rng)
    c = classify_lines(levels, w, tolerance=0.03)
    assert c.unclassified.size == 0
    for i in range(w.size):
        assert (levels[lo[i]].id, levels[up[i]].id) in {(a, b) for a, b, _ in c.matches[i]}
    assert c.disagreeing == []


def test_shifted_level_is_flagged():
    rng = np.random.default_rng(2)
    levels = invented_levels()
    w, lo, up = lines_of(levels, rng)
    moved = levels[45]  # an odd level, observed 0.02 cm-1 too high in every line
    w = w + np.where(up == 45, 0.02, 0.0)
    c = classify_lines(levels, w, tolerance=0.03)
    assert moved.id in c.disagreeing


def test_removed_level_is_found_again():
    rng = np.random.default_rng(3)
    levels = invented_levels()
    w, lo, up = lines_of(levels, rng)
    missing = levels[50]
    known = [lv for lv in levels if lv.id != missing.id]
    c = classify_lines(known, w, tolerance=0.03)
    free = w[c.unclassified]
    grid, score, cands = search_level(known, missing.J, missing.parity,
                                      missing.energy + 137.0, free, tolerance=0.03)
    assert grid.size == 100001  # +-500 cm-1 in 0.01 cm-1 steps
    best = cands[0]
    assert best.energy == pytest.approx(missing.energy, abs=0.03)
    assert best.score >= 3 and best.score > 2 * cands[1].score


def test_cli_classify_and_search(tmp_path, capsys):
    # invented two-parity session: levels computed by finefit, lines from their Ritz
    # combinations written as an air-wavelength table
    import json

    from finefit.cli import main
    from finefit.lines.wavelengths import vacuum_to_air
    from finefit.session import Session

    s = Session.new(["2p 3s", "2p 3p"], Z=6)
    vals = {"2p 3s: Eav": 60000.0, "2p 3s: G1(2p,3s)": 4000.0, "2p 3s: zeta(2p)": 30.0,
            "2p 3p: Eav": 70000.0, "2p 3p: F2(2p,3p)": 20000.0, "2p 3p: G0(2p,3p)": 2000.0,
            "2p 3p: G2(2p,3p)": 8000.0, "2p 3p: zeta(2p)": 30.0, "2p 3p: zeta(3p)": 5.0}
    for n, v in vals.items():
        s.set_parameter(n, v)
    for parity, sol in s.solve().items():
        for lev in sol.levels:
            s.add_level(energy=round(lev.energy, 3), J=lev.J, parity=parity, label=lev.label)
    from finefit.lines.classify import ritz_transitions

    sigma, _, _ = ritz_transitions(s.known_levels())
    table = tmp_path / "lines.txt"
    table.write_text("wavelength intensity\n" + "".join(
        f"{vacuum_to_air(1e8 / x):.5f} 10\n" for x in sigma))
    missing = s.levels[-1]
    p = tmp_path / "c.toml"
    s.save(p)
    assert main(["classify", str(p), str(table), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["n_classified"] == out["n_lines"] == sigma.size
    s.remove_level(missing.id)
    s.save(p)
    assert main(["search", str(p), str(table), "--J", str(missing.J), "--parity",
                 missing.parity, "--energy", str(missing.energy + 120), "--json"]) == 0
    cands = json.loads(capsys.readouterr().out)
    assert cands[0]["energy"] == pytest.approx(missing.energy, abs=0.05)
    # weighted by the model's predicted gf of each transition from the missing state
    w = 1e8 / __import__("finefit").air_to_vacuum(
        [float(x.split()[0]) for x in table.read_text().splitlines()[1:]])
    found, weights = s.search_level(w, missing.J, missing.parity, missing.energy + 120,
                                    radial={("3s", "3p"): 3.0, ("2p", "3s"): 1.0})
    assert weights and max(weights.values()) == pytest.approx(1.0)
    assert all(0 <= v <= 1 for v in weights.values())
    assert found[0].energy == pytest.approx(missing.energy, abs=0.05)
    assert main(["classify", str(p), str(tmp_path / "none.txt")]) == 2
