"""Labelled bases in LS, jj and pair (JK) coupling, and the transformations between them.

The LS basis is the model's own basis. jj and JK bases are joint eigenvectors of
their coupling-tree Casimir operators (each subshell's j-groups and total J, the
partial couplings in written order; for JK the core's L, S, J_c and K = J_c + l),
diagonalised one after another inside the exact-J space of each configuration,
exactly as for LS. Compositions in a scheme are the squared overlaps with its basis.
"""

from __future__ import annotations

import re

import numpy as np

from finefit.angular.determinants import one_body, two_body
from finefit.angular.operators import (
    OneBody,
    j_subshell_operators,
    lplus_terms,
    lz_terms,
    pairing_terms,
    split_degenerate,
    splus_terms,
    sz_terms,
)
from finefit.model.basis import (
    TIE_BREAK_WEIGHTS,
    Basis,
    LSState,
    _casimir_value,
    _casimir_value2,
    _p_seniority,
    _seniority,
)
from finefit.model.solution import lande_g_ls
from finefit.notation.jvalues import format_angular
from finefit.notation.labels import SubshellPart, format_jj, format_ls
from finefit.notation.terms import seniority_copies, term_symbol
from finefit.threads import with_engine_threads


def ls_label(basis: Basis, state: LSState, explicit: bool = False) -> str:
    """The LS label of a basis state, repeated terms with their compilation index.

    ``explicit`` adds finefit's explicit quantum numbers (``3d7 2D2{v3}``).
    """
    info = basis.configs[state.config]
    parts = []
    k = 0
    for s in info.configuration.subshells:
        if s.is_open and s.name in basis.shell_names:
            t = state.subshell_terms[k]
            k += 1
            parts.append(
                SubshellPart(s.name, s.occupancy, s.l, t.L, t.S2, t.seniority, t.index, t.w, t.u)
            )
        else:
            parts.append(SubshellPart(s.name, s.occupancy, s.l))
    odd = info.configuration.parity == "odd"
    return format_ls(parts, list(state.intermediates), state.L, state.S2, odd, explicit)


class _Casimirs:
    """Projected operators on the exact-J vectors Q of one M_J = J block."""

    def __init__(self, basis: Basis, j2: int, Q: np.ndarray) -> None:
        self.basis = basis
        self.block = basis.mj_block(j2)
        self.up = basis.mj_block(j2 + 2)
        self.Q = Q
        self.so = basis.spin_orbitals

    def vector_casimir(self, z_terms: OneBody, plus_terms: OneBody) -> np.ndarray:
        """Q^T X^2 Q for X with X_z and X_+ given as one-body terms: X^2 = Xz^2 + Xz + X- X+."""
        z = one_body(self.block, self.block, z_terms)
        p = one_body(self.block, self.up, plus_terms)
        PQ = p @ self.Q
        d = z.diagonal()
        if z.nnz == np.count_nonzero(d):
            # X_z diagonal on determinants (L_z, S_z): Q^T (Xz^2 + Xz) Q in one product
            return self.Q.T @ ((d * (d + 1.0))[:, None] * self.Q) + PQ.T @ PQ
        ZQ = z @ self.Q
        return ZQ.T @ ZQ + self.Q.T @ ZQ + PQ.T @ PQ

    def one(self, terms: OneBody) -> np.ndarray:
        return self.Q.T @ (one_body(self.block, self.block, terms) @ self.Q)

    def two(self, terms) -> np.ndarray:
        return self.Q.T @ (two_body(self.block, terms)[0] @ self.Q)


def _sequential(ops: list[np.ndarray], n: int, tie: np.ndarray | None):
    """Joint eigenvectors of commuting matrices, one after another; degenerate rest by ``tie``."""
    R = np.eye(n)
    groups = [np.arange(n)]
    for op in ops:
        groups = split_degenerate(op, R, groups)
    index = np.zeros(n, dtype=int)
    for g in groups:
        if g.size > 1:
            if tie is not None:
                sub = R[:, g].T @ tie @ R[:, g]
                w, U = np.linalg.eigh((sub + sub.T) / 2)
                R[:, g] = R[:, g] @ U
            index[g] = np.arange(1, g.size + 1)
    # diagonal of R^T op R as one matrix product (a three-operand einsum is ~10x slower)
    values = [np.sum(R * (op @ R), axis=0) for op in ops]
    return R, values, index


def _two_j(x: float) -> int:
    return int(round(-1.0 + np.sqrt(1.0 + 4.0 * max(x, 0.0))))


