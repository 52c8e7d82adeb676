"""Angular algebra: Wigner symbols, Gaunt coefficients, determinant operators (pure)."""
