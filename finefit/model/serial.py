"""A built model as plain arrays and back (pure: no file I/O; storage keeps the files).

Building a model (determinants, the LS basis, one coefficient matrix per parameter)
costs 0.2-0.5 s for a typical set and seconds for f-shell sets, while everything a
session needs afterwards is a few arrays: the coefficient matrices C_p of each J,
the LS quantum numbers and labels of the basis states, the Landé g of each state and
the basis changes to jj and pair coupling. :func:`model_to_arrays` writes these as
a flat ``{name: ndarray}`` mapping (numbers as float64/int64 arrays, the structured
part as one JSON string; no pickles), :func:`model_from_arrays` rebuilds a
:class:`~finefit.model.hamiltonian.Model` from it that gives bit-identical energies,
derivatives, labels and compositions. The determinant basis itself is not kept:
the few uses that need it (other coupling schemes not stored, line strengths)
rebuild it on first access (:class:`StoredBasis`).
"""

from __future__ import annotations

import json
import threading
from collections.abc import Mapping
from typing import Any

import numpy as np

from finefit.errors import FinefitError
from finefit.model.basis import (
    ConfigurationInfo,
    LSState,
    SizeEstimate,
    SubshellTerm,
)
from finefit.model.coupling import BlockCoupling, coupling_data
from finefit.model.hamiltonian import Model, OperatorBlock
from finefit.model.parameters import ParameterSpec
from finefit.notation.configuration import parse_configuration

# Version of the layout below; bump it when the meaning of a field changes.
LAYOUT_VERSION = 1
# Coupling schemes whose basis changes are stored with the model (the ones
# `finefit levels`, the result tables and label reading ask for).
STORED_SCHEMES = ("jj", "JK", "J1j")


class StoredBasis:
    """The parts of :class:`~finefit.model.basis.Basis` a session uses, read from arrays.

    Configurations, active subshells, LS states and the size are held directly; any
    other attribute (determinant blocks, exact-J vectors) builds the full basis on
    first access and checks that its LS states are the stored ones, in the same order.
    """

    def __init__(
        self,
        configurations: list[str],
        parity: str,
        shells: list[tuple[int, int]],
        configs: list[ConfigurationInfo],
        ls_states: list[LSState],
        n_determinants: int,
        size: SizeEstimate,
        state_order: dict[int, np.ndarray],
    ) -> None:
        self.parity = parity
        self.shells = shells
        self.shell_names = [f"{n}{'spdfghi'[l]}" for (n, l) in shells]
        self.configs = configs
        self.ls_states = ls_states
        self.n_determinants = n_determinants
        self.size = size
        self._configurations = configurations
        self._state_order = state_order
        self._full = None
        self._lock = threading.Lock()

    def full(self):
        """The complete :class:`~finefit.model.basis.Basis` (built once, then kept)."""
        with self._lock:
            if self._full is None:
                from finefit.model.basis import Basis

                full = Basis(list(self._configurations))
                same = full.ls_states == self.ls_states and all(
                    np.array_equal(full.j_blocks[j2].state_index, order)
                    for j2, order in self._state_order.items()
                ) and set(full.j_blocks) == set(self._state_order)
                if not same:  # a stored model from other code: never mix the two
                    raise FinefitError(
                        "internal: the stored model does not match the rebuilt basis of "
                        f"{' + '.join(self._configurations)}; clear the model cache",
                        "cache",
                    )
                self._full = full
            return self._full

    def __getattr__(self, name: str) -> Any:  # only names not held directly
        if name.startswith("__") or name in ("_full", "_lock"):
            raise AttributeError(name)
        return getattr(self.full(), name)


def _term(t: SubshellTerm) -> list:
    return [t.L, t.S2, t.seniority, t.index, list(t.w), list(t.u)]


def _state(st: LSState) -> list:
    return [st.config, [_term(t) for t in st.subshell_terms],
            [list(x) for x in st.intermediates], st.L, st.S2]


def _plain(value: Any) -> Any:
    """numpy scalars in the JSON part as Python numbers."""
    if isinstance(value, np.generic):
        return value.item()
    raise TypeError(f"cannot store {type(value).__name__}")


