"""Fits of real published level lists, from ab initio starting values, as a user runs them.

Levels: evaluated level compilations in tests/data/levels (see its README.md), imported
as they are. Every fit is checked for the fixed-point property by the suite's autouse
fixture (tests/conftest.py). Each warning printed must be one the case expects, and
sigma must stay at the baseline measured with this version (DEVELOPERS.md, "Fits of
real level lists"); a change in either is a change in behaviour to look at.
"""

import re
from pathlib import Path

import pytest

import finefit

DATA = Path(__file__).parent.parent / "data" / "levels"

ALWAYS = [r"^after a fit, levels .* were re-attached"]
CASES = {
    # name: (table, configurations, Z, charge, bracketed levels used, sigma at most,
    #        label mismatches, expected warnings)
    "Ti III 3d2": ("Ti_III", ["3d2"], 22, 2, False, 6.5, 0, []),
    "Sc II": ("Sc_II", ["3d 4s", "3d2", "4s2"], 21, 1, False, 6.0, 0,
              [r"^3d2: F4\(3d\): fitted / ab initio"]),
    "Co III": ("Co_III", ["3d7", "3d6 4s"], 27, 2, False, 360.0, 0,
               [r"^poorly determined .*3d7: beta\(3d\)"]),
    "Ne I 2p5 3s + 3d": ("Ne_I", ["2p5 3s", "2p5 3d"], 10, 0, False, 0.7, 0,
                         [r"^2p5 3d: zeta\(3d\): fitted / ab initio", r"^poorly determined"]),
    "Pr IV 4f2": ("Pr_IV", ["4f2"], 59, 3, False, 37.0, 0, [r"^poorly determined"]),
    "Nd IV 4f3": ("Nd_IV", ["4f3"], 60, 3, True, 55.0, 0,
                  [r"^4f3: F6\(4f\): fitted / ab initio", r"^poorly determined"]),
    # 2p5 3p alone: the least-squares minimum has zeta(3p) < 0 and four levels led by the
    # other core; finefit must say so (negative zeta, label mismatches)
    "Ne I 2p5 3p": ("Ne_I", ["2p5 3p"], 10, 0, False, 60.0, 4,
                    [r"fitted / ab initio", r"zeta\(3p\) = .* is negative",
                     r"^poorly determined", r"^leading component differs"]),
}


@pytest.mark.parametrize("name", sorted(CASES))
def test_real_level_list_fits(name):
    table, configs, Z, charge, derived, sigma_max, n_mismatch, expected = CASES[name]
    s = finefit.Session.new(configs, Z=Z, charge=charge)
    s.import_levels(DATA / f"{table}.tsv", include_derived=derived)
    s.fill_ab_initio()
    r = s.fit()
    assert r.converged and r.fitted and r.fixed_point
    assert r.sigma <= sigma_max
    assert sum(row.label_mismatch for row in r.levels) == n_mismatch
    patterns = ALWAYS + expected
    unexpected = [w for w in r.warnings if not any(re.search(p, w) for p in patterns)]
    assert not unexpected
    for p in expected:
        assert any(re.search(p, w) for w in r.warnings), p
    # a level whose published label is the leading component is never flagged
    for row in r.levels:
        if row.label and row.label == row.calc_label:
            assert not row.label_mismatch


def test_mn_ii_names_its_problems():
    # Mn II 3d5 4s + 3d6 with 37 levels that the table labels without the index of a
    # repeated term: the fit may not hide the sign problem or the mismatches
    s = finefit.Session.new(["3d5 4s", "3d6"], Z=25, charge=1)
    s.import_levels(DATA / "Mn_II.tsv")
    s.fill_ab_initio()
    r = s.fit()
    assert r.fixed_point
    negative = [n for n, v in r.values.items() if "zeta" in n and v < 0]
    mism = [row.id for row in r.levels if row.label_mismatch]
    for n in negative:
        assert any(n in w and ("negative" in w or "opposite sign" in w) for w in r.warnings)
    if mism:
        assert any("leading component differs" in w for w in r.warnings)
