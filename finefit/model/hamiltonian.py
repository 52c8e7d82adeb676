"""The intermediate-coupling Hamiltonian H = sum_p x_p C_p of a configuration set.

One coefficient matrix C_p per radial parameter and per J, in the LS basis of
exact-J states (Slater-Condon theory, Condon & Shortley phases; see
CONVENTIONS.md). Within each configuration every operator except E_av is made
traceless over the configuration's full determinant space, so without
configuration interaction E_av is the (2J+1)-weighted centre of gravity.
Because H is linear in the x_p, dE_i/dx_p = v_i^T C_p v_i exactly
(Hellmann-Feynman), which is the fit's Jacobian.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from finefit.angular.determinants import one_body
from finefit.angular.operators import spin_orbit_terms
from finefit.errors import FinefitError
from finefit.model.basis import Basis
from finefit.model.parameters import (
    ParameterSpec,
    interaction_name,
    intra_name,
    qualified,
    qualified_pair,
    sort_key,
)
from finefit.notation.configuration import Configuration
from finefit.notation.jvalues import format_j, parse_j
from finefit.threads import with_engine_threads

_ZERO = 1e-10


@dataclass(eq=False)
class OperatorBlock:
    """Coefficient matrices of one J: C[k] multiplies parameter param_index[k]."""

    J2: int
    param_index: np.ndarray
    C: np.ndarray  # (n_local_params, n, n)
    state_index: np.ndarray  # LS states of the basis, in row order
    state_config: np.ndarray

    def __post_init__(self) -> None:
        self.C_flat = self.C.reshape(self.C.shape[0], -1)
        self._packed: dict = {}

    def packed(self, params: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Upper triangles of the (symmetric) C_p of ``params`` (positions in param_index).

        Returns (P, rows, cols): P[k] holds C_p[rows, cols] with off-diagonal elements
        doubled, so that v^T C_p v = P[k] @ (v[rows] * v[cols]) with half the products.
        Cached per parameter selection.
        """
        key = None if params is None else np.asarray(params, dtype=np.int64).tobytes()
        hit = self._packed.get(key)
        if hit is None:
            rows, cols = np.triu_indices(self.size)
            C = self.C if params is None else self.C[np.asarray(params, dtype=np.int64)]
            P = np.ascontiguousarray(C[:, rows, cols] * np.where(rows == cols, 1.0, 2.0))
            hit = (P, rows, cols)
            self._packed[key] = hit
        return hit

    @property
    def J(self) -> float:
        return self.J2 / 2.0

    @property
    def size(self) -> int:
        return int(self.state_index.size)


