"""Regenerate the demo sessions in this folder. ALL DATA HERE ARE INVENTED.

The scenario: the fictitious "Kestrel Ridge Laboratory" records hollow-cathode
spectra of two made-up ions. Their 'observed' levels are computed by finefit from
chosen parameters, with Gaussian measurement noise added, and one level in the
iron-group demo is deliberately given another level's label so that the fit
exposes it. Nothing here is a measurement of a real atom.

Run from the repository root: python sample_sessions/make_samples.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from finefit.fitting.synthetic import INVENTED_IRON_GROUP, synthetic_levels
from finefit.notation.jvalues import format_j
from finefit.session import Session

HERE = Path(__file__).resolve().parent

NOTE = (
    "INVENTED DATA for demonstration: levels computed by finefit from chosen parameters "
    "plus Gaussian noise ({noise} cm-1) in the fictitious Kestrel Ridge Laboratory "
    "scenario. Not a measurement of any real ion. {extra}"
)


def iron_group() -> Session:
    configs = ["3d6 4s", "3d7", "3d5 4s2"]
    true = dict(INVENTED_IRON_GROUP)
    s = Session.new(configs, Z=26, charge=1, name="Kx II (invented iron-group ion)",
                    title="Kestrel Ridge demo: even levels of an invented iron-group ion")
    model = s.models["even"]
    noise = 3.0
    levels = synthetic_levels(model, true, noise=noise, seed=2026, max_levels=70,
                              uncertainty=noise)
    # the deliberate misassignment: two J = 7/2 levels swap labels
    j72 = [lv for lv in levels if lv.J == 3.5]
    a, b = j72[3], j72[4]
    a.label, b.label = b.label, a.label
    a.note = "tentative label (demo: this one is deliberately wrong)"
    # the lowest level is the energy origin
    shift = min(lv.energy for lv in levels)
    for lv in levels:
        lv.energy = round(lv.energy - shift, 2)
        s.levels.append(lv)
    rng = np.random.default_rng(7)
    for name, v in true.items():
        spec = next(p for p in model.parameter_specs if p.name == name)
        if spec.kind == "Eav":
            start = round(v - shift + rng.normal(0, 500), 0)
        elif spec.kind in ("F", "G", "zeta"):
            start = round(v * (1 + 0.06 * rng.standard_normal()), 0)
        else:  # CI integrals and Trees corrections held at 'earlier analysis' values
            start = v
        s.set_parameter(name, start, vary=spec.kind in ("Eav", "F", "G", "zeta"))
    # the invented model has no seniority correction: hold beta(3d) at 0 in the demo
    for name in s.parameters:
        if name not in true:
            s.set_parameter(name, 0.0, vary=False)
    s.note = NOTE.format(noise=noise, extra="One J = 7/2 label is wrong on purpose.")
    return s


def noble_gas_like() -> Session:
    configs = ["2p5 3p", "2p5 4p"]
    true = {
        "2p5 3p: Eav": 150000.0, "2p5 3p: F2(2p,3p)": 3000.0, "2p5 3p: G0(2p,3p)": 850.0,
        "2p5 3p: G2(2p,3p)": 700.0, "2p5 3p: zeta(2p)": 520.0, "2p5 3p: zeta(3p)": 10.0,
        "2p5 4p: Eav": 160000.0, "2p5 4p: F2(2p,4p)": 1100.0, "2p5 4p: G0(2p,4p)": 240.0,
        "2p5 4p: G2(2p,4p)": 190.0, "2p5 4p: zeta(2p)": 520.0, "2p5 4p: zeta(4p)": 4.0,
    }
    s = Session.new(configs, Z=10, charge=0, name="Nk I (invented neon-like atom)",
                    title="Kestrel Ridge demo: 2p5 np levels of an invented neon-like atom")
    model = s.models["even"]
    noise = 0.5
    levels = synthetic_levels(model, true, noise=noise, seed=11, uncertainty=0.5)
    for lv in levels:
        lv.energy = round(lv.energy, 2)
        s.levels.append(lv)
    rng = np.random.default_rng(3)
    for name, v in true.items():
        spec = next(p for p in model.parameter_specs if p.name == name)
        start = v + 200 if spec.kind == "Eav" else v * (1 + 0.08 * rng.standard_normal())
        s.set_parameter(name, round(start, 1), vary=True)
    # the two zeta(2p) are linked: one core, one spin-orbit parameter
    s.set_parameter("2p5 3p: zeta(2p)", link="zeta2p")
    s.set_parameter("2p5 4p: zeta(2p)", s.parameters["2p5 3p: zeta(2p)"].value, link="zeta2p")
    s.note = NOTE.format(noise=noise, extra="The levels show pair (JK) coupling.")
    return s


def two_parity() -> tuple[Session, str]:
    """Both parities of an invented carbon-like atom, a line list, and one level left out.

    The 'earlier analysis' levels in the session carry 0.02 cm-1 noise; the line list is
    ten times better (0.003 A), so optimising the levels from it pays. One line is
    deliberately mismeasured (an invented blend with an impurity line) and six lines
    belong to no level of the atom.
    """
    from finefit.lines.wavelengths import vacuum_to_air

    configs = ["2p 3s", "2p 3p"]
    true = {
        "2p 3s: Eav": 61000.0, "2p 3s: G1(2p,3s)": 4200.0, "2p 3s: zeta(2p)": 32.0,
        "2p 3p: Eav": 70500.0, "2p 3p: F2(2p,3p)": 21000.0, "2p 3p: G0(2p,3p)": 2100.0,
        "2p 3p: G2(2p,3p)": 8200.0, "2p 3p: zeta(2p)": 32.0, "2p 3p: zeta(3p)": 6.0,
    }
    s = Session.new(configs, Z=6, charge=0, name="Kc I (invented carbon-like atom)",
                    title="Kestrel Ridge demo: 2p 3s - 2p 3p lines of an invented atom")
    for name, v in true.items():
        s.set_parameter(name, v)
    rng = np.random.default_rng(5)
    sols = s.solve()
    lines, _ = s.predict_lines({("3s", "3p"): 2.8, ("2p", "3s"): 0.9})
    kept = []
    for parity, sol in sols.items():
        for lev in sol.levels:
            e = lev.energy + rng.normal(0, 0.02)
            kept.append((parity, lev, e))
    unc = 0.003  # angstrom, the stated uncertainty and the size of the noise
    rows = ["# INVENTED line list (Kestrel Ridge demo): air wavelengths of lines between",
            f"# invented levels with {unc} A noise, relative intensities from predicted gf;",
            "# one line mismeasured on purpose (+0.025 A, an invented impurity blend), plus",
            "# 6 lines that belong to no level of the atom.",
            "wavelength intensity uncertainty"]
    shown = [x for x in lines if 1e5 * x.gf >= 0.5]  # the faintest are not seen
    for k, x in enumerate(shown):
        lam = float(vacuum_to_air(x.vacuum_wavelength)) + rng.normal(0, unc)
        if k == 4:
            lam += 0.025  # the deliberate blend
        rows.append(f"{lam:.4f} {1e5 * x.gf:.0f} {unc}")
    for _ in range(6):
        rows.append(f"{rng.uniform(6000, 12000):.4f} {rng.integers(5, 50)} {unc}")
    # the level left out for the search demo: the highest J = 2 level of 2p 3p
    j2 = [k for k in kept if k[0] == "even" and k[1].J == 2.0]
    leave = max(j2, key=lambda k: k[2])
    for parity, lev, e in kept:
        if (parity, lev.block, lev.position) == (leave[0], leave[1].block, leave[1].position):
            continue
        s.add_level(energy=round(e, 3), J=lev.J, parity=parity, label=lev.label,
                    uncertainty=0.02)
    for name, v in true.items():
        start = v + 150 if "Eav" in name else v * (1 + 0.05 * rng.standard_normal())
        s.set_parameter(name, round(start, 1), vary=True)
    s.note = NOTE.format(noise=0.02, extra=f"The J = 2 level near {leave[2]:.0f} cm-1 is "
                         "left out on purpose: find it with 'finefit search'. The line list "
                         f"has {unc} A noise and one deliberately mismeasured line.")
    return s, "\n".join(rows) + "\n"


def _compilation_configuration(head: str) -> str:
    """'3d6(5D)4s' -> '3d6.(5D).4s', '3d5 4s2' -> '3d5.4s2' (the compilations' writing)."""
    out = head.replace(" ", ".").replace(")", ").").replace("(", ".(")
    return out.rstrip(".").replace("..", ".")


def iron_group_level_list() -> str:
    """An invented level list as a published compilation would print it.

    INVENTED: levels of 3d6 4s + 3d7 computed from parameters near the scaled
    Hartree-Fock values finefit gives this (made-up) ion, with effective operators and
    2 cm-1 noise, in the compilations' tab-separated layout with ordering letters, the
    repeated-term index, a bracketed (derived) level, a doubtful level, an unresolved
    J, a level of a configuration the session does not have, and the limit row.
    """
    s = Session.new(["3d6 4s", "3d7"], Z=26, charge=1)
    s.fill_ab_initio()
    rng = np.random.default_rng(2027)
    true = {}
    for name, p in s.parameters.items():
        short = name.split(": ")[-1]
        if short.startswith(("alpha", "beta")):
            true[name] = 50.0 if short.startswith("alpha") else -250.0
        elif short == "Eav":
            true[name] = p.value
        else:
            true[name] = p.value * (1 + 0.04 * rng.standard_normal())
    model = s.models["even"]
    levels = synthetic_levels(model, true, noise=2.0, seed=2027, max_levels=60)
    shift = min(lv.energy for lv in levels)
    terms: dict[tuple[str, str], float] = {}
    for lv in levels:
        head, _, final = lv.label.rpartition(" ")
        key = (head, final)
        terms[key] = min(terms.get(key, np.inf), lv.energy)
    letters: dict[tuple[str, str], str] = {}
    by_symbol: dict[str, list[tuple[float, tuple[str, str]]]] = {}
    for key, e in terms.items():
        symbol = key[1].rstrip("0123456789")
        by_symbol.setdefault(symbol, []).append((e, key))
    for items in by_symbol.values():
        for k, (_, key) in enumerate(sorted(items)):
            letters[key] = "abcdefghijklmnopqrstuvwxyz"[k]
    rows = []
    for n, lv in enumerate(sorted(levels, key=lambda x: x.energy)):
        head, _, final = lv.label.rpartition(" ")
        prefix = suffix = ""
        j = format_j(lv.J)
        if n == 38:
            prefix, suffix = "[", "]"  # derived from other levels, not observed
        if n == 45:
            suffix = "?"  # doubtful
        if n == 52:
            j = j + "," + format_j(lv.J + 1)  # J not resolved
        rows.append((_compilation_configuration(head), f"{letters[(head, final)]} {final}", j,
                     prefix, f"{lv.energy - shift:.2f}", suffix))
    rows.append(("3d6.(5D).4p", "z 6D*", "9/2", "", "38000.51", ""))  # another configuration
    rows.append(("Kx III (3d6 5D<4>)", "Limit", "---", "", "130000", ""))
    header = "Configuration\tTerm\tJ\tPrefix\tLevel (cm-1)\tSuffix\n"
    body = "".join("\t".join(f'"{c}"' for c in row) + "\t\n" for row in rows)
    return header + body


def main() -> None:
    iron_group().save(HERE / "kestrel_iron_group.toml")
    (HERE / "kestrel_iron_group_levels.tsv").write_text(iron_group_level_list())
    noble_gas_like().save(HERE / "kestrel_neon_like.toml")
    s, lines = two_parity()
    s.save(HERE / "kestrel_two_parity.toml")
    (HERE / "kestrel_two_parity_lines.txt").write_text(lines)
    for p in HERE.glob("*.bak"):
        p.unlink()


if __name__ == "__main__":
    main()
