"""Regenerate the invented isoelectronic-sequence demo. ALL DATA HERE ARE INVENTED.

The scenario: the fictitious "Osprey Bay spectroscopy group" has analysed the 3d3
ground configuration of three ions of one sequence (21 electrons; Z = 23, 24, 25) and
wants starting values for the next one (Z = 26). Their 'observed' levels are computed
by finefit from chosen parameters (Hartree-Fock values times ratios that drift
linearly with Z, and a Trees alpha growing linearly), with Gaussian measurement noise
added. They are not the levels of any real ion; the ions are called "Ob" below so
that nobody mistakes them for V III, Cr IV or Mn V.

Run from the repository root: python sample_sessions/make_sequence_samples.py
"""

from __future__ import annotations

from pathlib import Path

from finefit.fitting.synthetic import synthetic_levels
from finefit.session import Session, model_for

HERE = Path(__file__).resolve().parent
MEMBERS = [(23, 2, "Ob III"), (24, 3, "Ob IV"), (25, 4, "Ob V")]
NOISE = {23: 8.0, 24: 5.0, 25: 5.0}  # cm-1; the first member measured less well
# INVENTED laws: fitted / Hartree-Fock = a + b (Z - 24); alpha = a + b (Z - 24)
RATIOS = {"3d3: F2(3d)": (0.80, 0.02), "3d3: F4(3d)": (0.76, 0.025),
          "3d3: zeta(3d)": (0.92, -0.01)}
ALPHA = (65.0, 6.0)

NOTE = ("INVENTED DATA for demonstration: 3d3 levels computed by finefit from chosen "
        "parameters plus Gaussian noise ({noise} cm-1) in the fictitious Osprey Bay "
        "scenario. Not a measurement of any real ion.")


def member(Z: int, charge: int, name: str) -> Session:
    s = Session.new(["3d3"], Z=Z, charge=charge, name=f"{name} (invented, Z = {Z})",
                    title=f"Osprey Bay demo: 3d3 of an invented ion with Z = {Z}")
    s.fill_ab_initio(set_values=False)
    dz = Z - 24
    true = {n: s.parameters[n].ab_initio * (a + b * dz) for n, (a, b) in RATIOS.items()}
    true["3d3: alpha(3d)"] = ALPHA[0] + ALPHA[1] * dz
    true["3d3: Eav"] = 20000.0
    levels = synthetic_levels(model_for(("3d3",)), true, noise=NOISE[Z], seed=Z,
                              uncertainty=NOISE[Z])
    # the lowest level is the energy origin, as in the compilations
    shift = min(lv.energy for lv in levels)
    for lv in levels:
        lv.energy = round(lv.energy - shift, 1)
        s.levels.append(lv)
    s.options.weighting = "uncertainty"
    s.fill_ab_initio()  # starting values: Hartree-Fock x 0.85 (F^k), x 1.0 (zeta)
    s.set_parameter("3d3: alpha(3d)", 40.0, vary=True)
    s.note = NOTE.format(noise=NOISE[Z])
    return s


def main() -> None:
    for Z, charge, name in MEMBERS:
        member(Z, charge, name).save(HERE / f"osprey_3d3_Z{Z}.toml")


if __name__ == "__main__":
    main()
