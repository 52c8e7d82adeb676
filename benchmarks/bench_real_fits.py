"""Fits of real published level lists from ab initio starting values, with and without
the effective operators (alpha, beta, gamma), as a user would run them.

For each ion: a new session, `import_levels` of the evaluated compilation table in
tests/data/levels (taken as it is), `fill_ab_initio`, `fit`. "without" holds alpha,
beta and gamma fixed at 0 (the model of the first version); "with" uses the new
session defaults (alpha, beta and, in f shells, gamma varied). Prints sigma, the
number of levels, the free parameters, label mismatches, warnings and the wall time.

    python3 benchmarks/bench_real_fits.py [--markdown]
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import finefit

DATA = Path(__file__).resolve().parents[1] / "tests" / "data" / "levels"

# name -> (table, configurations, Z, charge, take bracketed levels)
CASES = {
    "Ti III 3d2": ("Ti_III", ["3d2"], 22, 2, False),
    "Sc II 3d4s + 3d2 + 4s2": ("Sc_II", ["3d 4s", "3d2", "4s2"], 21, 1, False),
    "Co III 3d7 + 3d6 4s": ("Co_III", ["3d7", "3d6 4s"], 27, 2, False),
    "Mn II 3d5 4s + 3d6": ("Mn_II", ["3d5 4s", "3d6"], 25, 1, False),
    "Ne I 2p5 3p": ("Ne_I", ["2p5 3p"], 10, 0, False),
    "Ne I 2p5 3s + 2p5 3d": ("Ne_I", ["2p5 3s", "2p5 3d"], 10, 0, False),
    "Pr IV 4f2": ("Pr_IV", ["4f2"], 59, 3, False),
    "Nd IV 4f3 (bracketed levels used)": ("Nd_IV", ["4f3"], 60, 3, True),
}

EFFECTIVE = ("alpha", "beta", "gamma")


def run(table, configs, Z, charge, derived, effective: bool):
    s = finefit.Session.new(configs, Z=Z, charge=charge)
    s.import_levels(DATA / f"{table}.tsv", include_derived=derived)
    s.fill_ab_initio()
    if not effective:
        for name, p in s.parameters.items():
            if name.split(": ")[-1].split("(")[0] in EFFECTIVE:
                p.value, p.vary, p.link = 0.0, False, None
    t0 = time.perf_counter()
    r = s.fit()
    dt = time.perf_counter() - t0
    free = [n.split(": ")[-1] for n, st in r.status.items() if st in ("varied", "linked",
                                                                      "undetermined")]
    return r, sorted(set(free)), dt


def main() -> None:
    md = "--markdown" in sys.argv
    if md:
        print("| ions and configurations | N | sigma without | free | sigma with | free | "
              "mismatches | converged |")
        print("|---|---|---|---|---|---|---|---|")
    for name, (table, configs, Z, charge, derived) in CASES.items():
        r0, free0, t0 = run(table, configs, Z, charge, derived, effective=False)
        r1, free1, t1 = run(table, configs, Z, charge, derived, effective=True)
        mism = sum(row.label_mismatch for row in r1.levels)
        if md:
            print(f"| {name} | {r1.n_levels} | {r0.sigma:.1f} | {r0.n_free} | "
                  f"{r1.sigma:.1f} | {r1.n_free} ({', '.join(free1)}) | {mism} | "
                  f"{'yes' if r1.converged else 'no'} |")
            continue
        print(f"{name}: N = {r1.n_levels}")
        print(f"  without alpha/beta/gamma: sigma {r0.sigma:9.2f}  free {r0.n_free:2d}  "
              f"converged {r0.converged}  {t0:.2f} s")
        print(f"  with                    : sigma {r1.sigma:9.2f}  free {r1.n_free:2d}  "
              f"converged {r1.converged}  {t1:.2f} s  label mismatches {mism}")
        print(f"  free: {', '.join(free1)}")
        for w in r1.warnings:
            print(f"  warning: {w[:160]}")


if __name__ == "__main__":
    main()
