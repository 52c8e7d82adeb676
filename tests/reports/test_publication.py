"""Publication tables: LaTeX (booktabs) and CSV (RFC 4180) output."""

import csv
import io
import shutil
from pathlib import Path

from finefit.cli import main
from finefit.reports.publication import latex_escape, publication_tables
from finefit.session import load

SAMPLE = Path(__file__).resolve().parents[2] / "sample_sessions" / "kestrel_neon_like.toml"


def test_tables_from_a_fit():
    s = load(SAMPLE)
    r = s.fit()
    files = publication_tables(r, "Nk I (invented)")
    tex = files["parameters.tex"]
    assert r"\toprule" in tex and r"\midrule" in tex and r"\bottomrule" in tex  # booktabs
    assert tex.count(r"\\") >= len(r.values) + 1
    rows = list(csv.reader(io.StringIO(files["levels.csv"])))
    assert rows[0][:4] == ["J", "E obs", "E calc", "O-C"]
    assert len(rows) == 1 + len(r.levels)
    params = list(csv.reader(io.StringIO(files["parameters.csv"])))
    assert {row[0] for row in params[1:]} == set(r.values)
    assert "$^\\circ$" in files["levels.tex"] or "°" not in "".join(x.label for x in r.levels)


def test_latex_escape():
    assert latex_escape("a_b & 50%") == r"a\_b \& 50\%"
    assert latex_escape("2p5(2P°)3p") == r"2p5(2P$^\circ$)3p"


def test_publish_command(tmp_path):
    p = tmp_path / "s.toml"
    shutil.copy(SAMPLE, p)
    out = tmp_path / "tables"
    assert main(["publish", str(p), str(out), "--fit"]) == 0
    visible = sorted(x.name for x in out.iterdir() if not x.name.startswith("."))
    assert visible == ["levels.csv", "levels.tex", "parameters.csv", "parameters.tex"]


def test_figures_command(tmp_path):
    p = tmp_path / "s.toml"
    shutil.copy(SAMPLE, p)
    out = tmp_path / "fig"
    assert main(["figures", str(p), str(out)]) == 0
    assert (out / "oc.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (RFC 2083)
    assert (out / "levels.pdf").read_bytes()[:5] == b"%PDF-"  # PDF header (ISO 32000)


def test_stick_spectrum(tmp_path):
    import numpy as np

    from finefit.reports.figures import stick_spectrum_figure
    from finefit.session import Session

    s = Session.new(["3s", "3p"], Z=11)
    s.set_parameter("3p: Eav", 16960.0)
    s.set_parameter("3p: zeta(3p)", 11.5)
    lines, _ = s.predict_lines({("3s", "3p"): 4.3})
    f = stick_spectrum_figure(lines, np.array([16956.2, 16973.4]), tmp_path / "l.png")
    assert f.stat().st_size > 1000
