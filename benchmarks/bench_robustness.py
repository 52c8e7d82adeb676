"""Robustness of the fit: starts perturbed by up to ±30 % end at the best minimum, or say
what is wrong. Never a silent wrong answer.

For every sample session and the real level lists used in the tests, N starts (default
100) are made by multiplying every varied value except E_av by a factor drawn uniformly
in [0.7, 1.3] (seeded). Each start is fitted as `finefit fit` does. A start counts as
  - "best"   when its sigma is within 0.1 % of the lowest sigma any start reached,
  - "named"  when it ends elsewhere but the result says so (not converged, a negative
             or sign-open zeta, label mismatches, a proposed exchange, an undetermined
             or poorly determined parameter, a ratio outside the usual range),
  - "silent" otherwise: a wrong answer reported as fine.
Prints the fractions per case and the wall time.

    python3 benchmarks/bench_robustness.py [N] [--case NAME]
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

import finefit
from finefit.fitting.fit import FitProblem

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT / "tests" / "data" / "levels"
SAMPLES = ROOT / "sample_sessions"

PROBLEM_WORDS = ("negative", "stated uncertainties", "opposite sign", "leading component differs",
                 "not converge", "do not determine", "poorly determined", "outside the usual",
                 "oscillat")


def sample(name: str):
    def make():
        return finefit.load(SAMPLES / name)
    return make


def fixed_demo():
    s = finefit.load(SAMPLES / "kestrel_iron_group.toml")
    s.update_level("L019", label="3d6(3H)4s 4H")
    s.update_level("L023", label="3d6(3F2)4s 4F")
    return s


def real(table, configs, Z, charge, derived=False):
    def make():
        s = finefit.Session.new(configs, Z=Z, charge=charge)
        s.import_levels(DATA / f"{table}.tsv", include_derived=derived)
        s.fill_ab_initio()
        return s
    return make


CASES = {
    "demo iron group (labels fixed)": fixed_demo,
    "demo iron group (as shipped)": sample("kestrel_iron_group.toml"),
    "demo neon-like": sample("kestrel_neon_like.toml"),
    "demo two parity": sample("kestrel_two_parity.toml"),
    "Ti III 3d2": real("Ti_III", ["3d2"], 22, 2),
    "Sc II 3d4s+3d2+4s2": real("Sc_II", ["3d 4s", "3d2", "4s2"], 21, 1),
    "Co III 3d7+3d6 4s": real("Co_III", ["3d7", "3d6 4s"], 27, 2),
    "Ne I 2p5 3s+3d": real("Ne_I", ["2p5 3s", "2p5 3d"], 10, 0),
    "Ne I 2p5 3p": real("Ne_I", ["2p5 3p"], 10, 0),
    "Pr IV 4f2": real("Pr_IV", ["4f2"], 59, 3),
    "Nd IV 4f3": real("Nd_IV", ["4f3"], 60, 3, True),
}


def names_a_problem(r) -> bool:
    if not r.converged or r.suspected_swaps or r.undetermined:
        return True
    return any(any(w in text for w in PROBLEM_WORDS) for text in r.warnings)


def run_case(make, n: int, seed: int = 0):
    s = make()
    kinds = {sp.name: sp.kind for m in s.models.values() for sp in m.parameter_specs}
    rng = np.random.default_rng(seed)
    results = []
    for _ in range(n):
        settings = {k: p.copy() for k, p in s.parameters.items()}
        for k, p in settings.items():
            if (p.vary or p.link) and kinds.get(k) != "Eav" and p.value:
                p.value *= float(rng.uniform(0.7, 1.3))
                if p.min is not None:
                    p.value = max(p.value, p.min)
                if p.max is not None:
                    p.value = min(p.value, p.max)
        try:
            results.append(FitProblem(s.models, settings, s.levels, s.options).fit())
        except finefit.FinefitError as exc:  # a start the model cannot even attach
            results.append(exc)
    fits = [r for r in results if not isinstance(r, Exception)]
    best = min(r.sigma for r in fits if r.converged and r.sigma is not None)
    counts = {"best": 0, "named": 0, "silent": 0, "refused": len(results) - len(fits)}
    for r in fits:
        if r.converged and r.sigma is not None and r.sigma <= best * 1.001 + 1e-9:
            counts["best"] += 1
        elif names_a_problem(r):
            counts["named"] += 1
        else:
            counts["silent"] += 1
    return best, counts


def main() -> None:
    args = [a for a in sys.argv[1:] if not a.startswith("--")]
    n = int(args[0]) if args else 100
    only = sys.argv[sys.argv.index("--case") + 1] if "--case" in sys.argv else None
    total = {"best": 0, "named": 0, "silent": 0, "refused": 0}
    t_all = time.perf_counter()
    for name, make in CASES.items():
        if only and only not in name:
            continue
        t0 = time.perf_counter()
        best, c = run_case(make, n)
        for k in total:
            total[k] += c[k]
        ok = (c["best"] + c["named"] + c["refused"]) / n
        print(f"{name:32s} best sigma {best:10.3f}  reached {c['best']:3d}/{n}  named "
              f"{c['named']:3d}  refused {c['refused']:3d}  silent {c['silent']:3d}  "
              f"-> {100 * ok:5.1f} %  ({time.perf_counter() - t0:.1f} s)")
    made = sum(total.values())
    print(f"all: {made} starts, {100 * (made - total['silent']) / made:.1f} % reached the best "
          f"or named the problem; {total['silent']} silent wrong answers "
          f"({time.perf_counter() - t_all:.0f} s)")


if __name__ == "__main__":
    main()
