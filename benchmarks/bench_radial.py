"""Benchmark of finefit.radial: HF convergence time and integral throughput.

Run from the repository root:  python benchmarks/bench_radial.py [--threaded]
Targets (2-core machine): neutral Fe 3d6 4s2 converged in < 5 s; all Slater integrals
and zeta for the Fe II set 3d6 4s, 3d7, 3d5 4s2 in < 1 s once the orbitals exist.
"""

from __future__ import annotations

import os
import sys

# The matrices are small (~350 x 350): BLAS threads only add overhead, and on a busy
# 2-core machine threaded OpenBLAS slows each call down by one to two orders of
# magnitude.  Use one thread unless the caller chose otherwise (must precede numpy).
if "--threaded" not in sys.argv:
    for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(_var, "1")

import time  # noqa: E402

from finefit.radial import configuration_interaction_integral, hartree_fock
from finefit.radial.grid import _cached_grid


def timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0


def main() -> None:
    print(f"BLAS threads: OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', 'unset')}, "
          f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")  # fmt: skip
    _cached_grid.cache_clear()  # cold start: grid matrices built inside the timing
    fe, t_cold = timed(lambda: hartree_fock("3d6 4s2", Z=26))
    _, t_warm = timed(lambda: hartree_fock("3d6 4s2", Z=26))
    print(f"Fe I 3d6 4s2: E_av = {fe.total_energy:.8f} hartree, {fe.iterations} iterations, "
          f"virial -V/T = {fe.virial_ratio:.9f}, {fe.grid.n} grid points")  # fmt: skip
    print(f"  solve time: {t_cold:.3f} s (cold grid), {t_warm:.3f} s (warm)   target < 5 s")

    confs = ["3d6 4s", "3d7", "3d5 4s2"]
    runs = {}
    for c in confs:
        runs[c], t = timed(lambda c=c: hartree_fock(c, Z=26, charge=1))
        print(f"Fe II {c:8s}: E_av = {runs[c].total_energy:.8f} hartree "
              f"({runs[c].iterations} it., {t:.3f} s)")  # fmt: skip

    def integrals():
        out = {}
        for c in confs:
            out.update(runs[c].parameters())
        # configuration interaction between the runs (orbitals of each configuration's run)
        out["3d6 4s | 3d7: R2(3d4s,3d3d)"] = configuration_interaction_integral(
            2, "3d", "4s", "3d", "3d", runs["3d6 4s"], runs["3d7"]
        )
        out["3d6 4s | 3d5 4s2: R2(3d3d,3d4s)"] = configuration_interaction_integral(
            2, "3d", "3d", "3d", "4s", runs["3d6 4s"], runs["3d5 4s2"]
        )
        out["3d7 | 3d5 4s2: R2(3d3d,4s4s)"] = configuration_interaction_integral(
            2, "3d", "3d", "4s", "4s", runs["3d7"], runs["3d5 4s2"]
        )
        return out

    params, t_int = timed(integrals)
    for name, value in params.items():
        print(f"  {name:34s} {value:16.3f} cm^-1")
    print(f"  {len(params)} values in {t_int * 1e3:.2f} ms   target < 1 s")
    base = runs["3d6 4s"].total_energy_cm
    for c in confs[1:]:
        print(f"  E_av({c}) - E_av(3d6 4s) = {runs[c].total_energy_cm - base:.1f} cm^-1")

    for conf, Z in (("3p6", 18), ("6p6", 86), ("5f3 6d 7s2", 92)):
        hf, t = timed(lambda conf=conf, Z=Z: hartree_fock(conf, Z))
        print(f"Z={Z:3d} {conf:11s}: E = {hf.total_energy:.7f} hartree, {hf.iterations} it., "
              f"{t:.3f} s")  # fmt: skip


if __name__ == "__main__":
    main()
