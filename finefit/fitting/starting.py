"""Ab initio and scaled starting values for a session's parameters.

For each configuration a configuration-average Hartree-Fock run (finefit.radial)
gives E_av, F^k, G^k and zeta (Blume-Watson by default, the central-field formula on
request); R^k between two configurations uses each configuration's own orbitals.
Starting values are the ab initio values times scale factors: 0.85 for F^k, G^k and
R^k and 1.0 for zeta by default (# common practice: Slater integrals of free ions
typically fit at 0.8-0.9 of their Hartree-Fock values: configuration interaction
screens them).
E_av keeps the ab initio differences between configurations, shifted as a whole so
that the lowest computed level falls on the lowest observed level (or 0). The
effective operators (alpha, beta, gamma, T^i, P^k) have no ab initio value and are
left as they are (a new session starts them at typical values).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from finefit.errors import FinefitError
from finefit.model.hamiltonian import Model

DEFAULT_SCALES = {"F": 0.85, "G": 0.85, "R": 0.85, "zeta": 1.0}
EFFECTIVE_KINDS = {"alpha", "beta", "gamma", "T", "M", "P"}


@dataclass
class AbInitioValues:
    """Ab initio values (cm^-1) and the scaled starting values derived from them."""

    ab_initio: dict[str, float] = field(default_factory=dict)
    start: dict[str, float] = field(default_factory=dict)
    skipped: dict[str, str] = field(default_factory=dict)  # name -> why


def ab_initio_values(
    models: dict[str, Model],
    Z: int,
    charge: int,
    scales: dict[str, float] | None = None,
    lowest_observed: dict[str, float] | None = None,
    relativistic: bool = False,
    progress: Callable[[str], None] | None = None,
    zeta_method: str = "blume-watson",
) -> AbInitioValues:
    """Hartree-Fock values for every parameter of the models (one run per configuration).

    ``zeta_method``: ``"blume-watson"`` (default) or ``"central-field"``
    (:meth:`finefit.radial.HartreeFockResult.zeta`).
    """
    from finefit.radial import hartree_fock

    sc = dict(DEFAULT_SCALES)
    sc.update(scales or {})
    for k, v in sc.items():
        if not np.isfinite(v) or v <= 0:
            raise FinefitError(f"scale factor for {k} must be positive, got {v!r}", k)
    out = AbInitioValues()
    runs = {}
    for model in models.values():
        for cfg in model.configurations:
            if progress:
                progress(f"Hartree-Fock for {cfg}")
            runs[cfg] = hartree_fock(cfg, Z=Z, charge=charge, relativistic=relativistic)
    for parity, model in models.items():
        eav = {}
        for spec in model.parameter_specs:
            cfgs = [model.configurations[i] for i in spec.configs]
            hf = runs[cfgs[0]]
            try:
                if spec.kind == "Eav":
                    eav[spec.name] = hf.total_energy_cm
                    continue
                if spec.kind == "F":
                    a = spec.orbitals[0]
                    b = spec.orbitals[1] if len(spec.orbitals) > 1 else None
                    value = hf.F(spec.k, a, b)
                elif spec.kind == "G":
                    value = hf.G(spec.k, spec.orbitals[0], spec.orbitals[1])
                elif spec.kind == "zeta":
                    value = hf.zeta(spec.orbitals[0], method=zeta_method)
                elif spec.kind == "R":
                    value = hf.interaction_parameter(spec.short, runs[cfgs[1]])
                else:
                    out.skipped[spec.name] = (
                        "an effective operator: it keeps its starting value"
                        if spec.kind in EFFECTIVE_KINDS
                        else "no ab initio value for this kind"
                    )
                    continue
            except FinefitError as exc:
                out.skipped[spec.name] = str(exc)
                continue
            out.ab_initio[spec.name] = float(value)
            out.start[spec.name] = float(value) * sc.get(spec.kind, 1.0)
        if eav:
            base = min(eav.values())
            rel = {n: e - base for n, e in eav.items()}
            for n, e in rel.items():
                out.ab_initio[n] = e
            # shift so that the lowest computed level lies on the lowest observed one
            values = {n: v for n, v in out.start.items() if n in model.parameters}
            values.update(rel)
            lowest = model.solve(values, derivatives=False).levels[0].energy
            target = (lowest_observed or {}).get(parity, 0.0)
            for n, e in rel.items():
                out.start[n] = e + target - lowest
    return out
