"""Level optimisation through the session, the files and the command line, on invented
data (the shipped two-parity demo and a session built here); external check values
come from the wavelength module's own sources (Birch & Downs 1994 via Morton 2000)."""

import json
import shutil
from pathlib import Path

import numpy as np
import pytest

import finefit
from finefit.cli import main
from finefit.errors import FinefitError
from finefit.lines.wavelengths import air_to_vacuum, vacuum_to_air
from finefit.session import Session, load
from finefit.workspace import Workspace

SAMPLES = Path(__file__).resolve().parents[2] / "sample_sessions"

TRUE = {"2p 3s: Eav": 60000.0, "2p 3s: G1(2p,3s)": 4000.0, "2p 3s: zeta(2p)": 30.0,
        "2p 3p: Eav": 70000.0, "2p 3p: F2(2p,3p)": 20000.0, "2p 3p: G0(2p,3p)": 2000.0,
        "2p 3p: G2(2p,3p)": 8000.0, "2p 3p: zeta(2p)": 30.0, "2p 3p: zeta(3p)": 5.0}


@pytest.fixture(scope="module")
def invented():
    """An invented atom: true levels from the model, session levels with 0.03 cm-1
    noise, and every allowed line with 0.002 cm-1 noise (seed fixed)."""
    from finefit.lines.classify import KnownLevel, ritz_transitions

    s = Session.new(["2p 3s", "2p 3p"], Z=6)
    for n, v in TRUE.items():
        s.set_parameter(n, v)
    rng = np.random.default_rng(17)
    true = []
    for parity, sol in s.solve().items():
        for lev in sol.levels:
            lid = s.add_level(energy=round(lev.energy + rng.normal(0, 0.03), 4), J=lev.J,
                              parity=parity, label=lev.label, uncertainty=0.03)
            true.append(KnownLevel(lid, lev.energy, lev.J, parity))
    sigma, lo, up = ritz_transitions(true)
    obs = sigma + rng.normal(0, 0.002, sigma.size)
    return s, true, obs, lo, up


def write_list(path, obs, lo=None, up=None, names=None, unc=0.002):
    rows = ["wavenumber uncertainty" + (" lower upper" if lo is not None else "")]
    for i, w in enumerate(obs):
        row = f"{w:.5f} {unc}"
        if lo is not None:
            row += f" {names(lo[i])} {names(up[i])}"
        rows.append(row)
    path.write_text("\n".join(rows) + "\n")
    return path


def test_session_levels_come_back_from_their_lines(invented, tmp_path):
    s, true, obs, lo, up = invented
    s = s.copy()
    path = write_list(tmp_path / "lines.txt", obs)
    opt = finefit.optimise_levels(s, path)  # classified here by Ritz combinations
    ref = opt.reference
    e_ref_true = next(t.energy for t in true if t.id == ref)
    e_ref = s.level(ref).energy
    z = []
    for t in true:
        if t.id == ref:
            continue
        energy, unc = opt.levels[t.id]
        # relative to the reference, the true level is within the stated uncertainty
        z.append(((energy - e_ref) - (t.energy - e_ref_true)) / unc)
        assert unc < 0.003  # far better than the 0.03 cm-1 the session had
    assert np.max(np.abs(z)) < 4.0
    assert len(opt.lines) == obs.size and opt.unclassified.size == 0
    assert all(abs(x.wavenumber - obs[x.line]) < 1e-5 for x in opt.lines)  # written .5f
    obs_ritz = list(opt.lines[0])  # the reading of CONVENTIONS.md: obs, Ritz, u, obs - Ritz
    assert obs_ritz[3] == pytest.approx(obs_ritz[0] - obs_ritz[1])

    # back into the session: energies and uncertainties, and a record of the list
    before = {lv.id: lv.energy for lv in s.levels}
    rec = s.apply_levels(opt)
    assert rec.source == str(path) and rec.n_levels == len(opt.levels)
    for lid, (energy, unc) in opt.levels.items():
        lv = s.level(lid)
        assert lv.energy == energy
        assert lv.uncertainty == (unc if lid != ref else 0.03)
        assert rec.previous[lid] == before[lid]
    p = tmp_path / "s.toml"
    s.save(p)
    again = load(p)
    assert again.level_sets[0].energies == rec.energies
    assert again.level_sets[0].previous_uncertainties[ref] == 0.03
    with pytest.raises(FinefitError, match="exists already"):
        s.apply_levels(opt, name=rec.name)


