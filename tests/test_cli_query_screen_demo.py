"""The query, screen, evaluate and demo commands as a user runs them."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from matcher.errors import MatcherError
from typer.testing import CliRunner

from matcher import CAUTION
from matcher.cli.main import app

runner = CliRunner()
MATCHER = str(Path(sys.executable).with_name("matcher"))

LIBRARY = """name,phase_class,ri,formula,cas,series
limonene,slightly-polar,1030,C10H16,138-86-3,
limonene,slightly-polar,1028,C10H16,138-86-3,
p-cymene,slightly-polar,1025,C10H14,99-87-6,
"1,8-cineole",slightly-polar,1033,C10H18O,470-82-6,
decane,slightly-polar,1000,C10H22,124-18-5,n-alkanes
undecane,slightly-polar,1100,C11H24,1120-21-4,n-alkanes
dodecane,slightly-polar,1200,C12H26,112-40-3,n-alkanes
linalool,nonpolar,1098,C10H18O,78-70-6,
"""


@pytest.fixture()
def lib(tmp_path):
    db = str(tmp_path / "lab.sqlite")
    src = tmp_path / "lib.csv"
    src.write_text(LIBRARY, encoding="utf-8")
    assert runner.invoke(app, ["library", "init", "--db", db]).exit_code == 0
    res = runner.invoke(app, ["library", "import", str(src), "--db", db])
    assert res.exit_code == 0, res.output
    return db


def test_query_table_and_json(lib):
    res = runner.invoke(app, ["query", "1031", "--class", "slightly-polar", "--mol-ion", "136", "--db", lib])
    assert res.exit_code == 0, res.output
    assert "limonene" in res.output and CAUTION in res.output
    res = runner.invoke(app, ["query", "1031", "--class", "slightly-polar", "--mol-ion", "136", "--json", "--db", lib])
    doc = json.loads(res.output)
    assert doc["candidates"][0]["name"] == "limonene"
    assert {"index", "mol_ion", "ions", "hit"} <= set(doc["candidates"][0]["evidence"])
    assert sum(c["probability"] for c in doc["candidates"]) + doc["not_in_library"] == pytest.approx(1.0, abs=1e-9)


def test_query_far_away_is_empty_with_exit_zero(lib):
    res = runner.invoke(app, ["query", "2500", "--class", "slightly-polar", "--json", "--db", lib])
    assert res.exit_code == 0
    doc = json.loads(res.output)
    assert doc["candidates"] == [] and doc["not_in_library"] == 1.0


def test_unknown_class_is_one_clean_line(lib):
    proc = subprocess.run([MATCHER, "query", "1031", "--class", "waxy", "--db", lib], capture_output=True, text=True)
    assert proc.returncode == 2
    assert proc.stderr.strip().count("\n") == 0 and "unknown phase class 'waxy'" in proc.stderr
    assert "Traceback" not in proc.stderr


def _ladder_and_run(tmp_path, n_peaks=60):
    carbons = np.arange(8, 16)
    times = 1.5 + 1.9 * (carbons - 8) + 0.02 * (carbons - 8) ** 2  # invented
    (tmp_path / "ladder.csv").write_text("rt,carbons\n" + "".join(f"{t:.4f},{c}\n" for t, c in zip(times, carbons)))
    ri = np.array([1029.0, 1101.0, 1199.0, 1024.0] * (n_peaks // 4))
    rt = np.interp(ri, 100.0 * carbons, times)
    mol = [136, 156, 170, 134] * (n_peaks // 4)
    lines = "".join(f"{k + 1},{t:.5f},{m}\n" for k, (t, m) in enumerate(zip(rt, mol)))
    (tmp_path / "run.csv").write_text("Peak #,Ret. time (min),M+\n" + lines)
    return tmp_path / "ladder.csv", tmp_path / "run.csv", ri


@pytest.mark.parametrize("suffix", ["csv", "json", "xlsx"])
def test_screen_with_a_ladder_writes_every_peak(lib, tmp_path, suffix):
    ladder, run, ri = _ladder_and_run(tmp_path)
    out = tmp_path / f"out.{suffix}"
    report = tmp_path / "r.html"
    res = runner.invoke(app, ["screen", str(run), "--ladder", str(ladder), "--class", "slightly-polar",
                              "-o", str(out), "--report", str(report), "--db", lib])
    assert res.exit_code == 0, res.output
    assert out.exists() and report.exists()
    if suffix == "csv":
        df = pd.read_csv(out)
        assert list(df.columns[:12]) == ["peak", "rt", "ri", "class", "rank", "name", "cas", "library_ri",
                                         "delta_ri", "score", "probability", "flags"]
        assert sorted(df["peak"].unique()) == list(range(1, len(ri) + 1))
        first = df[df["rank"] == 1].set_index("peak")
        np.testing.assert_allclose(first["ri"].to_numpy(), ri, atol=0.05)
        assert (first.loc[first["ri"].round() == 1101, "name"] == "undecane").all()
        sums = df.groupby("peak")["probability"].sum()
        assert (sums <= 1.0 + 1e-9).all()
    html = report.read_text(encoding="utf-8")
    assert "tentative" in html


def test_screen_bad_second_file_writes_nothing(lib, tmp_path):
    ladder, run, _ = _ladder_and_run(tmp_path)
    bad = tmp_path / "bad.csv"
    bad.write_text("peak,rt\n1,abc\n")
    out = tmp_path / "out.csv"
    proc = subprocess.run([MATCHER, "screen", str(run), str(bad), "--ladder", str(ladder), "--class", "slightly-polar",
                           "-o", str(out), "--db", lib], capture_output=True, text=True)
    assert proc.returncode == 2
    assert "bad.csv" in proc.stderr and "'rt'" in proc.stderr and "Traceback" not in proc.stderr
    assert not out.exists()


def test_screen_adaptive_reports_its_fit(lib, tmp_path):
    ladder, run, _ = _ladder_and_run(tmp_path, n_peaks=80)
    out = tmp_path / "out.json"
    res = runner.invoke(app, ["screen", str(run), "--ladder", str(ladder), "--class", "slightly-polar", "--adaptive",
                              "-o", str(out), "--db", lib])
    assert res.exit_code == 0, res.output
    doc = json.loads(out.read_text())
    assert "correction" in json.dumps(doc)


def test_evaluate_json_reports_top1_and_top3(tmp_path):
    # n-alkanes lie 100 index units apart on every phase (Kovats 1958, by definition of the index), ten times
    # the non-polar window: every held-out observation must come back first, and a removed alkane must be
    # answered "not in library". Two observations per alkane (invented, 1 unit apart) give 6 held-out queries.
    db = str(tmp_path / "alkanes.sqlite")
    src = tmp_path / "alkanes.csv"
    src.write_text("name,phase_class,ri,formula\n" + "".join(
        f"{n},nonpolar,{ri},{f}\n" for n, f, base in (("decane", "C10H22", 1000), ("undecane", "C11H24", 1100),
                                                     ("dodecane", "C12H26", 1200)) for ri in (base, base + 1)),
        encoding="utf-8")
    assert runner.invoke(app, ["library", "init", "--db", db]).exit_code == 0
    assert runner.invoke(app, ["library", "import", str(src), "--db", db]).exit_code == 0
    res = runner.invoke(app, ["evaluate", "--json", "--db", db])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.output)
    assert doc["queries"] == {"leave_one_out": 6, "removed": 3}
    assert doc["top1"] == 1.0 and doc["top3"] == 1.0 and doc["coverage"] == 1.0
    assert doc["not_in_library_detection"] == 1.0 and doc["mean_top_probability_absent"] == 0.0
    assert doc["classes"]["nonpolar"]["confusable_pairs"] == []


def test_demo_from_an_unrelated_folder(tmp_path):
    work = tmp_path / "somewhere"
    work.mkdir()
    proc = subprocess.run([MATCHER, "demo", "--output", "demo-out"], cwd=work, capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    out = work / "demo-out"
    df = pd.read_csv(out / "shortlist.csv")
    assert df["peak"].nunique() == 34  # 31 constituents of the invented composition and 3 compounds not in the library
    html = (out / "report.html").read_text(encoding="utf-8")
    assert "tentative" in html and "<svg" in html
    assert "INVENTED" in proc.stdout.upper() or "invented" in proc.stdout
    # the same injection on a polyethylene-glycol column (invented run, areas only), both columns together:
    # measured 34 of 34 paired, 32 with the peak the generator made from the same compound (the other two,
    # gamma-terpinene and delta-cadinene, have equal areas and no polar entry in the demo library: a pair
    # nothing can tell apart, marked with pair probabilities about 0.45)
    two = pd.read_csv(out / "two-columns.csv", keep_default_na=False, na_values=[""], dtype={"peak": str})
    lead = two.groupby("peak", sort=False).head(1)
    assert len(lead) == 34 and lead["second_peak"].str.startswith("W").sum() >= 32
    assert lead["second_peak"].nunique() == (lead["second_peak"] != "").sum()  # each polar peak pairs once
    assert "Second column" in (out / "two-columns.html").read_text(encoding="utf-8")
    assert "peaks paired" in proc.stdout


def test_anchors_file_drives_the_correction(lib, tmp_path):
    """Internal standards named by the user correct a run shifted by +6 units (invented numbers)."""
    rows = [(1, 1006.0), (2, 1106.0), (3, 1206.0), (4, 1036.0), (5, 1031.0), (6, 1104.0)]
    (tmp_path / "shifted.csv").write_text("peak,ri\n" + "".join(f"{p},{r}\n" for p, r in rows))
    # decane, undecane, dodecane by name; two more by reference index
    (tmp_path / "anchors.csv").write_text("peak,name,ri\n1,decane,\n2,undecane,\n3,dodecane,\n4,,1030\n5,,1025\n")
    out = tmp_path / "out.json"
    res = runner.invoke(app, ["screen", str(tmp_path / "shifted.csv"), "--class", "slightly-polar", "--anchors",
                              str(tmp_path / "anchors.csv"), "-o", str(out), "--db", lib])
    assert res.exit_code == 0, res.output
    doc = json.loads(out.read_text())
    text = json.dumps(doc)
    assert '"applied": true' in text and "anchors file" in text
    from matcher.identify.screening import screen

    result = screen([str(tmp_path / "shifted.csv")], "slightly-polar", db=lib, anchors=str(tmp_path / "anchors.csv"))
    corr = result.runs[0].correction
    assert corr["applied"] and len(corr["anchors"]) == 5
    t = result.runs[0].table
    first = t[t["rank"] == 1].set_index("peak")
    assert first.loc["1", "ri"] == pytest.approx(1000.0, abs=0.5)
    assert first.loc["4", "name"] == "limonene"
    # a name the library's class lacks is refused naming the file, the row, its line and the column
    (tmp_path / "bad-anchors.csv").write_text("peak,compound,ri\n1,decane,\n2,unobtainium,\n")
    with pytest.raises(MatcherError) as err:
        screen([str(tmp_path / "shifted.csv")], "slightly-polar", db=lib, anchors=str(tmp_path / "bad-anchors.csv"))
    msg = str(err.value)
    assert "bad-anchors.csv" in msg and "unobtainium" in msg and "line 3" in msg and "compound" in msg
