"""Convergence across the periodic table and for excited configurations.

The checks are internal consistency only (no external values): convergence, the
virial theorem -V/T = 2 (exact for HF solutions; Slater 1960 — from memory),
orthonormality, and bound orbitals.
"""

from __future__ import annotations

import pytest

from finefit.radial import hartree_fock

CASES = [
    ("1s2", 1, -1),  # H-, a weakly bound negative ion
    ("3d6 8s", 26, 1),  # Rydberg electron, 4s-7s absent
    ("2p5 3p", 10, 0),  # excited, open core
    ("4f7 5d 6s2", 64, 0),  # Gd: half-filled 4f with open 5d
    ("5f3 6d 7s2", 92, 0),  # U
    ("5d10 6s", 79, 0),  # Au
    ("4f2", 59, 3),  # Pr IV
]


@pytest.mark.parametrize("conf,Z,charge", CASES)
def test_converges_with_virial_and_orthonormality(conf, Z, charge):
    hf = hartree_fock(conf, Z, charge, grid_step=0.06)
    assert hf.virial_ratio == pytest.approx(2.0, abs=1e-6)
    names = hf.orbitals
    for a in names:
        assert hf.orbital_energy(a) < 0
        assert hf.overlap(a, a) == pytest.approx(1.0, abs=1e-9)
    for i, a in enumerate(names):
        for b in names[i + 1 :]:
            if a[-1] == b[-1]:
                assert abs(hf.overlap(a, b)) < 1e-9


def test_h_minus_hf_energy():
    # H- Hartree-Fock limit -0.48792967 hartree — from memory
    assert hartree_fock("1s2", 1, -1).total_energy == pytest.approx(-0.48792967, rel=1e-6)


def test_rydberg_orbital_is_grid_converged():
    # the shift-and-invert eigensolver keeps weakly bound states stable under refinement
    coarse = hartree_fock("3d6 8s", 26, 1, grid_step=0.05)
    fine = hartree_fock("3d6 8s", 26, 1, grid_step=0.03)
    assert coarse.orbital_energy("8s") == pytest.approx(fine.orbital_energy("8s"), rel=1e-4)
    assert coarse.expectation_r("8s") == pytest.approx(fine.expectation_r("8s"), rel=1e-4)
