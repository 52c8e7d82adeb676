"""The engine's fast paths: the public solve API, BLAS threads, labels on demand, the
size guard and plain printing of long tables. Results must equal the slow routes."""

import io
import os

import numpy as np
import pytest
from rich.console import Console
from rich.table import Table
from threadpoolctl import threadpool_info

from finefit.cli import main
from finefit.errors import FinefitError
from finefit.fitting.fit import FitProblem
from finefit.fitting.settings import ObservedLevel, ParameterSetting
from finefit.model import coupling
from finefit.model.basis import estimate_size
from finefit.model.hamiltonian import Model
from finefit.reports.tables import print_table
from finefit.threads import engine_threads


def _values(model, seed=3):
    rng = np.random.default_rng(seed)
    return np.array([rng.uniform(200, 8000) for _ in model.parameters])


def test_eigen_block_matches_eigvalsh_and_finite_differences():
    model = Model(["3d2", "3d 4s"])
    x = _values(model)
    for b in model.blocks:
        e = model.eigen_block(b.J2, x)
        # reference: numpy.linalg.eigvalsh of the assembled Hamiltonian
        assert e.energies == pytest.approx(np.linalg.eigvalsh(model.hamiltonian(x, b.J)),
                                           abs=1e-9)
        states = np.arange(b.size)[::2]
        params = np.arange(b.param_index.size)[::-1]
        D = e.derivatives(states, params)
        assert D == pytest.approx(e.derivatives()[np.ix_(states, params)], abs=1e-9)
        # Hellmann-Feynman against central finite differences (h = 1e-3 cm-1)
        for k, p in enumerate(params):
            xp, xm = x.copy(), x.copy()
            xp[b.param_index[p]] += 1e-3
            xm[b.param_index[p]] -= 1e-3
            fd = (model.eigen_block(b, xp).energies - model.eigen_block(b, xm).energies) / 2e-3
            assert D[:, k] == pytest.approx(fd[states], abs=1e-6)


def test_large_block_path_agrees_with_small_block_path():
    model = Model(["3d4 4s 4p"])  # blocks above 64 states take the C @ V route
    x = _values(model, 7)
    big = [b for b in model.blocks if b.size > 64]
    assert big
    for b in big:
        e = model.eigen_block(b, x)
        V = e.vectors
        ref = np.einsum("ji,pjk,ki->ip", V, b.C, V)  # v^T C_p v term by term
        assert e.derivatives() == pytest.approx(ref, abs=1e-8)


def _blas_threads() -> set[int]:
    return {d["num_threads"] for d in threadpool_info() if d["user_api"] == "blas"}


def test_engine_threads_one_thread_inside_restored_after(monkeypatch):
    monkeypatch.delenv("FINEFIT_BLAS_THREADS", raising=False)
    import scipy.linalg  # noqa: F401 - load both BLAS copies before reading the setting

    before = _blas_threads()
    with engine_threads():
        assert _blas_threads() == {1}
        with engine_threads():  # nested blocks keep the setting
            assert _blas_threads() == {1}
        assert _blas_threads() == {1}
    assert _blas_threads() == before
    monkeypatch.setenv("FINEFIT_BLAS_THREADS", "2")
    with engine_threads():
        assert _blas_threads() == {2}


def test_fit_attachment_needs_no_jj_or_pair_basis(monkeypatch):
    calls = []
    real = coupling._scheme_basis

    def counting(*args):
        calls.append(args[3])
        return real(*args)

    monkeypatch.setattr(coupling, "_scheme_basis", counting)
    model = Model(["2p5 3p"])
    model._coupling_cache = None
    x = {"2p5 3p: G0(2p,3p)": 500.0, "2p5 3p: G2(2p,3p)": 1000.0,
         "2p5 3p: F2(2p,3p)": 2000.0, "2p5 3p: zeta(2p)": 700.0, "2p5 3p: zeta(3p)": 50.0}
    sol = model.solve(x)
    levels = [ObservedLevel(id=f"L{i}", energy=lev.energy, J=lev.J, parity=lev.parity)
              for i, lev in enumerate(sol.levels[:4])]
    settings = {n: ParameterSetting(value=v, vary=False) for n, v in x.items()}
    FitProblem({"even": model}, settings, levels)
    assert calls == []
    lev = sol.levels[0]
    comp = sol.composition(lev, "jj")
    assert calls == ["jj"]
    assert sum(c.fraction for c in sol.composition(lev, "jj")) == pytest.approx(1.0)
    assert sol.purity(lev, "jj") == pytest.approx(comp[0].fraction)
    sol.best_scheme(lev)
    assert sorted(calls) == ["JK", "jj"]  # each basis built once


def test_size_estimate_counts_what_the_build_makes():
    # d2 has C(10, 2) = 45 determinants (binomial count, any combinatorics text)
    model = Model(["3d2", "3d 4s"])
    size = model.basis.size
    assert size.n_determinants == model.n_determinants == 45 + 20
    largest = max(model.basis.count(c.index, ml, ms2) for (ml, ms2) in model.basis.blocks
                  for c in model.basis.configs if ml >= 0 and ms2 >= 0)
    assert size.largest_block == largest
    big = estimate_size([(3, 2), (4, 3)], [(5, 7)])
    assert big.n_determinants == 252 * 3432  # C(10,5) C(14,7)


def test_size_guard_refuses_with_the_numbers(monkeypatch, tmp_path, capsys):
    monkeypatch.delenv("FINEFIT_MEMORY_LIMIT_GB", raising=False)
    with pytest.raises(FinefitError, match=r"864864 determinants.*GiB"):
        Model(["3d5 4f7"])
    assert main(["new", str(tmp_path / "x.toml"), "-c", "3d5 4f7", "--Z", "48"]) == 2
    err = capsys.readouterr().err
    assert "too large" in err and "FINEFIT_MEMORY_LIMIT_GB" in err
    assert not (tmp_path / "x.toml").exists()
    monkeypatch.setenv("FINEFIT_MEMORY_LIMIT_GB", "1e-9")
    with pytest.raises(FinefitError, match="3d2"):
        Model(["3d2"])


def test_long_tables_print_every_cell_as_plain_text():
    tab = Table(title="many rows")
    tab.add_column("J", justify="right")
    tab.add_column("label")
    rows = [(f"{i}/2", f"3d7 4F° row {i}") for i in range(450)]
    for r in rows:
        tab.add_row(*r)
    con = Console(file=io.StringIO(), width=80)
    print_table(con, tab, max_rich_rows=400)
    lines = con.file.getvalue().splitlines()
    assert lines[0] == "many rows" and lines[1].split() == ["J", "label"]
    assert len(lines) == 3 + 450
    body = [(ln[:5].strip(), ln[7:].strip()) for ln in lines[3:]]
    assert body == rows
    assert len({ln.index("3d7") for ln in lines[3:]}) == 1  # columns aligned


@pytest.mark.skipif(os.cpu_count() is None, reason="needs the CPU count")
def test_thread_count_setting_falls_back_to_one(monkeypatch):
    from finefit.threads import engine_thread_count

    for text, n in (("", 1), ("0", 1), ("x", 1), ("3", 3)):
        monkeypatch.setenv("FINEFIT_BLAS_THREADS", text)
        assert engine_thread_count() == n
