"""The fit's evaluation after its per-call trimming gives the numbers of the plain numpy
route: numpy.linalg.eigh of H = sum_p x_p C_p and v^T C_p v term by term (Hellmann-
Feynman), chained to the variables (reference library: numpy.linalg)."""

import numpy as np
import pytest

from finefit.fitting.fit import FitProblem
from finefit.fitting.settings import FitOptions, ParameterSetting
from finefit.fitting.synthetic import INVENTED_IRON_GROUP, synthetic_levels
from finefit.model.hamiltonian import Model, symmetric_eigh


def test_symmetric_eigh_is_numpy_eigh_bit_for_bit():
    rng = np.random.default_rng(5)
    for n in (1, 2, 3, 8, 17, 29, 40, 70):
        A = rng.normal(size=(n, n))
        A = A + A.T
        w, V = symmetric_eigh(A)
        w_ref, V_ref = np.linalg.eigh(A)
        assert np.array_equal(w, w_ref) and np.array_equal(V, V_ref)
    with pytest.raises(np.linalg.LinAlgError), np.errstate(invalid="ignore"):
        symmetric_eigh(np.full((3, 3), np.nan))


def test_evaluate_equals_the_plain_numpy_route():
    model = Model(["3d2", "3d 4s"])
    x_true = {n: v for n, v in INVENTED_IRON_GROUP.items() if n in model.parameters}
    for n in model.parameters:
        x_true.setdefault(n, 0.0)
    x_true.update({"3d2: F2(3d)": 60000.0, "3d2: F4(3d)": 38000.0, "3d2: zeta(3d)": 400.0,
                   "3d 4s: Eav": 20000.0, "3d 4s: G2(3d,4s)": 9000.0,
                   "3d 4s: zeta(3d)": 380.0})
    levels = synthetic_levels(model, x_true, noise=0.0, seed=3, max_levels=30)
    settings = {n: ParameterSetting(value=v * 1.02, vary=("F" in n or "zeta" in n))
                for n, v in x_true.items()}
    prob = FitProblem({"even": model}, settings, levels, FitOptions())
    v = prob.v_start * 1.01
    e, J = prob.evaluate(v, jacobian=True, commit=False)
    x = prob.x_of(v)
    row_of = {lv.id: i for i, lv in enumerate(prob.included)}
    for (_parity, j2), att in prob.attachments.items():
        b = model.block(j2 / 2)
        H = sum(x[p] * b.C[k] for k, p in enumerate(b.param_index))
        w, V = np.linalg.eigh(H)
        idx = att.follow(V)
        for pos, lid in enumerate(att.level_ids):
            i = row_of[lid]
            s = idx[pos]
            assert e[i] == pytest.approx(w[s], abs=1e-9)
            grad = np.zeros(len(model.parameters))
            for k, p in enumerate(b.param_index):
                grad[p] = V[:, s] @ b.C[k] @ V[:, s]
            assert J[i] == pytest.approx(grad @ prob.chain, abs=1e-9)
