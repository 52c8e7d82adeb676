"""Engine benchmarks: build times, evaluation cost relative to bare eigh, a large case.

Run: python benchmarks/bench_engine.py [--skip-large]
Prints figures and ratios measured in this one run (the machines are shared and
noisy; read ratios, not absolute numbers). No BLAS variables are set: the engine
runs in the thread setting the commands use (finefit.threads, one BLAS thread).
The evaluation timed is the fit's own call: Model.eigen_block for every J block
and BlockEigen.derivatives (Hellmann-Feynman) of its states.
"""

from __future__ import annotations

import argparse
import os
import resource
import sys
import time

import numpy as np

from finefit import Model
from finefit.threads import engine_threads


def best_of(fn, repeat: int = 5, number: int = 1) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(number):
            fn()
        times.append((time.perf_counter() - t0) / number)
    return min(times)


def typical_values(model: Model, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x = np.zeros(len(model.parameters))
    for i, spec in enumerate(model.parameter_specs):
        x[i] = {
            "Eav": rng.uniform(0, 20000),
            "F": rng.uniform(40000, 90000),
            "G": rng.uniform(2000, 10000),
            "R": rng.uniform(1000, 5000),
            "zeta": rng.uniform(300, 600),
            "alpha": rng.uniform(30, 80),
        }.get(spec.kind, rng.uniform(-50, 50))  # effective operators: tens of cm-1
    return x


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--skip-large", action="store_true", help="skip the 4f6 5d build")
    args = ap.parse_args()
    with engine_threads():
        return run(args)


def run(args: argparse.Namespace) -> int:
    print("== build: all coefficient matrices and J blocks (target < 2 s each) ==")
    cases = [["3d6 4s", "3d7", "3d5 4s2"], ["4f3"], ["4f2 5d"]]
    models = {}
    for cfgs in cases:
        t0 = time.perf_counter()
        m = Model(cfgs)
        dt = time.perf_counter() - t0
        models[" + ".join(cfgs)] = m
        print(
            f"{' + '.join(cfgs):24s} {dt:6.3f} s   {m.n_determinants:6d} determinants, "
            f"{sum(m.block_dimensions.values()):4d} levels, {len(m.parameters):3d} parameters, "
            f"ratio to target {dt / 2.0:.2f}"
        )
    print(f"   ({os.getloadavg()[0]:.2f} load average on {os.cpu_count()} cores, shared)")
    print("\n== one evaluation: all J blocks solved + the Jacobian of all states ==")
    print("   vs bare eigen-solves: eigh alone, and H = sum x_p C_p plus eigh (target <= 1.5x)")
    for name, m in models.items():
        x = typical_values(m)
        Hs = [np.tensordot(x[b.param_index], b.C, axes=1) for b in m.blocks]

        def bare(Hs=Hs):
            for H in Hs:
                np.linalg.eigh(H)

        def bare_h(m=m, x=x):
            for b in m.blocks:
                np.linalg.eigh((x[b.param_index] @ b.C_flat).reshape(b.size, b.size))

        def full(m=m, x=x):
            for e in m.eigen(x):
                e.derivatives()

        t_bare = best_of(bare, repeat=7, number=20)
        t_bare_h = best_of(bare_h, repeat=7, number=20)
        t_full = best_of(full, repeat=7, number=20)
        print(
            f"{name:24s} eigh {t_bare * 1e3:7.3f} ms  H+eigh {t_bare_h * 1e3:7.3f} ms  "
            f"evaluation {t_full * 1e3:7.3f} ms  ratios {t_full / t_bare:5.2f} "
            f"{t_full / t_bare_h:5.2f}"
        )
    if not args.skip_large:
        print("\n== large case: 4f6 5d (30 030 determinants; target < 60 s and < 4 GB) ==")
        t0 = time.perf_counter()
        m = Model(["4f6 5d"])
        dt = time.perf_counter() - t0
        rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
        print(m.basis.size.describe() + " (size guard's estimate)")
        print(
            f"4f6 5d build {dt:6.2f} s (ratio to target {dt / 60:.2f}), peak RSS {rss:7.1f} MB "
            f"(ratio to target {rss / 4096:.3f}); "
            f"largest J block {max(m.block_dimensions.values())}"
        )
    return 0


if __name__ == "__main__":
    sys.exit(main())