def test_classified_list_by_ids_and_labels(invented, tmp_path):
    s, true, obs, lo, up = invented
    by_id = write_list(tmp_path / "ids.txt", obs, lo, up, lambda k: true[k].id)
    opt_ids = finefit.optimise_levels(s, by_id)

    def label(k):  # "label J" in quotes: the whitespace table keeps it one field
        lv = s.level(true[k].id)
        return f'"{lv.label} {lv.J:g}"'

    by_label = write_list(tmp_path / "labels.txt", obs, lo, up, label)
    opt_lab = finefit.optimise_levels(s, by_label)
    for lid, (energy, unc) in opt_ids.levels.items():
        assert opt_lab.levels[lid] == pytest.approx((energy, unc), abs=1e-12)
    # a label without J is ambiguous: the message names the line and the candidates
    bad = tmp_path / "bad.txt"
    k = next(k for k in range(obs.size) if s.level(true[lo[k]].id).label == "2p 3s 3P°")
    bad.write_text(f'wavenumber uncertainty lower upper\n{obs[k]} 0.002 "2p 3s 3P°" '
                   f"{true[up[k]].id}\n")
    with pytest.raises(FinefitError, match="line 2.*names"):
        finefit.optimise_levels(s, bad)
    half = tmp_path / "half.txt"
    half.write_text(f"wavenumber uncertainty lower upper\n{obs[0]} 0.002 L001 -\n")
    with pytest.raises(FinefitError, match="line 2"):
        finefit.optimise_levels(s, half)
    # the trade's spellings of one level: id, "label J", compact, * for the odd mark
    for text in ("L003", "2p 3s 3P° 2", "2p 3s 3P°2", "2p 3s 3P*2"):
        assert s.resolve_level(text) == next(
            lv.id for lv in s.levels if lv.label == "2p 3s 3P°" and lv.J == 2)
    partly = tmp_path / "partly.txt"
    partly.write_text(f"wavenumber,uncertainty\n{obs[0]},0.002\n{obs[1]},\n")
    with pytest.raises(FinefitError, match="line 3: no uncertainty"):
        finefit.optimise_levels(s, partly)


def test_list_without_uncertainties_estimates_one_from_the_residuals(invented, tmp_path):
    # all lines with 0.002 cm-1 noise, no uncertainty column: the common uncertainty
    # sqrt(chi2/dof) of equal weights comes out near 0.002 (a chi-square with ~100
    # degrees of freedom: within 20 %)
    s, true, obs, lo, up = invented
    path = tmp_path / "bare.txt"
    path.write_text("wavenumber\n" + "".join(f"{w:.5f}\n" for w in obs))
    opt = finefit.optimise_levels(s, path)
    assert opt.reduced_chi2 == pytest.approx(1.0, abs=1e-9)
    assert opt.lines[0].uncertainty == pytest.approx(0.002, rel=0.2)
    assert any("estimated from the residuals" in w for w in opt.warnings)


def test_air_wavelength_list_round_trip(invented, tmp_path):
    # a list of air wavelengths (as read by the wavelength module, Birch & Downs 1994):
    # the Ritz air wavelength of a line that alone defines its level reproduces the
    # observed air wavelength
    s, true, obs, lo, up = invented
    s = s.copy()
    pick = [k for k in range(obs.size) if 1e8 / obs[k] > 2100][:40]
    lam_air = vacuum_to_air(1e8 / obs[pick])
    path = tmp_path / "air.txt"
    path.write_text("wavelength uncertainty\n" + "".join(
        f"{x:.6f} 0.0005\n" for x in lam_air))
    opt = finefit.optimise_levels(s, path)
    for x in opt.lines:
        assert x.air_wavelength == pytest.approx(vacuum_to_air(x.vacuum_wavelength), abs=1e-9)
        assert air_to_vacuum(x.air_wavelength) == pytest.approx(x.vacuum_wavelength, abs=1e-7)
        if "defines level" in x.flags:
            assert x.air_wavelength == pytest.approx(lam_air[x.line], abs=2e-6)


def test_predicted_lines_use_ritz_values_between_observed_levels(invented, tmp_path):
    s, true, obs, lo, up = invented
    s = s.copy()
    missing = s.levels[-1].id
    s.remove_level(missing)
    opt = finefit.optimise_levels(s, write_list(tmp_path / "l.txt", obs))
    s.apply_levels(opt)
    lines, _ = s.predict_lines({("3s", "3p"): 3.0, ("2p", "3s"): 1.0})
    energy = {lv.id: lv.energy for lv in s.levels}
    kinds = {x.source for x in lines}
    assert kinds == {"Ritz", "obs/calc"}  # only the removed level is unobserved
    for x in lines:
        if x.source == "Ritz":
            assert x.wavenumber == pytest.approx(energy[x.upper_id] - energy[x.lower_id],
                                                 abs=1e-9)
            assert x.vacuum_wavelength == pytest.approx(1e8 / x.wavenumber)
        else:
            assert missing not in (x.lower_id, x.upper_id)
            assert (x.lower_id is None) != (x.upper_id is None)
    # with the optimisation at hand its covariance gives the Ritz uncertainties
    with_cov, _ = s.predict_lines({("3s", "3p"): 3.0, ("2p", "3s"): 1.0}, optimised=opt)
    for x in with_cov:
        if x.source == "Ritz":
            assert x.wavenumber_uncertainty == pytest.approx(
                opt.ritz(x.lower_id, x.upper_id)[1], rel=1e-12)
    calc, _ = s.predict_lines({("3s", "3p"): 3.0, ("2p", "3s"): 1.0}, observed=False)
    assert {x.source for x in calc} == {"calc"}


