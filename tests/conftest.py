"""Shared test settings: property tests are derandomised under CI so that a run is
reproducible; locally they explore new examples each time."""

import atexit
import os
import shutil
import tempfile

from hypothesis import settings

# the persistent model cache of the suite: a fresh folder per run (never the user's)
os.environ["FINEFIT_CACHE_DIR"] = tempfile.mkdtemp(prefix="finefit-test-cache-")
atexit.register(shutil.rmtree, os.environ["FINEFIT_CACHE_DIR"], ignore_errors=True)

settings.register_profile("ci", derandomize=True, print_blob=True)
if os.environ.get("CI"):
    settings.load_profile("ci")


import pytest  # noqa: E402


def assert_fixed_point(problem, result) -> None:
    """Re-solve at the reported values: each level's reported state (its energy rank
    within J and parity) gives the printed E_calc (CONVENTIONS.md, fit diagnostics)."""
    if not result.fitted or not result.converged:
        return
    for parity, model in problem.models.items():
        x = {n: result.values[n] for n in model.parameters}
        sol = model.solve(x, derivatives=False)
        by_j: dict[int, list[float]] = {}
        for lev in sol.levels:
            by_j.setdefault(round(2 * lev.J), []).append(lev.energy)
        for row in result.levels:
            if row.parity != parity:
                continue
            energies = sorted(by_j[round(2 * row.J)])
            e = energies[row.state_rank - 1]
            assert abs(e - row.energy_calc) <= 1e-6 * max(1.0, abs(e)), (
                f"{row.id}: state {row.state_rank} has {e}, the result printed "
                f"{row.energy_calc}"
            )


@pytest.fixture(autouse=True)
def _every_fit_is_a_fixed_point(monkeypatch):
    """After every fit in the suite, re-solve and compare (the fixed-point property)."""
    from finefit.fitting import fit as fit_module

    original = fit_module.FitProblem.fit

    def checked(self, *args, **kwargs):
        result = original(self, *args, **kwargs)
        assert_fixed_point(self, result)
        return result

    monkeypatch.setattr(fit_module.FitProblem, "fit", checked)
    yield

