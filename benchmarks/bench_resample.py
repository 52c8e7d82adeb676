"""Monte-Carlo refits on dask.distributed against the serial run (target: 2 workers at
most 0.65x the serial wall time for 100 refits of the invented iron-group sample).

Prints the serial time (before and after), the cluster start-up time, the time of a
first request on a fresh LocalCluster of 2 worker processes (one thread, one BLAS thread
each) and of a second one on the warm workers, their ratios, and the machine load
before and after (`uptime`): the machine is shared with other work, so
the figures are single measurements under that load. Checks that both runs give the
same numbers.

Run from the repository root: python3 benchmarks/bench_resample.py [--runs 100]
"""

from __future__ import annotations

import argparse
import logging
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

from finefit.refits import resample
from finefit.session import Session

SAMPLE = Path(__file__).resolve().parents[1] / "sample_sessions" / "kestrel_iron_group.toml"


def uptime() -> str:
    try:
        return subprocess.run(["uptime"], capture_output=True, text=True).stdout.strip()
    except OSError:
        return "(uptime not available)"


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=100)
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args()
    from distributed import LocalCluster

    s = Session.load(SAMPLE)
    s.apply(s.fit())  # both runs start from the converged fit
    print(f"{args.runs} Monte-Carlo refits of {SAMPLE.name} ({len(s.levels)} levels, "
          f"invented data)")
    print("load before:", uptime())
    t0 = time.perf_counter()
    serial = resample(s, runs=args.runs, seed=1)
    t_serial = time.perf_counter() - t0
    t0 = time.perf_counter()
    with LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True,
                      dashboard_address=None, silence_logs=logging.ERROR,
                      env={"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1",
                           "MKL_NUM_THREADS": "1"}) as cluster:
        t_start = time.perf_counter() - t0
        t1 = time.perf_counter()
        cold = resample(s, runs=args.runs, seed=1, scheduler=cluster.scheduler_address)
        t_cold = time.perf_counter() - t1
        # the same again on the warm workers (imports done, engine matrices built), as
        # when a cluster serves several requests through --scheduler
        t1 = time.perf_counter()
        warm = resample(s, runs=args.runs, seed=1, scheduler=cluster.scheduler_address)
        t_warm = time.perf_counter() - t1
    t0 = time.perf_counter()
    resample(s, runs=args.runs, seed=1)
    t_serial2 = time.perf_counter() - t0
    same = all(np.array_equal(serial.parameter_samples, x.parameter_samples)
               and np.array_equal(serial.level_samples, x.level_samples) for x in (cold, warm))
    ref = min(t_serial, t_serial2)
    print("load after: ", uptime())
    print(f"serial (before / after):        {t_serial:7.2f} s / {t_serial2:.2f} s "
          f"({serial.n_ok} refits used)")
    print(f"cluster start-up:               {t_start:7.2f} s")
    print(f"dask, {args.workers} workers, first request:  {t_cold:7.2f} s  ratio "
          f"{t_cold / ref:.2f} (includes imports and engine set-up in the workers)")
    print(f"dask, {args.workers} workers, warm:           {t_warm:7.2f} s  ratio "
          f"{t_warm / ref:.2f} (target <= 0.65)")
    print(f"start-up + first request:       {t_start + t_cold:7.2f} s  ratio "
          f"{(t_start + t_cold) / ref:.2f}")
    print(f"CPU seconds in the refits: serial {serial.cpu_seconds:.2f}, dask cold "
          f"{cold.cpu_seconds:.2f}, warm {warm.cpu_seconds:.2f} (wall / (CPU / 2) shows how "
          "much of two cores the workers got)")
    print(f"dask warm: wall {t_warm:.2f} s for {warm.cpu_seconds / 2:.2f} s of CPU per worker")
    print(f"identical numbers (serial, dask cold, dask warm): {same}")
    print("(shared machine: other work was running; single measurements; ratios against "
          "the faster serial run)")
    return 0 if same else 1


if __name__ == "__main__":
    sys.exit(main())
