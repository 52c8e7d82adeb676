"""Labels as the trade writes them: the compilations' repeated-term index, strict reading.

The index rule (CONVENTIONS.md, "Level labels"; Nielson & Koster 1963): for d^N the
copies of an LS term are numbered by increasing seniority; for f^N by Racah's (v, W, U).
It is checked here against the compilations' own labels of real levels: fitted without
any label (attached by energy order only), the leading component of each level's
eigenvector must carry the index the compilation gives it.
"""

from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import finefit
from finefit.errors import FinefitError
from finefit.model.coupling import coupling_data
from finefit.model.label_match import resolve_label


def _loose(label: str) -> str:
    """The label without repeated-term indices."""
    import re

    return re.sub(r"([A-Z])\d+(?=[)°\s]|$)", r"\1", label)

DATA = Path(__file__).parent.parent / "data" / "levels"


def unlabelled_fit(configs, Z, charge, table, **kw):
    """Import, drop every label, fit from ab initio values; pairs (published, leading)."""
    s = finefit.Session.new(configs, Z=Z, charge=charge)
    s.import_levels(DATA / table, **kw)
    published = {}
    for lv in s.levels:
        published[lv.id] = lv.label
        lv.label = None
    s.fill_ab_initio()
    r = s.fit()
    return [(published[row.id], row.calc_label, row) for row in r.levels], r


def test_index_rule_d7_and_d6_against_co_iii():
    # Co III (evaluated level compilation): 3d7 a 2D2 at 23061 cm-1 is the seniority-3 2D,
    # b 2D1 at 57226 the seniority-1 2D; 3d6(3P2)4s, 3d6(3F2)4s, 3d6(1G2)4s have
    # seniority-4 parents, (3P1), (3F1), (1G1) seniority 2
    pairs, r = unlabelled_fit(["3d7", "3d6 4s"], 27, 2, "Co_III.tsv")
    assert r.converged
    indexed = [(pub, lead) for pub, lead, _ in pairs if pub and any(
        t in pub for t in ("2D1", "2D2", "3P1", "3P2", "3F1", "3F2", "1G1", "1G2"))]
    assert len(indexed) == 28  # 2D: 2+2, 3P: 5+3, 3F: 6+6, 1G: 2+2 rows (grep)
    # without labels, energy order may exchange two mixed states of different terms
    # (3d6(3P1)4s 4P and 3d6(3F1)4s 4F here); where the term is the same, the index must be
    same_term = [(pub, lead) for pub, lead in indexed if _loose(pub) == _loose(lead)]
    assert len(same_term) >= 26
    assert all(pub == lead for pub, lead in same_term), same_term


def test_index_rule_f3_against_nd_iv():
    # Nd IV (evaluated level compilation): the low 2H term is 2H2 (U = (21))
    pairs, r = unlabelled_fit(["4f3"], 60, 3, "Nd_IV.tsv", include_derived=True)
    h2 = [(pub, lead) for pub, lead, _ in pairs if pub and "2H" in pub]
    assert h2 and all(pub == lead == "4f3 2H2°" for pub, lead in h2)


def test_index_rule_d5_and_f3_from_the_quantum_numbers():
    # no table here gives 3d5 indices (Mn II writes '3d5.(2D).4s' without one); the rule
    # itself: 2D1 v=1, 2D2 v=3, 2D3 v=5 (seniority upward); f3: 2H1 U=(11), 2H2 U=(21)
    # (Nielson & Koster 1963 order of (v, W, U); from memory)
    cd = coupling_data(finefit.Model(["3d5"]))
    explicit = {x for b in cd.values() for x in b.ls_explicit}
    assert {"3d5 2D1{v1}", "3d5 2D2{v3}", "3d5 2D3{v5}"} <= explicit
    cd = coupling_data(finefit.Model(["4f3"]))
    explicit = {x for b in cd.values() for x in b.ls_explicit}
    assert {"4f3 2H1{v3,W210,U11}°", "4f3 2H2{v3,W210,U21}°", "4f3 2F1{v1}°"} <= explicit


def test_explicit_form_is_accepted_and_written_canonically():
    s = finefit.Session.new(["3d7"], Z=27, charge=2)
    lid = s.add_level(energy=23060.95, J="5/2", parity="even",
                      label="3d7 2D{v3}")
    assert s.level(lid).label == "3d7 2D2"
    s.update_level(lid, label="3d7 2D2{v3}")
    assert s.level(lid).label == "3d7 2D2"
    with pytest.raises(FinefitError, match="2D1"):
        s.update_level(lid, label="3d7 2D1{v3}")  # index and seniority disagree


@pytest.mark.parametrize(
    "label, J, words",
    [
        ("3d7 2D9", "7/2", "J = 3/2, 5/2"),  # at J = 7/2 no 2D at all
        ("3d7 2D", "5/2", "more than once"),
        ("3d6(3F)4s 4F", "7/2", "more than once"),
        ("3d6(3F3)4s 4F", "7/2", "3d6(3F1)4s 4F, 3d6(3F2)4s 4F"),
        ("3d9 2D", "7/2", "names no state"),
        ("3d6(5D)4s 8D", "7/2", "names no state"),
    ],
)
def test_strict_labels_list_what_exists(label, J, words):
    s = finefit.Session.new(["3d7", "3d6 4s"], Z=27, charge=2)
    with pytest.raises(FinefitError) as exc:
        s.add_level(energy=1000.0, J=J, parity="even", label=label)
    assert words in str(exc.value)
    assert "\n" not in str(exc.value)


def test_index_out_of_range_lists_the_copies():
    s = finefit.Session.new(["3d7"], Z=27, charge=2)
    with pytest.raises(FinefitError, match="3d7 2D1, 3d7 2D2"):
        s.add_level(energy=1000.0, J="5/2", parity="even", label="3d7 2D3")


def test_pair_coupling_labels_attach_in_their_scheme():
    s = finefit.Session.new(["2p5 3p"], Z=10, charge=0)
    lid = s.add_level(energy=150000.0, J=1, parity="even", label="2p5(2P*1/2)3p 2[1/2]")
    assert s.level(lid).label == "2p5(2P°1/2)3p 2[1/2]"
    target = s.resolve_label("2p5(2P°1/2)3p 2[1/2]", 1, "even")
    assert target.scheme == "JK"


_MODEL = {}


@settings(max_examples=150, deadline=None)
@given(st.text(alphabet="0123456789spdfSPDFGH()[]{}°*/ ,.v=W U", max_size=30))
def test_random_label_strings_never_crash(text):
    if not _MODEL:
        _MODEL["m"] = finefit.Model(["3d6 4s", "3d7"])
    cd = coupling_data(_MODEL["m"])
    try:
        resolve_label(cd, text, 3.5)
    except FinefitError as exc:
        assert len(str(exc)) < 2000