def test_applying_levels_is_undoable_in_the_workspace(invented, tmp_path):
    s, true, obs, lo, up = invented
    s = s.copy()
    ws = Workspace(s, journal=False)
    opt = finefit.optimise_levels(s, write_list(tmp_path / "l.txt", obs))
    before = [(lv.energy, lv.uncertainty) for lv in s.levels]
    ws.edit("optimised levels", lambda sess: sess.apply_levels(opt))
    assert len(s.level_sets) == 1 and s.levels[3].energy != before[3][0]
    ws.undo()
    assert [(lv.energy, lv.uncertainty) for lv in ws.session.levels] == before
    assert ws.session.level_sets == []


def test_malformed_level_set_is_rejected(tmp_path):
    from finefit.storage.session_file import parse_session

    base = Session.new(["2p 3s"], Z=6).to_toml()
    with pytest.raises(FinefitError, match="level set 1.*energies"):
        parse_session(base + '\n[[level_set]]\nname = "x"\nenergies = { L001 = "high" }\n')
    with pytest.raises(FinefitError, match="needs 'name'"):
        parse_session(base + '\n[[level_set]]\nsource = "x"\n')
    p = tmp_path / "s.toml"
    p.write_text(base + '\n[[level_set]]\nname = "x"\ncolour = 3\n')
    with pytest.raises(FinefitError, match="colour"):
        load(p)
    assert main(["optimise", str(p), str(p)]) == 2


def test_readme_tour_on_the_invented_demo(tmp_path, capsys):
    # the loop of the README: classify, optimise (the deliberately mismeasured line is
    # flagged, then kept out), write, fit, predict, search
    s_path = tmp_path / "kc.toml"
    shutil.copy(SAMPLES / "kestrel_two_parity.toml", s_path)
    lines = str(SAMPLES / "kestrel_two_parity_lines.txt")
    assert main(["optimise", str(s_path), lines, "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    flagged = [x for x in out["lines"] if "outlier" in x["flags"]]
    worst = max(flagged, key=lambda x: abs(x["normalised"]))
    assert worst["line"] == 10 and abs(worst["normalised"]) > 5  # the invented blend
    assert out["reduced_chi2"] > 3
    assert main(["optimise", str(s_path), lines, "--exclude", "10", "--write",
                 "--export", str(tmp_path / "tables"), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["reduced_chi2"] < 2 and out["level_set"] == "kestrel_two_parity_lines.txt"
    assert not [x for x in out["lines"] if "outlier" in x["flags"] and x["used"]]
    tex = (tmp_path / "tables" / "optimised_levels.tex").read_text()
    assert r"\toprule" in tex and "L012" in tex
    cov = (tmp_path / "tables" / "level_covariance.csv").read_text().splitlines()
    assert len(cov) == 1 + 12 and cov[0].startswith("level,L002")  # L001 is the reference
    csv = (tmp_path / "tables" / "ritz_lines.csv").read_text().splitlines()
    assert csv[0].startswith("Line,Lower,Upper") and len(csv) == 1 + len(out["lines"])
    s = load(s_path)
    assert s.level_sets[0].n_lines == out["n_lines_used"]
    assert s.level("L012").uncertainty < 0.005
    assert main(["fit", str(s_path), "--write", "--json"]) == 0
    fit = json.loads(capsys.readouterr().out)
    assert fit["converged"] and fit["sigma"] < 0.01  # invented levels, exact model
    assert main(["lines", str(s_path), "--json"]) == 0
    pred = json.loads(capsys.readouterr().out)["lines"]
    assert {x["from"] for x in pred} == {"Ritz", "obs/calc"}
    assert main(["lines", str(s_path), "--optimise", lines, "--json"]) == 0
    with_cov = json.loads(capsys.readouterr().out)["lines"]
    ritz = [x for x in with_cov if x["from"] == "Ritz"]
    assert ritz and np.median([x["wavenumber_uncertainty"] for x in ritz]) < 0.005
    assert main(["search", str(s_path), lines, "--J", "2", "--parity", "even", "--energy",
                 "74665", "--tolerance", "0.02", "--json"]) == 0
    cands = json.loads(capsys.readouterr().out)
    assert cands[0]["energy"] == pytest.approx(74664.72, abs=0.03)  # make_samples.py
    assert len(cands[0]["lines"]) == 2
    # text output at 80 columns, and bad input
    assert main(["optimise", str(s_path), lines, "--level", "L012"]) == 0
    assert "Lines of L012" in capsys.readouterr().out
    assert main(["optimise", str(s_path), lines, "--exclude", "999"]) == 2
    assert main(["optimise", str(s_path), lines, "--reference", "nowhere"]) == 2
    assert "nowhere" in capsys.readouterr().err
