"""Human-readable reports of fits and levels (rich tables; later LaTeX and figures)."""