class BlockCoupling:
    """Labels and basis changes of one J block.

    LS labels (also in the explicit form with Racah's quantum numbers) and g are made
    with the block; the jj, pair-coupling (JK) and J1j bases are built the first time
    a composition or a label in that scheme is asked for (they cost as much as the
    rest of the model and only displays and labels in those schemes need them).
    """

    def __init__(
        self, model, b, ls_labels: list[str], g_ls: np.ndarray, ls_explicit: list[str]
    ) -> None:
        self.J2: int = b.J2
        self.ls_labels = ls_labels
        self.ls_explicit = ls_explicit
        self.g_ls = g_ls
        self.state_config: np.ndarray = b.state_config
        self._model = model
        self._block = b
        basis = model.basis
        # pair coupling exists where the last open subshell holds one electron
        self.has_jk: bool = any(
            len(info.open_shells) >= 2 and info.occupancy[info.open_shells[-1]] == 1
            for x, info in enumerate(basis.configs)
            if np.any(b.state_config == x)
        )
        self._jj: tuple[list[str], np.ndarray] | None = None
        self._jk: tuple[list[str], np.ndarray] | None = None
        self._j1j: tuple[list[str], np.ndarray] | None = None

    @property
    def jj_labels(self) -> list[str]:
        return self._jj_basis()[0]

    @property
    def jj_U(self) -> np.ndarray:
        """Columns: jj basis states in LS coordinates."""
        return self._jj_basis()[1]

    @property
    def jk_labels(self) -> list[str]:
        return self._jk_basis()[0]

    @property
    def jk_U(self) -> np.ndarray:
        return self._jk_basis()[1]

    def _jj_basis(self) -> tuple[list[str], np.ndarray]:
        if self._jj is None:
            self._jj = _scheme_basis(self._model, self._block, self.ls_labels, "jj")
        return self._jj

    def _jk_basis(self) -> tuple[list[str], np.ndarray]:
        if self._jk is None:
            if self.has_jk:
                self._jk = _scheme_basis(self._model, self._block, self.ls_labels, "JK")
            else:
                self._jk = (list(self.ls_labels), np.eye(self._block.size))
        return self._jk

    @property
    def j1j_labels(self) -> list[str]:
        return self._j1j_basis()[0]

    def _j1j_basis(self) -> tuple[list[str], np.ndarray]:
        if self._j1j is None:
            if self.has_jk:
                self._j1j = _scheme_basis(self._model, self._block, self.ls_labels, "J1j")
            else:
                self._j1j = (list(self.ls_labels), np.eye(self._block.size))
        return self._j1j

    def preset_scheme(self, name: str, labels: list[str], U: np.ndarray) -> None:
        """Give the basis of a scheme computed before (a model read back from arrays)."""
        key = {"jj": "_jj", "jk": "_jk", "j1j": "_j1j"}[name.lower()]
        setattr(self, key, (labels, U))

    def scheme_basis(self, name: str) -> tuple[list[str], np.ndarray | None]:
        """Labels and basis change (None for LS, the identity) of a scheme."""
        key = name.lower()
        if key == "ls":
            return self.ls_labels, None
        if key == "jj":
            return self._jj_basis()
        if key in ("jk", "pair"):
            return self._jk_basis()
        if key == "j1j":
            return self._j1j_basis()
        from finefit.errors import FinefitError

        raise FinefitError(f"unknown coupling scheme {name!r}: use LS, jj, JK or J1j", name)

    def scheme(self, name: str, v: np.ndarray) -> tuple[list[str], np.ndarray]:
        labels, U = self.scheme_basis(name)
        return labels, v if U is None else U.T @ v

    def scheme_configs(self, name: str, block) -> np.ndarray:
        # all three bases are configuration-pure and keep the configuration order of rows
        return self.state_config


def coupling_data(model) -> dict[int, BlockCoupling]:
    """Per-J labels and basis changes of a model (computed once, cached on the model)."""
    cached = getattr(model, "_coupling_cache", None)
    if cached is not None:
        return cached
    basis: Basis = model.basis
    out = {}
    for b in model.blocks:
        states = [basis.ls_states[i] for i in b.state_index]
        ls = [ls_label(basis, st) for st in states]
        explicit = [ls_label(basis, st, explicit=True) for st in states]
        g = np.array([lande_g_ls(st.L, st.S2, b.J2) for st in states])
        out[b.J2] = BlockCoupling(model, b, ls, g, explicit)
    model._coupling_cache = out
    return out


