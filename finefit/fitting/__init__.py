"""Least-squares fits of radial parameters to observed levels (lmfit, analytic Jacobian)."""
