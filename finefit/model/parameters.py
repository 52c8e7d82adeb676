"""Radial parameters of a configuration set: which exist, their names and kinds."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from finefit.angular.operators import IntegralClass
from finefit.errors import FinefitError

KIND_ORDER = {
    "Eav": 0, "F": 1, "G": 2, "zeta": 3, "alpha": 4, "beta": 5, "gamma": 6, "T": 7, "M": 8,
    "P": 9, "R": 10,
}


@dataclass(frozen=True)
class ParameterSpec:
    """One radial parameter: its qualified name and what it multiplies.

    ``orbitals`` are orbital names in the order of the name (``("3d", "4s")`` for
    G2(3d,4s); a, b, c, d for R^k(ab,cd)); ``configs`` the configuration indices
    it belongs to (one, or the two of an interaction).
    """

    name: str
    short: str
    kind: str
    k: int
    orbitals: tuple[str, ...]
    configs: tuple[int, ...]

    @property
    def is_interaction(self) -> bool:
        return self.kind == "R"


def qualified(config_text: str, short: str) -> str:
    return f"{config_text}: {short}"


def qualified_pair(a: str, b: str, short: str) -> str:
    return f"{a} | {b}: {short}"


def intra_name(
    cls: IntegralClass, written_order: list[int], shell_names: list[str]
) -> tuple[str, str, tuple[str, ...]]:
    """Short name and kind of an integral class inside one configuration."""
    (p, q), (r, s) = cls.pair1, cls.pair2

    def order(i: int, j: int) -> tuple[int, int]:
        return (i, j) if written_order.index(i) <= written_order.index(j) else (j, i)

    if p == q and r == s:
        if p == r:
            nm = shell_names[p]
            return f"F{cls.k}({nm})", "F", (nm,)
        i, j = order(p, r)
        return f"F{cls.k}({shell_names[i]},{shell_names[j]})", "F", (shell_names[i], shell_names[j])
    if (p, q) == (r, s):
        i, j = order(p, q)
        return f"G{cls.k}({shell_names[i]},{shell_names[j]})", "G", (shell_names[i], shell_names[j])
    raise FinefitError(f"internal: integral {cls} cannot act inside one configuration")


def interaction_name(
    cls: IntegralClass,
    occ_a: tuple[int, ...],
    occ_b: tuple[int, ...],
    order_a: list[int],
    order_b: list[int],
    shell_names: list[str],
) -> tuple[str, tuple[str, ...]] | None:
    """Short name R^k(ab,cd) of an integral connecting configurations A and B.

    a, b are orbitals of A, c, d of B, electron 1 going a -> c and electron 2 b -> d;
    the orbitals of each side in the order its configuration is written. Returns
    None when the integral cannot connect A and B.
    """
    (p, q), (r, s) = cls.pair1, cls.pair2
    diff = np.array(occ_b) - np.array(occ_a)
    best = None
    for (x1, y1), (x2, y2) in (((p, q), (r, s)), ((r, s), (p, q))):
        for a, c in ((x1, y1), (y1, x1)):
            for b, d in ((x2, y2), (y2, x2)):
                change = np.zeros_like(diff)
                change[a] -= 1
                change[b] -= 1
                change[c] += 1
                change[d] += 1
                if not np.array_equal(change, diff):
                    continue
                if a not in order_a or b not in order_a or c not in order_b or d not in order_b:
                    continue
                key = (order_a.index(a), order_a.index(b), order_b.index(c), order_b.index(d))
                if key[0] > key[1] or (a == b and key[2] > key[3]):
                    continue
                if best is None or key < best[0]:
                    best = (key, (a, b, c, d))
    if best is None:
        return None
    a, b, c, d = (shell_names[i] for i in best[1])
    return f"R{cls.k}({a}{b},{c}{d})", (a, b, c, d)


def sort_key(spec: ParameterSpec, written: dict[int, list[str]]) -> tuple:
    """Parameters by configuration, then kind, then orbitals in written order, then k."""
    cfg = spec.configs
    order = written[cfg[0]]
    orb_pos = tuple(order.index(o) if o in order else 99 for o in spec.orbitals)
    return (
        len(cfg) > 1,
        cfg,
        KIND_ORDER[spec.kind],
        len(spec.orbitals),
        orb_pos,
        spec.k,
        spec.name,
    )