@with_engine_threads
def _scheme_basis(model, b, ls: list[str], scheme: str) -> tuple[list[str], np.ndarray]:
    """The jj (``scheme = "jj"``), pair-coupling (``"JK"``) or J1j basis of one J block."""
    basis: Basis = model.basis
    jb = basis.j_blocks[b.J2]
    states = [basis.ls_states[i] for i in b.state_index]
    n = b.size
    if scheme == "jj":
        U, labels = np.zeros((n, n)), [""] * n
    else:
        U, labels = np.eye(n), list(ls)
    for x, info in enumerate(basis.configs):
        rows = np.flatnonzero(b.state_config == x)
        if rows.size == 0:
            continue
        sub = _Casimirs(basis, b.J2, jb.vectors[:, rows])
        tie = _tie_operator(model, b, x, rows)
        if scheme == "jj":
            res = _jj_basis(basis, info, sub, tie, b.J2)
        else:
            res = _jk_basis(basis, info, sub, tie, [states[r] for r in rows], b.J2, scheme)
        if res is None:
            continue
        R, labs = res
        U[np.ix_(rows, rows)] = R
        for r, lab in zip(rows, labs, strict=True):
            labels[r] = lab
    return labels, U


def _tie_operator(model, b, x: int, rows: np.ndarray) -> np.ndarray:
    tie = np.zeros((rows.size, rows.size))
    for pos, spec in enumerate(model.parameter_specs):
        if spec.kind == "F" and len(spec.orbitals) == 1 and spec.configs == (x,):
            hit = np.flatnonzero(b.param_index == pos)
            if hit.size:
                tie += TIE_BREAK_WEIGHTS.get(spec.k, 0.0) * b.C[hit[0]][np.ix_(rows, rows)]
    return tie


def _jj_basis(basis: Basis, info, cas: _Casimirs, tie: np.ndarray, J2: int):
    so = basis.spin_orbitals
    shells = list(info.open_shells)
    ops, keys = [], []
    for s in shells:
        l = basis.shells[s][1]
        if l > 0:
            for j2 in (2 * l - 1, 2 * l + 1):
                number, jz, jplus = j_subshell_operators(so, s, j2)
                if j2 == 2 * l + 1:
                    ops.append(cas.one(number))
                    keys.append(("N+", s))
                ops.append(cas.vector_casimir(jz, jplus))
                keys.append(("Jg", s, j2))
        ops.append(
            cas.vector_casimir(
                lz_terms(so, [s]) + sz_terms(so, [s]),
                lplus_terms(so, [s]) + splus_terms(so, [s]),
            )
        )
        keys.append(("J", s))
    for k in range(1, len(shells) - 1):
        sel = shells[: k + 1]
        ops.append(
            cas.vector_casimir(
                lz_terms(so, sel) + sz_terms(so, sel), lplus_terms(so, sel) + splus_terms(so, sel)
            )
        )
        keys.append(("Jc", k))
    n = cas.Q.shape[1]
    R, values, index = _sequential(ops, n, tie)
    val = dict(zip(keys, values, strict=True))
    labels = []
    for i in range(n):
        parts = []
        for s in shells:
            n_el = info.occupancy[s]
            l = basis.shells[s][1]
            if l == 0:
                groups = [(1, n_el)]
            else:
                n_plus = int(round(val[("N+", s)][i]))
                groups = [(g, c) for g, c in ((2 * l - 1, n_el - n_plus), (2 * l + 1, n_plus)) if c]
            parts.append(
                (
                    basis.shell_names[s],
                    n_el,
                    l,
                    groups,
                    _two_j(val[("J", s)][i]),
                    int(index[i]) if len(shells) == 1 else 0,
                )
            )
        inter = [_two_j(val[("Jc", k)][i]) for k in range(1, len(shells) - 1)]
        lab = format_jj(parts, inter)
        if len(shells) > 1 and index[i]:
            lab += "abcdefghijklmnopqrstuvwxyz"[index[i] - 1]
        labels.append(lab)
    return R, labels


