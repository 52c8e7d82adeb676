"""The persistent model cache: a model read back equals a fresh build, and a bad file is
never used (rebuilt instead). The reference of every comparison is a fresh build by the
same engine; one external check (p2 term intervals) guards the cached path itself."""

import json
import os
import subprocess
import sys
import zipfile
from pathlib import Path

import numpy as np
import pytest

from finefit.errors import FinefitError
from finefit.model.hamiltonian import Model
from finefit.model.serial import model_from_arrays, model_to_arrays
from finefit.session import Session, model_for
from finefit.storage import model_cache

ROOT = Path(__file__).resolve().parents[2]
SCHEMES = ("LS", "jj", "JK", "J1j")


@pytest.fixture
def cache(tmp_path, monkeypatch):
    """A private, empty cache folder; the in-process model memo cleared around the test."""
    monkeypatch.setenv("FINEFIT_CACHE_DIR", str(tmp_path / "cache"))
    monkeypatch.delenv("FINEFIT_CACHE", raising=False)
    model_for.cache_clear()
    yield tmp_path / "cache"
    model_for.cache_clear()


def _values(model, seed=7):
    rng = np.random.default_rng(seed)
    return rng.uniform(-3000.0, 9000.0, len(model.parameters))


def assert_same_model(built, stored):
    assert stored.parameters == built.parameters
    assert stored.parameter_specs == built.parameter_specs
    assert stored.configurations == built.configurations and stored.parity == built.parity
    assert stored.n_determinants == built.n_determinants
    assert stored.basis.ls_states == built.basis.ls_states
    x = _values(built)
    s1, s2 = built.solve(x), stored.solve(x)
    assert len(s1.levels) == len(s2.levels)
    for a, b in zip(s1.levels, s2.levels, strict=True):
        assert (a.J, a.parity, a.label, a.configuration, a.block, a.position) == (
            b.J, b.parity, b.label, b.configuration, b.block, b.position)
        assert abs(a.energy - b.energy) <= 1e-12 * max(1.0, abs(a.energy))
        assert abs(a.purity - b.purity) <= 1e-12 and abs(a.g - b.g) <= 1e-12
        assert np.allclose(s1.gradient(a), s2.gradient(b), rtol=0, atol=1e-12)
        for scheme in SCHEMES:
            ca, cb = s1.composition(a, scheme), s2.composition(b, scheme)
            assert [c.label for c in ca] == [c.label for c in cb]
            assert np.allclose([c.fraction for c in ca], [c.fraction for c in cb],
                               rtol=0, atol=1e-12)
    c1, c2 = s1._coupling, s2._coupling
    for j2 in c1:
        assert c1[j2].ls_explicit == c2[j2].ls_explicit


@pytest.mark.parametrize("configs", [["3d2", "3d 4s"], ["2p5 3p"], ["4f2"]])
def test_model_from_arrays_equals_fresh_build(configs):
    built = Model(configs)
    arrays = model_to_arrays(built)
    assert all(not a.dtype.hasobject for a in arrays.values())
    assert_same_model(Model(configs), model_from_arrays(arrays))


def test_cached_model_through_the_file_equals_fresh_build(cache):
    configs = ("3d2", "3d 4s")
    first = model_for(configs)  # built and stored
    path = model_cache.cache_path(configs)
    assert path.is_file() and path.parent == cache
    model_for.cache_clear()
    second = model_for(configs)  # read back
    assert type(second.basis).__name__ == "StoredBasis"
    assert_same_model(Model(list(configs)), second)
    assert_same_model(first, second)
    # the determinant basis is rebuilt on demand and is the one the matrices belong to
    full = second.basis.full()
    for b in second.blocks:
        assert np.array_equal(full.j_blocks[b.J2].state_index, b.state_index)


