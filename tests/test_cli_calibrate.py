"""``matcher calibrate`` and ``matcher ri`` end to end."""

from __future__ import annotations

import csv
import io
import json
import os
import subprocess
import sys
from pathlib import Path

import jsonschema
import numpy as np
import pytest
from typer.testing import CliRunner

from matcher.retention.calibration import load_schema
from matcher.cli.main import app
from matcher.errors import InputError
from matcher.retention.linear_index import van_den_dool_kratz

runner = CliRunner()

# invented demo ladder for the distillery scenario (programmed oven)
LADDER = "rt,carbons,name\n3.10,8,octane\n5.02,9,nonane\n7.15,10,decane\n9.20,11,undecane\n11.18,12,dodecane\n"


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return str(p)


def test_calibrate_then_ri_arguments(tmp_path):
    lad = write(tmp_path, "lad.csv", LADDER)
    cal = str(tmp_path / "cal.json")
    r = runner.invoke(app, ["calibrate", lad, "-o", cal])
    assert r.exit_code == 0, r.output
    assert "standard" in r.stdout and "decane" in r.stdout and "van den Dool" in r.stdout
    jsonschema.validate(json.loads(Path(cal).read_text()), load_schema())
    r = runner.invoke(app, ["ri", "--calibration", cal, "6.0", "2.0", "12.0"])
    assert r.exit_code == 0, r.output
    rows = list(csv.reader(io.StringIO(r.stdout)))
    assert rows[0] == ["peak", "rt", "ri", "extrapolated"]
    # van den Dool & Kratz (1963) between nonane (5.02) and decane (7.15)
    assert float(rows[1][2]) == pytest.approx(van_den_dool_kratz(6.0, 5.02, 7.15, 9, 10), abs=1e-4)
    assert [row[3] for row in rows[1:]] == ["false", "true", "true"]


def test_ri_peaks_to_file_and_json(tmp_path):
    lad = write(tmp_path, "lad.csv", LADDER)
    cal = str(tmp_path / "cal.json")
    assert runner.invoke(app, ["calibrate", lad, "-o", cal]).exit_code == 0
    peaks = write(tmp_path, "run.csv", "Peak #,Retention time [s],Area\nA,360,10\nB,150,3\n")
    out = str(tmp_path / "out.csv")
    r = runner.invoke(app, ["ri", "-c", cal, "--peaks", peaks, "-o", out])
    assert r.exit_code == 0, r.output
    rows = list(csv.DictReader(open(out, encoding="utf-8")))
    assert [x["peak"] for x in rows] == ["A", "B"]
    assert float(rows[0]["rt"]) == pytest.approx(6.0) and rows[0]["extrapolated"] == "false"
    assert rows[1]["extrapolated"] == "true"
    r = runner.invoke(app, ["ri", "-c", cal, "--peaks", peaks, "--json"])
    doc = json.loads(r.stdout)
    jsonschema.validate(doc, load_schema("ri-output.schema.json"))
    assert doc["n_extrapolated"] == 1 and doc["peaks"][0]["ri"] == pytest.approx(
        van_den_dool_kratz(6.0, 5.02, 7.15, 9, 10), abs=1e-9)


def test_isothermal_reports_holdup_method(tmp_path):
    rows = "".join(f"{1.1 + 0.3 * 1.7 ** (c - 8):.9f},{c}\n" for c in range(8, 14))
    lad = write(tmp_path, "iso.csv", "rt,carbons\n" + rows)
    cal = str(tmp_path / "cal.json")
    r = runner.invoke(app, ["calibrate", lad, "--mode", "isothermal", "-o", cal])
    assert r.exit_code == 0, r.output
    assert "hold-up time: 1.1000 min, method fit" in r.stdout
    x = 1234.5
    r = runner.invoke(app, ["ri", "-c", cal, f"{1.1 + 0.3 * 1.7 ** (x / 100 - 8):.9f}", "--json"])
    assert json.loads(r.stdout)["peaks"][0]["ri"] == pytest.approx(x, abs=0.01)


def test_backwards_ladder_refused_no_file(tmp_path):
    lad = write(tmp_path, "bad.csv", "rt,carbons\n3.1,8\n5.0,9\n4.0,10\n")
    cal = tmp_path / "cal.json"
    r = runner.invoke(app, ["calibrate", lad, "-o", str(cal)])
    assert isinstance(r.exception, InputError) and "backwards" in str(r.exception)
    assert not cal.exists() and os.listdir(tmp_path) == ["bad.csv"]


def test_soft_warning_printed_and_stored(tmp_path):
    lad = write(tmp_path, "w.csv", "rt,carbons\n2,8\n4,9\n6,10\n10,11\n12,12\n14,13\n")
    cal = tmp_path / "cal.json"
    r = runner.invoke(app, ["calibrate", lad, "-o", str(cal)])
    assert r.exit_code == 0
    assert "warning: spacing between C10 and C11" in r.stderr
    assert any("missing standard" in w for w in json.loads(cal.read_text())["warnings"])


def test_help_shows_worked_examples():
    for cmd in ("calibrate", "ri"):
        r = runner.invoke(app, [cmd, "--help"])
        assert r.exit_code == 0 and f"matcher {cmd} " in r.stdout and "Example" in r.stdout


def _script() -> str:
    exe = Path(sys.executable).with_name("matcher")
    return str(exe) if exe.exists() else "matcher"


def test_real_process_exit_code_and_one_line(tmp_path):
    lad = write(tmp_path, "bad.csv", "rt,carbons\n3.1,8\n3.1,9\n")
    p = subprocess.run([_script(), "calibrate", lad, "-o", str(tmp_path / "c.json")], capture_output=True, text=True)
    assert p.returncode == 2
    assert p.stderr.count("\n") == 1 and p.stderr.startswith("error: ") and "tied retention times" in p.stderr
    assert "Traceback" not in p.stderr and not (tmp_path / "c.json").exists()
    peaks = write(tmp_path, "p.csv", "peak,rt\n1,abc\n")
    good = write(tmp_path, "good.csv", LADDER)
    assert subprocess.run([_script(), "calibrate", good, "-o", str(tmp_path / "c.json")], capture_output=True).returncode == 0
    out = tmp_path / "o.csv"
    p = subprocess.run([_script(), "ri", "-c", str(tmp_path / "c.json"), "--peaks", peaks, "-o", str(out)],
                       capture_output=True, text=True)
    assert p.returncode == 2 and "data row 1 (line 2), column 'rt': not a number: 'abc'" in p.stderr
    assert not out.exists()
