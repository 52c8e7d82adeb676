"""The attachment's assignment solver is scipy's own (loaded without the scipy.optimize
package): same optimum, same choice among ties, as scipy.optimize.linear_sum_assignment
(reference library)."""

import subprocess
import sys
from pathlib import Path

import numpy as np

from finefit.fitting.assignment import linear_sum_assignment

ROOT = Path(__file__).resolve().parents[2]


def test_same_assignment_as_scipy_including_ties_and_rectangles():
    from scipy.optimize import linear_sum_assignment as reference

    rng = np.random.default_rng(11)
    for trial in range(300):
        n, m = rng.integers(1, 9, size=2)
        # small integer costs make many ties; negative overlaps as the attachment uses
        cost = rng.integers(0, 3, size=(n, m)).astype(float)
        if trial % 3 == 0:
            cost = -rng.random((n, m)) ** 2
        r1, c1 = linear_sum_assignment(cost)
        r2, c2 = reference(cost)
        assert np.array_equal(r1, r2) and np.array_equal(c1, c2)


def test_solver_loads_without_the_optimisation_package():
    code = ("import sys, numpy as np\n"
            "from finefit.fitting.assignment import linear_sum_assignment\n"
            "r, c = linear_sum_assignment(np.array([[4.0, 1.0, 3.0], [2.0, 0.0, 5.0],"
            " [3.0, 2.0, 2.0]]))\n"
            "print(c.tolist(), 'scipy.optimize' in sys.modules)\n")
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True,
                         check=True, env={"PYTHONPATH": str(ROOT), "PATH": ""}).stdout
    # the textbook 3 x 3 example: optimum 1 + 2 + 2 = 5 (scipy.optimize documentation)
    assert out.split("]")[0] == "[1, 0, 2" and out.strip().endswith("False")