def _jk_basis(
    basis: Basis, info, cas: _Casimirs, tie, states: list[LSState], J2: int, mode: str = "JK"
):
    """Core (all open subshells but the last, one electron) in LS with J_c; then pair coupling
    K = J_c + l, J = K + s (``mode="JK"``, Racah 1942), or J1j coupling J = J_c + j of the
    outer electron (``mode="J1j"``)."""
    shells = list(info.open_shells)
    if len(shells) < 2 or info.occupancy[shells[-1]] != 1:
        return None
    so = basis.spin_orbitals
    core = shells[:-1]
    outer = shells[-1]
    ops, keys = [], []
    for pos, s in enumerate(core):
        l = basis.shells[s][1]
        n_el = info.occupancy[s]
        if n_el in (1, 4 * l + 1):
            continue
        ops.append(cas.vector_casimir(lz_terms(so, [s]), lplus_terms(so, [s])))
        keys.append(("L", pos))
        ops.append(cas.vector_casimir(sz_terms(so, [s]), splus_terms(so, [s])))
        keys.append(("S", pos))
        if l >= 2:
            ops.append(cas.two(pairing_terms(so, s)))
            keys.append(("v", pos))
    for k in range(1, len(core)):
        sel = core[: k + 1]
        ops.append(cas.vector_casimir(lz_terms(so, sel), lplus_terms(so, sel)))
        keys.append(("Lc", k))
        ops.append(cas.vector_casimir(sz_terms(so, sel), splus_terms(so, sel)))
        keys.append(("Sc", k))
    jc_z = lz_terms(so, core) + sz_terms(so, core)
    jc_p = lplus_terms(so, core) + splus_terms(so, core)
    ops.append(cas.vector_casimir(jc_z, jc_p))
    keys.append(("Jc",))
    outer_l = basis.shells[outer][1]
    if mode == "JK":
        ops.append(
            cas.vector_casimir(jc_z + lz_terms(so, [outer]), jc_p + lplus_terms(so, [outer]))
        )
        keys.append(("K",))
    elif outer_l > 0:
        ops.append(cas.one(j_subshell_operators(so, outer, 2 * outer_l + 1)[0]))
        keys.append(("j+",))
    n = cas.Q.shape[1]
    R, values, index = _sequential(ops, n, tie)
    val = dict(zip(keys, values, strict=True))
    labels = []
    outer_sub = None
    for s in info.configuration.subshells:
        if s.is_open:
            outer_sub = s
    for i in range(n):
        parts = []
        pos = 0
        inter = []
        for s in info.configuration.subshells:
            if s is outer_sub:
                continue
            if s.is_open and s.name in basis.shell_names:
                l, n_el = s.l, s.occupancy
                if n_el in (1, 4 * l + 1):
                    parts.append(SubshellPart(s.name, n_el, l, l, 1, 1, 0))
                else:
                    Ls = _casimir_value(val[("L", pos)][i])
                    S2s = _casimir_value2(val[("S", pos)][i])
                    v = _seniority(val[("v", pos)][i], l, n_el) if l >= 2 else _p_seniority(Ls, S2s)
                    copies = seniority_copies(l, n_el, Ls, S2s)
                    # the compilations' index; copies of equal seniority (f shells) keep the
                    # running letter added below
                    nk = copies.index(v) + 1 if len(copies) > 1 else 0
                    parts.append(SubshellPart(s.name, n_el, l, Ls, S2s, v, nk))
                pos += 1
            else:
                parts.append(SubshellPart(s.name, s.occupancy, s.l))
        for k in range(1, len(core)):
            inter.append((_casimir_value(val[("Lc", k)][i]), _casimir_value2(val[("Sc", k)][i])))
        if len(core) == 1:
            p = next(p for p in parts if p.L is not None)
            cL, cS2 = p.L, p.S2
        else:
            cL, cS2 = inter[-1]
            inter = inter[:-1]
        core_odd = (
            sum(s.l * s.occupancy for s in info.configuration.subshells if s is not outer_sub) % 2
            == 1
        )
        text = format_ls(parts, inter, cL, cS2, core_odd)
        head, _, final = text.rpartition(" ")
        # core term with its J in parentheses, then the outer electron and [K]
        jc2 = _two_j(val[("Jc",)][i])
        core_term = final if len(core) == 1 else term_symbol(cL, cS2, core_odd)
        head_text = head
        odd = info.configuration.parity == "odd"
        # an index digit on the core term would run into J_c: separate them by a comma
        sep = "" if re.fullmatch(r"\d+[A-Z]°?", core_term) else ","
        if mode == "JK":
            k2 = _two_j(val[("K",)][i])
            lab = (
                f"{head_text}({core_term}{sep}{format_angular(jc2)}){outer_sub.name} "
                f"2[{format_angular(k2)}]" + ("°" if odd else "")
            )
        else:
            ol = outer_sub.l
            j2 = 1 if ol == 0 else (2 * ol + 1 if round(val[("j+",)][i]) == 1 else 2 * ol - 1)
            lab = (
                f"{head_text}({core_term}{sep}{format_angular(jc2)}){outer_sub.name}"
                f"({format_angular(j2)})"
            )
        if index[i]:
            lab += "abcdefghijklmnopqrstuvwxyz"[index[i] - 1]
        labels.append(lab)
    return R, labels


__all__ = ["coupling_data", "ls_label", "BlockCoupling"]
