"""One name per idea, seen from the command line: Greek shorthand read alike when finding and when adding,
close names only in find, confirm recording the compound's identity, and the install command named when the
PostgreSQL driver is missing.

Library values are the invented demo library's. Outside facts: β-pinene's CAS number 127-91-3 and
terpinolene's 586-62-9 (from memory; the CAS check-digit rule verifies them), the formula C10H16 of monoterpene
hydrocarbons with nominal mass 136 (fact of the trade).
"""

from __future__ import annotations

import subprocess
import sys
from importlib.resources import files

import pytest
from typer.testing import CliRunner

import matcher
from matcher.cli.main import app

runner = CliRunner()


@pytest.fixture
def lab(tmp_path):
    lib = matcher.open_library(str(tmp_path / "lab.sqlite"), create=True)
    (tmp_path / "demo.csv").write_text(files("matcher.shipped").joinpath("demo_library.csv").read_text(encoding="utf-8"),
                                       encoding="utf-8")
    lib.import_file(str(tmp_path / "demo.csv"))
    return lib


def test_greek_shorthand_adds_to_the_compound_find_reads(lab):
    before = len(lab.show("β-pinene")["observations"])
    res = runner.invoke(app, ["library", "add", "b-pinene", "--class", "slightly-polar", "--ri", "978",
                              "--db", lab.db, "--json"])
    assert res.exit_code == 0, res.output
    assert len(lab.show("β-pinene")["observations"]) == before + 1
    assert lab.find("b-pinene")[0].name == "β-pinene"
    # a genuinely different name is still refused with the close candidates listed
    res = runner.invoke(app, ["library", "add", "limonen", "--class", "slightly-polar", "--ri", "1028", "--db", lab.db])
    assert res.exception is not None and "limonene" in str(res.exception)


def test_find_lists_only_close_names(lab):
    hits = lab.find("a-pinen")
    assert hits[0].name == "α-pinene" and hits[0].name_similarity >= 85
    assert all(h.name_similarity >= 85 for h in hits)
    assert not {"sabinene", "α-irone", "γ-cadinene", "cis-sabinene hydrate"} & {h.name for h in hits}
    out = runner.invoke(app, ["library", "find", "a-pinen", "--db", lab.db]).output
    assert out.splitlines()[0].startswith("name similarity")


def test_confirm_records_cas_formula_and_phase(lab, tmp_path):
    import pandas as pd

    pd.DataFrame({"peak": ["7"], "ri": [1088.0], "mol_ion": [136]}).to_csv(tmp_path / "run.csv", index=False)
    out = tmp_path / "s.json"
    assert runner.invoke(app, ["screen", str(tmp_path / "run.csv"), "--class", "slightly-polar", "-o", str(out),
                               "--db", lab.db, "-q"]).exit_code == 0
    res = runner.invoke(app, ["confirm", str(out), "--peak", "7", "--name", "terpinolene", "--cas", "586-62-9",
                              "--formula", "C10H16", "--phase", "5% phenyl / 95% dimethylpolysiloxane",
                              "--db", lab.db])
    assert res.exit_code == 0, res.output
    doc = lab.show("terpinolene")
    assert doc["cas"] == "586-62-9" and doc["formula"] == "C10H16" and doc["nominal_mass"] == 136
    assert doc["observations"][-1]["phase"] == "5% phenyl / 95% dimethylpolysiloxane"
    # a CAS number whose check digit is wrong is refused and nothing is written
    n = len(doc["observations"])
    res = runner.invoke(app, ["confirm", str(out), "--peak", "7", "--name", "terpinolene", "--cas", "586-62-8",
                              "--force", "--db", lab.db])
    assert res.exception is not None and "check digit" in str(res.exception)
    assert len(lab.show("terpinolene")["observations"]) == n


def test_missing_postgres_driver_names_the_install_command(tmp_path):
    code = ("import sys; sys.modules['psycopg'] = None; sys.modules['psycopg2'] = None; "
            "sys.argv = ['matcher', 'library', 'stats', '--db', 'postgresql+psycopg://ana@localhost:1/ri']; "
            "from matcher.cli.main import run; run()")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, cwd=tmp_path)
    assert proc.returncode == 2
    assert 'pip install "matcher[postgres]"' in proc.stderr and "unexpected problem" not in proc.stderr