def test_cached_p2_has_condon_shortley_intervals(cache):
    # p2 in pure LS: E(1S) - E(1D) = 3/2 (E(1D) - E(3P)) (Condon & Shortley 1935, ch. 7)
    model_for(("2p2",))
    model_for.cache_clear()
    m = model_for(("2p2",))
    assert type(m.basis).__name__ == "StoredBasis"
    sol = m.solve({"2p2: F2(2p)": 50000.0})
    e = {lev.label: lev.energy for lev in sol.levels}
    assert (e["2p2 1S"] - e["2p2 1D"]) == pytest.approx(1.5 * (e["2p2 1D"] - e["2p2 3P"]),
                                                        rel=1e-12)


def _corrupt_truncate(path):
    data = path.read_bytes()
    path.write_bytes(data[: len(data) // 2])


def _corrupt_garbage(path):
    path.write_bytes(os.urandom(4096))


def _corrupt_flip_payload(path):
    # change one number inside a coefficient matrix: still a valid npz, wrong model
    with np.load(path, allow_pickle=False) as npz:
        arrays = {k: npz[k] for k in npz.files}
    name = next(k for k in arrays if k.startswith("pack.") and arrays[k].dtype.kind == "f")
    arrays[name] = arrays[name].copy()
    arrays[name][arrays[name].size // 2] += 1.0
    with open(path, "wb") as fh:
        np.savez(fh, **arrays)


def _corrupt_foreign(path):
    with open(path, "wb") as fh:
        np.savez(fh, meta=np.array(json.dumps({"layout": 1})), x=np.arange(3.0))


def _corrupt_other_entry(path):
    # a complete, valid entry of another configuration set under this name
    other = model_cache.save_model_arrays(("2p2",), model_to_arrays(Model(["2p2"])))
    path.write_bytes(other.read_bytes())


def _corrupt_flip_byte(path):
    data = bytearray(path.read_bytes())
    data[len(data) // 2] ^= 0xFF
    path.write_bytes(bytes(data))


@pytest.mark.parametrize("corrupt", [_corrupt_truncate, _corrupt_garbage, _corrupt_flip_payload,
                                     _corrupt_foreign, _corrupt_other_entry, _corrupt_flip_byte])
def test_bad_cache_file_is_ignored_and_rebuilt(cache, corrupt):
    configs = ("3d2", "3d 4s")
    model_for(configs)
    path = model_cache.cache_path(configs)
    corrupt(path)
    assert model_cache.load_model_arrays(configs) is None
    model_for.cache_clear()
    rebuilt = model_for(configs)
    assert type(rebuilt.basis).__name__ == "Basis"  # built, not read
    assert_same_model(Model(list(configs)), rebuilt)
    assert model_cache.load_model_arrays(configs) is not None  # and stored again


def test_cache_off_writes_nothing(tmp_path, monkeypatch):
    monkeypatch.setenv("FINEFIT_CACHE_DIR", str(tmp_path / "c"))
    monkeypatch.setenv("FINEFIT_CACHE", "off")
    model_for.cache_clear()
    try:
        assert model_cache.cache_dir() is None
        assert model_cache.save_model_arrays(("2p2",), {"x": np.zeros(2)}) is None
        model_for(("2p2",))
        assert not (tmp_path / "c").exists()
    finally:
        model_for.cache_clear()


def test_default_folder_follows_xdg(monkeypatch, tmp_path):
    monkeypatch.delenv("FINEFIT_CACHE_DIR", raising=False)
    monkeypatch.delenv("FINEFIT_CACHE", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    assert model_cache.cache_dir() == tmp_path / "finefit"


def test_key_depends_on_format_engine_and_configurations(monkeypatch):
    key = model_cache.cache_key(("3d2",))
    assert key != model_cache.cache_key(("3d2", "3d 4s"))
    monkeypatch.setattr(model_cache, "CACHE_FORMAT", model_cache.CACHE_FORMAT + 1)
    assert model_cache.cache_key(("3d2",)) != key
    monkeypatch.undo()
    monkeypatch.setattr(model_cache, "engine_fingerprint", lambda: "another engine")
    assert model_cache.cache_key(("3d2",)) != key


def test_object_arrays_are_refused(cache):
    with pytest.raises(ValueError):
        model_cache.save_model_arrays(("2p2",), {"x": np.array([{"a": 1}], dtype=object)})


def test_unwritable_folder_only_costs_a_build(tmp_path, monkeypatch):
    blocker = tmp_path / "file"
    blocker.write_text("not a folder")
    monkeypatch.setenv("FINEFIT_CACHE_DIR", str(blocker / "sub"))
    model_for.cache_clear()
    try:
        m = model_for(("2p2",))
        assert m.parameters
    finally:
        model_for.cache_clear()


def test_entry_is_a_plain_npz_without_pickles(cache):
    model_for(("2p5 3p",))
    path = model_cache.cache_path(("2p5 3p",))
    assert zipfile.is_zipfile(path)
    with np.load(path, allow_pickle=False) as npz:
        assert "meta" in npz.files and "cache.checksum" in npz.files
        assert all(not npz[k].dtype.hasobject for k in npz.files)
    assert not list(path.parent.glob("*.tmp"))  # the temporary file was renamed


def test_session_read_from_a_warm_cache_imports_no_scipy(tmp_path):
    env = {"PYTHONPATH": str(ROOT), "PATH": "", "FINEFIT_CACHE_DIR": str(tmp_path)}
    code = ("import sys\nfrom finefit.session import Session\n"
            "s = Session.load('sample_sessions/kestrel_iron_group.toml')\n"
            "sol = s.solve()\n"
            "[sol[p].best_scheme(lev) for p in sol for lev in sol[p].levels]\n"
            "print(sorted(m for m in sys.modules if m.split('.')[0] == 'scipy'))\n")
    cold = subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True,
                          text=True, check=True)
    assert list(tmp_path.glob("model-*.npz"))
    warm = subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True,
                          text=True, check=True)
    assert "scipy.sparse" in cold.stdout  # the first run built the model
    assert warm.stdout.strip() == "[]"


def test_session_results_equal_with_and_without_cache(cache, monkeypatch):
    path = ROOT / "sample_sessions" / "kestrel_iron_group.toml"
    warm = Session.load(path)  # builds and stores
    model_for.cache_clear()
    warm = Session.load(path)  # reads
    assert all(type(m.basis).__name__ == "StoredBasis" for m in warm.models.values())
    monkeypatch.setenv("FINEFIT_CACHE", "off")
    model_for.cache_clear()
    cold = Session.load(path)
    rw, rc = warm.report(), cold.report()
    assert [r.energy_calc for r in rw.levels] == [r.energy_calc for r in rc.levels]
    assert [r.label for r in rw.levels] == [r.label for r in rc.levels]


def test_entries_above_the_size_limit_are_not_written(cache, monkeypatch):
    monkeypatch.setattr(model_cache, "MAX_ENTRY_BYTES", 1000)
    m = model_for(("3d2",))
    assert m.parameters and model_cache.load_model_arrays(("3d2",)) is None
    assert not cache.exists() or not list(cache.glob("*.npz"))


def test_stored_states_that_differ_from_the_rebuilt_basis_are_refused():
    arrays = model_to_arrays(Model(["3d2", "3d 4s"]))
    meta = json.loads(str(arrays["meta"][()]))
    meta["ls_states"][0], meta["ls_states"][1] = meta["ls_states"][1], meta["ls_states"][0]
    arrays["meta"] = np.array(json.dumps(meta))
    stored = model_from_arrays(arrays)
    with pytest.raises(FinefitError, match="does not match"):
        stored.basis.full()


def test_no_cache_without_engine_sources(cache, monkeypatch):
    monkeypatch.setattr(model_cache, "engine_fingerprint", lambda: "")
    assert model_cache.cache_path(("2p2",)) is None
    assert model_for(("2p2",)).parameters
    assert not cache.exists() or not list(cache.glob("*.npz"))
