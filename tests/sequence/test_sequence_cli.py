"""The sequence and resample commands as a user runs them (serial path: the dask path is
checked against it in test_resampling.py)."""

import json
import shutil
from pathlib import Path

import finefit
from finefit.cli import main

SAMPLES = Path(__file__).resolve().parents[2] / "sample_sessions"
OSPREY = [SAMPLES / f"osprey_3d3_Z{z}.toml" for z in (23, 24, 25)]


def test_sequence_command_predicts_and_writes(tmp_path, capsys):
    out_file = tmp_path / "ob6.toml"
    rc = main(["sequence", *map(str, OSPREY), "--Z", "26", "--charge", "5", "--serial",
               "--json", "--write", str(out_file), "--figures", str(tmp_path / "figs")])
    assert rc == 0
    out = json.loads(capsys.readouterr().out)
    assert [m["Z"] for m in out["members"]] == [23, 24, 25]
    assert all(m["converged"] for m in out["members"])
    laws = {x["parameter"]: x for x in out["laws"]}
    assert laws["3d3: F2(3d)"]["law"] == "ratio" and laws["3d3: alpha(3d)"]["law"] == "value"
    pred = out["prediction"]
    assert pred["Z"] == 26 and len(pred["levels"]) == 19  # all levels of 3d3
    f2 = next(p for p in pred["parameters"] if p["name"] == "3d3: F2(3d)")
    # the invented law of make_sequence_samples.py: F2 / HF = 0.80 + 0.02 (Z - 24)
    assert abs(f2["value"] / f2["ab_initio"] - 0.84) < 3 * f2["uncertainty"] / f2["ab_initio"]
    assert all(x["uncertainty"] is not None for x in pred["levels"])
    for ext in ("png", "pdf"):
        assert (tmp_path / "figs" / f"sequence.{ext}").stat().st_size > 1000
    new = finefit.load(out_file)
    assert new.ion.Z == 26 and new.parameter_set("sequence trends").errors["3d3: F2(3d)"] > 0
    # the table form prints the members, the trends, values at other Z (interpolated at
    # 24.0 it must give back the middle member's own value within its uncertainty) and the
    # predicted levels; the charge follows from the sequence's 21 electrons
    assert main(["sequence", *map(str, OSPREY), "--serial", "--Z", "27", "--at", "24",
                 "28", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["prediction"]["charge"] == 6 and [x["Z"] for x in out["at"]] == [24, 28]
    f2_24 = next(p for p in out["at"][0]["parameters"] if p["name"] == "3d3: F2(3d)")
    mid = next(x for x in out["parameters"] if x["parameter"] == "3d3: F2(3d)"
               and x["Z"] == 24)
    assert abs(f2_24["value"] - mid["value"]) < 3 * f2_24["uncertainty"]
    assert main(["sequence", *map(str, OSPREY), "--serial", "--at", "26"]) == 0
    text = capsys.readouterr().out
    assert "Z = 25" in text and "ratio to HF" in text and "from the trends" in text


def test_sequence_command_bad_input(tmp_path, capsys):
    other = tmp_path / "other.toml"
    assert main(["new", str(other), "-c", "3d4", "--Z", "26", "--charge", "4"]) == 0
    capsys.readouterr()
    assert main(["sequence", str(OSPREY[0]), str(other), "--serial"]) == 2
    assert "isoelectronic" in capsys.readouterr().err
    assert main(["sequence", *map(str, OSPREY), "--charge", "5", "--serial"]) == 2
    assert "--Z" in capsys.readouterr().err
    assert main(["sequence", *map(str, OSPREY), "--Z", "26", "--charge", "4",
                 "--serial"]) == 2
    assert "electrons" in capsys.readouterr().err


def test_resample_command_json_and_figures(tmp_path, capsys):
    p = tmp_path / "z24.toml"
    shutil.copy(OSPREY[1], p)
    before = p.read_text()
    rc = main(["resample", str(p), "--runs", "12", "--seed", "3", "--serial", "--json",
               "--figures", str(tmp_path)])
    assert rc == 0
    out = json.loads(capsys.readouterr().out)
    assert out["method"] == "montecarlo" and out["successful"] == 12
    names = [x["name"] for x in out["parameters"]]
    assert "3d3: F2(3d)" in names and len(out["levels"]) == 19
    for name in ("montecarlo.png", "montecarlo.pdf", "montecarlo_levels.png",
                 "montecarlo_levels.pdf"):
        assert (tmp_path / name).stat().st_size > 1000, name
    assert p.read_text() == before  # the session file is not changed
    assert main(["resample", str(p), "--runs", "8", "--method", "bootstrap", "--serial"]) == 0
    assert "bootstrap" in capsys.readouterr().out
    assert main(["resample", str(p), "--runs", "1", "--serial"]) == 2
    assert main(["resample", str(p), "--scheduler", "tcp://127.0.0.1:1", "--runs", "4"]) == 2
    assert "scheduler" in capsys.readouterr().err