class Model:
    """Energy-level model of one interacting set of configurations of one parity.

    >>> model = Model(["3d2", "3d 4s"])          # doctest: +SKIP
    >>> sol = model.solve({"3d2: F2(3d)": 45000.0, "3d2: zeta(3d)": 300.0})
    """

    @with_engine_threads
    def __init__(
        self,
        configurations: list[str | Configuration] | str,
        orbital_permutation: np.ndarray | None = None,
    ) -> None:
        if isinstance(configurations, str | Configuration):
            configurations = [configurations]
        self.basis = Basis(list(configurations), orbital_permutation)
        self.configurations = [c.text for c in self.basis.configs]
        self.parity = self.basis.parity
        self._build()

    # --------------------------------------------------------------- construction
    def _written_order(self, cfg: int) -> list[int]:
        info = self.basis.configs[cfg]
        names = self.basis.shell_names
        return [names.index(s.name) for s in info.configuration.subshells if s.name in names]

    def _build(self) -> None:
        basis = self.basis
        so = basis.spin_orbitals
        names = basis.shell_names
        n_cfg = len(basis.configs)
        matrices: dict[ParameterSpec, dict[int, np.ndarray]] = {}

        def add(spec: ParameterSpec, j2: int, mat: np.ndarray) -> None:
            matrices.setdefault(spec, {})[j2] = mat

        block_meta = {}
        for j2, jb in basis.j_blocks.items():
            states = jb.state_index
            n = states.size
            cfg = np.array([basis.ls_states[i].config for i in states])
            block_meta[j2] = (states, cfg)
            groups: dict[tuple[int, int], tuple[list[int], list[int]]] = {}
            for row, st in enumerate(states):
                key, pos = basis.group_position(int(st))
                groups.setdefault(key, ([], []))
                groups[key][0].append(row)
                groups[key][1].append(pos)
            cfg_rows = [np.flatnonzero(cfg == c) for c in range(n_cfg)]
            # electrostatic integrals: diagonal in (L, S)
            for t, cls in enumerate(basis.integral_classes):
                full = np.zeros((n, n))
                for key, (rows, pos) in groups.items():
                    full[np.ix_(rows, rows)] = basis.term_groups[key].coulomb[t][np.ix_(pos, pos)]
                if np.abs(full).max(initial=0.0) < _ZERO:
                    continue
                for x in range(n_cfg):
                    for y in range(x, n_cfg):
                        sub = full[np.ix_(cfg_rows[x], cfg_rows[y])]
                        if sub.size == 0 or np.abs(sub).max() < _ZERO:
                            continue
                        mat = np.zeros((n, n))
                        mat[np.ix_(cfg_rows[x], cfg_rows[y])] = sub
                        if x == y:
                            short, kind, orbs = intra_name(cls, self._written_order(x), names)
                            spec = ParameterSpec(
                                qualified(self.configurations[x], short),
                                short,
                                kind,
                                cls.k,
                                orbs,
                                (x,),
                            )
                        else:
                            if cls.k == 0 and (cls.pair1[0] == cls.pair1[1]
                                               or cls.pair2[0] == cls.pair2[1]):
                                # k = 0 with a spectator: a one-electron-like excitation,
                                # omitted with the one-electron part (Brillouin's theorem)
                                continue
                            mat[np.ix_(cfg_rows[y], cfg_rows[x])] = sub.T
                            res = interaction_name(
                                cls,
                                basis.configs[x].occupancy,
                                basis.configs[y].occupancy,
                                self._written_order(x),
                                self._written_order(y),
                                names,
                            )
                            if res is None:
                                raise FinefitError(f"internal: cannot name integral {cls}")
                            short, orbs = res
                            spec = ParameterSpec(
                                qualified_pair(
                                    self.configurations[x], self.configurations[y], short
                                ),
                                short,
                                "R",
                                cls.k,
                                orbs,
                                (x, y),
                            )
                        prev = matrices.get(spec, {}).get(j2)
                        add(spec, j2, mat if prev is None else prev + mat)
            # spin-orbit: one-body, evaluated on the exact-J vectors
            Q = jb.vectors
            for s, (_, l) in enumerate(basis.shells):
                if l == 0:
                    continue
                op = one_body(jb.block, jb.block, spin_orbit_terms(so, s))
                full = Q.T @ (op @ Q)
                for x in range(n_cfg):
                    info = basis.configs[x]
                    if s not in info.open_shells:
                        continue
                    r = cfg_rows[x]
                    if r.size == 0:
                        continue
                    mat = np.zeros((n, n))
                    mat[np.ix_(r, r)] = full[np.ix_(r, r)]
                    spec = ParameterSpec(
                        qualified(self.configurations[x], f"zeta({names[s]})"),
                        f"zeta({names[s]})",
                        "zeta",
                        1,
                        (names[s],),
                        (x,),
                    )
                    add(spec, j2, mat)
            # Trees correction alpha L(L+1) and the other (L, S)-diagonal effective
            # operators of each l^N subshell (beta, gamma, three-electron T^i)
            for x in range(n_cfg):
                info = basis.configs[x]
                for s in info.open_shells:
                    l = basis.shells[s][1]
                    n_el = info.occupancy[s]
                    if 2 <= n_el <= 4 * l and l > 0:
                        mat = self._ls_diagonal(
                            groups, cfg, x, n, lambda g, x=x, s=s: g.casimir_l[(x, s)]
                        )
                        spec = ParameterSpec(
                            qualified(self.configurations[x], f"alpha({names[s]})"),
                            f"alpha({names[s]})",
                            "alpha",
                            0,
                            (names[s],),
                            (x,),
                        )
                        add(spec, j2, mat)
                    for op in basis.effective_operators:
                        if op.shell != s or not (
                            op.min_electrons <= n_el <= 4 * l + 2 - op.min_electrons
                        ):
                            continue
                        mat = self._ls_diagonal(
                            groups, cfg, x, n, lambda g, op=op: g.effective[(op.shell, op.name)]
                        )
                        short = f"{op.name}({names[s]})"
                        spec = ParameterSpec(
                            qualified(self.configurations[x], short),
                            short,
                            op.kind,
                            op.k,
                            (names[s],),
                            (x,),
                        )
                        add(spec, j2, mat)
            for x in range(n_cfg):
                r = cfg_rows[x]
                if r.size == 0:
                    continue
                mat = np.zeros((n, n))
                mat[r, r] = 1.0
                spec = ParameterSpec(
                    qualified(self.configurations[x], "Eav"), "Eav", "Eav", 0, (), (x,)
                )
                add(spec, j2, mat)
        # E_av convention: traceless over each configuration's determinant space
        for spec, per_j in list(matrices.items()):
            if spec.kind in ("Eav", "R"):
                continue
            x = spec.configs[0]
            trace = sum((j2 + 1) * np.trace(m) for j2, m in per_j.items())
            avg = trace / basis.configs[x].n_determinants
            # every J block of the configuration gets the shift, also where C_p was zero
            for j2, (states, cfg) in block_meta.items():
                r = np.flatnonzero(cfg == x)
                if r.size == 0:
                    continue
                m = per_j.setdefault(j2, np.zeros((states.size, states.size)))
                m[r, r] -= avg
            if max(np.abs(m).max() for m in per_j.values()) < 1e-9:
                del matrices[spec]
        written = {c: [names[i] for i in self._written_order(c)] for c in range(n_cfg)}
        specs = sorted(matrices, key=lambda s: sort_key(s, written))
        self.parameter_specs: list[ParameterSpec] = specs
        self.parameters: list[str] = [s.name for s in specs]
        self._index = {name: i for i, name in enumerate(self.parameters)}
        self.blocks: list[OperatorBlock] = []
        for j2 in sorted(basis.j_blocks):
            states, cfg = block_meta[j2]
            local = [i for i, s in enumerate(specs) if j2 in matrices[s]]
            C = (
                np.stack([matrices[specs[i]][j2] for i in local])
                if local
                else np.zeros((0, states.size, states.size))
            )
            self.blocks.append(
                OperatorBlock(
                    j2, np.array(local, dtype=np.int64), np.ascontiguousarray(C), states, cfg
                )
            )
        self._block_of_j2 = {b.J2: b for b in self.blocks}

    def _ls_diagonal(self, groups, cfg: np.ndarray, x: int, n: int, getter) -> np.ndarray:
        """An operator diagonal in (L, S), from its term-group blocks, restricted to config x."""
        basis = self.basis
        mat = np.zeros((n, n))
        for key, (rows, pos) in groups.items():
            rows_a = np.array(rows)
            keep = cfg[rows_a] == x
            if keep.any():
                pos_a = np.array(pos)[keep]
                mat[np.ix_(rows_a[keep], rows_a[keep])] = getter(basis.term_groups[key])[
                    np.ix_(pos_a, pos_a)
                ]
        return mat

    # --------------------------------------------------------------- access
    @property
    def j_values(self) -> list[float]:
        return [b.J for b in self.blocks]

    @property
    def block_dimensions(self) -> dict[float, int]:
        """Number of states (levels) of each J."""
        return {b.J: b.size for b in self.blocks}

    @property
    def n_determinants(self) -> int:
        return self.basis.n_determinants

    def spec(self, name: str) -> ParameterSpec:
        return self.parameter_specs[self.index(name)]

    def index(self, name: str) -> int:
        try:
            return self._index[name]
        except KeyError:
            raise FinefitError(
                f"parameter {name!r} does not exist for configurations "
                f"{', '.join(self.configurations)}; known: {', '.join(self.parameters)}",
                name,
            ) from None

    def block(self, J: float | str) -> OperatorBlock:
        j = parse_j(J)
        b = self._block_of_j2.get(round(2 * j))
        if b is None:
            raise FinefitError(
                f"J = {format_j(j)} is impossible for {', '.join(self.configurations)}: "
                f"allowed J are {', '.join(format_j(v) for v in self.j_values)}",
                "J",
            )
        return b

    def vector(self, values: Mapping[str, float] | np.ndarray) -> np.ndarray:
        """Parameter values as a vector in ``parameters`` order (missing names are 0)."""
        if isinstance(values, np.ndarray):
            if values.shape != (len(self.parameters),):
                raise FinefitError(
                    f"expected {len(self.parameters)} parameter values, got {values.shape}",
                    "values",
                )
            return values.astype(float)
        x = np.zeros(len(self.parameters))
        for name, val in values.items():
            i = self.index(name)
            try:
                x[i] = float(val)
            except (TypeError, ValueError):
                raise FinefitError(f"value of {name!r} is not a number: {val!r}", name) from None
        if not np.all(np.isfinite(x)):
            bad = self.parameters[int(np.flatnonzero(~np.isfinite(x))[0])]
            raise FinefitError(f"value of {bad!r} is not finite", bad)
        return x

    def coefficient_matrix(self, name: str, J: float | str) -> np.ndarray:
        """C_p of one parameter in the LS basis of one J (zeros when it does not act there)."""
        b = self.block(J)
        p = self.index(name)
        hit = np.flatnonzero(b.param_index == p)
        return b.C[hit[0]].copy() if hit.size else np.zeros((b.size, b.size))

    def hamiltonian(self, values: Mapping[str, float] | np.ndarray, J: float | str) -> np.ndarray:
        b = self.block(J)
        x = self.vector(values)
        return (x[b.param_index] @ b.C_flat).reshape(b.size, b.size)

    @with_engine_threads
    def solve(self, values: Mapping[str, float] | np.ndarray, derivatives: bool = True):
        """Eigen-solution of every J block; see :class:`finefit.model.solution.Solution`."""
        from finefit.model.solution import Solution

        x = self.vector(values)
        eig = []
        for b in self.blocks:
            e = self.eigen_block(b, x)
            eig.append((e.energies, e.vectors, e.derivatives() if derivatives else None))
        return Solution(self, x, eig)

    def eigen_block(self, block: OperatorBlock | int, x: np.ndarray) -> BlockEigen:
        """Energies and eigenvectors of one J block (``block`` or its 2J) at the vector ``x``.

        The one solve of the engine: the fit, :meth:`solve` and the benchmarks call it;
        derivatives of requested states follow from :meth:`BlockEigen.derivatives`.
        """
        b = block if isinstance(block, OperatorBlock) else self._block_of_j2[block]
        n = b.size
        H = (x[b.param_index] @ b.C_flat).reshape(n, n)
        w, V = np.linalg.eigh(H)
        return BlockEigen(b, w, V)

    def eigen(self, x: np.ndarray) -> list[BlockEigen]:
        """:meth:`eigen_block` of every J block, in ``blocks`` order."""
        return [self.eigen_block(b, x) for b in self.blocks]

    def energies_and_jacobian(
        self, x: np.ndarray
    ) -> tuple[list[np.ndarray], list[np.ndarray], list[np.ndarray]]:
        """Bare eigenvalues, eigenvectors and Hellmann-Feynman derivatives per block (fast path).

        The derivative block D[i, k] is dE_i/dx_{param_index[k]}.
        """
        eig = self.eigen(x)
        return ([e.energies for e in eig], [e.vectors for e in eig],
                [e.derivatives() for e in eig])


@dataclass(eq=False)
class BlockEigen:
    """Eigen-solution of one J block: ascending energies, eigenvectors as columns (LS basis)."""

    block: OperatorBlock
    energies: np.ndarray
    vectors: np.ndarray

    def derivatives(
        self, states: np.ndarray | None = None, params: np.ndarray | None = None
    ) -> np.ndarray:
        """dE_i/dx_p = v_i^T C_p v_i (Hellmann-Feynman) of the given eigenstates (default all).

        Rows follow ``states``; columns follow ``params``, positions in the block's
        ``param_index`` (default all of them).
        """
        b = self.block
        V = self.vectors if states is None else self.vectors[:, states]
        if b.size <= 64:
            # one product with the pair products of the vector components over the upper
            # triangle (small blocks: fewer numpy calls matter more than flops)
            P, rows, cols = b.packed(params)
            return (P @ (V[rows] * V[cols])).T
        C = b.C if params is None else b.C[params]
        CV = C @ V  # (params, n, states)
        return np.einsum("jk,pjk->kp", V, CV)