def model_to_arrays(
    model: Model, schemes: tuple[str, ...] = STORED_SCHEMES
) -> dict[str, np.ndarray]:
    """Everything :func:`model_from_arrays` needs, as named arrays (no object arrays).

    The jj and pair-coupling bases of ``schemes`` are computed here if they were not yet
    (they depend only on the model, not on parameter values).
    """
    basis = model.basis
    coupling = coupling_data(model)
    out: dict[str, np.ndarray] = {}
    blocks_meta = []
    for i, b in enumerate(model.blocks):
        cd = coupling[b.J2]
        entry: dict[str, Any] = {"J2": b.J2, "ls": cd.ls_labels, "explicit": cd.ls_explicit,
                                 "schemes": {}}
        out[f"b{i}.param_index"] = np.asarray(b.param_index, dtype=np.int64)
        out[f"b{i}.C"] = np.ascontiguousarray(b.C, dtype=np.float64)
        out[f"b{i}.state_index"] = np.asarray(b.state_index, dtype=np.int64)
        out[f"b{i}.state_config"] = np.asarray(b.state_config, dtype=np.int64)
        out[f"b{i}.g_ls"] = np.asarray(cd.g_ls, dtype=np.float64)
        for scheme in schemes:
            if scheme != "jj" and not cd.has_jk:
                continue  # the identity: nothing to store
            labels, U = cd.scheme_basis(scheme)
            entry["schemes"][scheme] = list(labels)
            out[f"b{i}.U.{scheme}"] = np.ascontiguousarray(U, dtype=np.float64)
        blocks_meta.append(entry)
    size = basis.size
    meta = {
        "layout": LAYOUT_VERSION,
        "configurations": list(model.configurations),
        "parity": model.parity,
        "shells": [list(s) for s in basis.shells],
        "configs": [
            {"index": c.index, "text": c.text, "occupancy": list(c.occupancy),
             "open_shells": list(c.open_shells), "n_determinants": c.n_determinants}
            for c in basis.configs
        ],
        "n_determinants": int(basis.n_determinants),
        "size": [size.n_determinants, size.largest_block, size.memory_bytes],
        "ls_states": [_state(st) for st in basis.ls_states],
        "parameters": [[s.name, s.short, s.kind, s.k, list(s.orbitals), list(s.configs)]
                       for s in model.parameter_specs],
        "blocks": blocks_meta,
    }
    out["meta"] = np.array(json.dumps(meta, separators=(",", ":"), default=_plain))
    return out


def model_from_arrays(arrays: Mapping[str, np.ndarray]) -> Model:
    """The model written by :func:`model_to_arrays` (FinefitError if the layout differs)."""
    meta = json.loads(str(arrays["meta"][()]))
    if meta.get("layout") != LAYOUT_VERSION:
        raise FinefitError(f"stored model layout {meta.get('layout')!r} is not "
                           f"{LAYOUT_VERSION}", "cache")
    texts = list(meta["configurations"])
    configs = []
    for c in meta["configs"]:
        conf = parse_configuration(c["text"])
        if str(conf) != c["text"]:
            raise FinefitError(f"stored configuration {c['text']!r} reads differently", "cache")
        configs.append(ConfigurationInfo(int(c["index"]), conf, c["text"],
                                         tuple(c["occupancy"]), tuple(c["open_shells"]),
                                         int(c["n_determinants"])))
    ls_states = [
        LSState(int(cfg), tuple(SubshellTerm(L, S2, v, idx, tuple(w), tuple(u))
                                for L, S2, v, idx, w, u in terms),
                tuple(tuple(x) for x in inter), int(L), int(S2))
        for cfg, terms, inter, L, S2 in meta["ls_states"]
    ]
    specs = [ParameterSpec(name, short, kind, int(k), tuple(orbs), tuple(cfgs))
             for name, short, kind, k, orbs, cfgs in meta["parameters"]]
    blocks, state_order = [], {}
    for i, entry in enumerate(meta["blocks"]):
        C = np.ascontiguousarray(arrays[f"b{i}.C"], dtype=np.float64)
        b = OperatorBlock(int(entry["J2"]), np.asarray(arrays[f"b{i}.param_index"], np.int64),
                          C, np.asarray(arrays[f"b{i}.state_index"], np.int64),
                          np.asarray(arrays[f"b{i}.state_config"], np.int64))
        n = b.size
        if C.shape != (b.param_index.size, n, n) or b.state_config.shape != (n,):
            raise FinefitError(f"stored block {i} has inconsistent shapes", "cache")
        blocks.append(b)
        state_order[b.J2] = b.state_index
    basis = StoredBasis(texts, meta["parity"], [tuple(s) for s in meta["shells"]], configs,
                        ls_states, int(meta["n_determinants"]), SizeEstimate(*meta["size"]),
                        state_order)
    model = Model.__new__(Model)
    model.basis = basis
    model.configurations = texts
    model.parity = meta["parity"]
    model.parameter_specs = specs
    model.parameters = [s.name for s in specs]
    model._index = {name: i for i, name in enumerate(model.parameters)}
    model.blocks = blocks
    model._block_of_j2 = {b.J2: b for b in blocks}
    coupling = {}
    for i, (b, entry) in enumerate(zip(blocks, meta["blocks"], strict=True)):
        g = np.asarray(arrays[f"b{i}.g_ls"], dtype=np.float64)
        if len(entry["ls"]) != b.size or len(entry["explicit"]) != b.size or g.shape != (b.size,):
            raise FinefitError(f"stored labels of block {i} do not fit", "cache")
        cd = BlockCoupling(model, b, list(entry["ls"]), g, list(entry["explicit"]))
        for scheme, labels in entry["schemes"].items():
            U = np.asarray(arrays[f"b{i}.U.{scheme}"], dtype=np.float64)
            if U.shape != (b.size, b.size) or len(labels) != b.size:
                raise FinefitError(f"stored {scheme} basis of block {i} does not fit", "cache")
            cd.preset_scheme(scheme, list(labels), U)
        coupling[b.J2] = cd
    model._coupling_cache = coupling
    return model
