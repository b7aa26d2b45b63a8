"""``matcher confirm`` and ``matcher library add|history|retire|merge|backup`` on the command line.

Index values near the published values on a 5 % phenyl (slightly-polar) column in Adams, Identification of Essential Oil
Components by GC/MS, 4th ed. (2007) (from memory: limonene 1024); CAS 138-86-3 is limonene's
registry number.
"""

from __future__ import annotations

import csv
import json
import os
import shutil
import subprocess
import sys
import time

import pytest
from typer.testing import CliRunner

from matcher.cli.main import app
from matcher.store.inspect import show
from matcher.store.library_io import export_library, import_library

runner = CliRunner()


def _matcher() -> list[str]:
    exe = shutil.which("matcher", path=os.path.dirname(sys.executable))
    return [exe] if exe else [sys.executable, "-m", "matcher"]


def run(*args):
    """In-process run (successful paths)."""
    return runner.invoke(app, [str(a) for a in args])


class _Done:
    def __init__(self, proc):
        self.exit_code, self.output = proc.returncode, proc.stdout + proc.stderr


def cli(*args):
    """The installed console script in its own process (error paths: one line, exit 2, no traceback)."""
    return _Done(subprocess.run(_matcher() + [str(a) for a in args], capture_output=True, text=True, timeout=120))


@pytest.fixture
def demo_url(library_url, demo_csv):
    import_library(library_url, demo_csv)
    return library_url


@pytest.mark.parametrize("cmd", [["confirm"], ["library", "add"], ["library", "history"], ["library", "retire"],
                                 ["library", "merge"], ["library", "backup"]])
def test_every_command_has_a_worked_example(cmd):
    res = run(*cmd, "--help")
    assert res.exit_code == 0 and "Example" in res.output and "matcher " + " ".join(cmd) in res.output
    assert "--db" in res.output


def test_add_twice_with_other_case_and_spacing(demo_url):
    n0 = len(show(demo_url, "limonene")["observations"])
    a = run("library", "add", "LIMONENE", "--class", "nonpolar", "--ri", "1024", "--analyst", "ana", "--db", demo_url)
    b = run("library", "add", "  limo nene", "--class", "nonpolar", "--ri", "1025.5", "--source", "std lot 7",
            "--db", demo_url, "--json")
    assert a.exit_code == 0, a.output
    assert b.exit_code == 0, b.output
    assert "added to 'limonene'" in a.output
    doc = json.loads(b.output)
    assert doc["name"] == "limonene" and doc["ri"] == 1025.5 and doc["created"] is False
    obs = show(demo_url, "limonene")["observations"]
    assert len(obs) == n0 + 2 and obs[-1]["source"] == "std lot 7" and obs[-2]["analyst"] == "ana"


def test_outlier_80_units_away_is_refused_and_changes_nothing(demo_url):
    centre = show(demo_url, "limonene")["classes"]["nonpolar"]["ri"]
    before = export_library(demo_url)
    res = cli("library", "add", "limonene", "--class", "nonpolar", "--ri", centre + 80, "--db", demo_url)
    assert res.exit_code == 2
    line = res.output.strip()
    assert "\n" not in line and line.startswith("error:") and "centre" in line and "+80.0" in line
    assert "Traceback" not in res.output
    assert export_library(demo_url) == before
    res = run("library", "add", "limonene", "--class", "nonpolar", "--ri", centre + 80, "--force", "--db", demo_url)
    assert res.exit_code == 0 and "--force" in res.output


def test_close_name_refused_then_as_and_new(demo_url):
    before = export_library(demo_url)
    res = cli("library", "add", "limonen", "--class", "nonpolar", "--ri", "1024", "--db", demo_url)
    assert res.exit_code == 2 and "limonene" in res.output and "--new" in res.output
    assert export_library(demo_url) == before
    res = run("library", "add", "limonen", "--class", "nonpolar", "--ri", "1024", "--as", "limonene", "--db", demo_url)
    assert res.exit_code == 0 and "synonym" in res.output
    res = run("library", "add", "Citronellyl X", "--class", "nonpolar", "--ri", "1400", "--new", "--db", demo_url)
    assert res.exit_code == 0 and "new compound" in res.output


def test_bad_options_give_one_line(demo_url):
    for args in (["--class", "sticky", "--ri", "1000"], ["--class", "nonpolar", "--ri", "1000", "--cas", "138-86-4"]):
        res = cli("library", "add", "limonene", *args, "--db", demo_url)
        assert res.exit_code == 2 and res.output.count("\n") == 1 and "Traceback" not in res.output


@pytest.fixture
def demo_outputs(tmp_path):
    """The real outputs of ``matcher demo`` (screening CSV, sidecar, library)."""
    from matcher.demo import run_demo

    out = run_demo(str(tmp_path / "demo"))
    return "sqlite:///" + out.library, out.shortlist


def test_confirm_on_a_screening_csv_adds_the_peaks_index(demo_outputs):
    url, shortlist = demo_outputs
    with open(shortlist, newline="", encoding="utf-8") as fh:
        row = next(r for r in csv.DictReader(fh) if r["peak"] == "12")
    n0 = len(show(url, "terpinolene")["observations"])
    res = run("confirm", shortlist, "--peak", "12", "--name", "Terpinolene", "--source", "std lot T-3", "--db", url)
    assert res.exit_code == 0, res.output
    obs = show(url, "terpinolene")["observations"]
    assert len(obs) == n0 + 1
    assert obs[-1]["ri"] == pytest.approx(float(row["ri"])) and obs[-1]["phase_class"] == row["class"]
    assert "peak 12" in obs[-1]["source"] and "shortlist.csv" in obs[-1]["source"]
    again = cli("confirm", shortlist, "--peak", "12", "--name", "terpinolene", "--db", url)
    assert again.exit_code == 2 and "already recorded" in again.output
    missing = cli("confirm", shortlist, "--peak", "999", "--name", "terpinolene", "--db", url)
    assert missing.exit_code == 2 and "no peak" in missing.output


def test_history_lists_the_additions(library_url):
    for v, who in ((1024.0, "ana"), (1025.0, "ben")):
        res = run("library", "add", "limonene", "--class", "nonpolar", "--ri", v, "--analyst", who,
                  "--cas", "138-86-3", "--db", library_url)
        assert res.exit_code == 0, res.output
    res = run("library", "history", "Limonene", "--db", library_url)
    assert res.exit_code == 0
    lines = [ln for ln in res.output.splitlines() if "add-observation" in ln]
    assert len(lines) == 2 and "ri=1024.0" in lines[0] and "ben" in lines[1] and "ri=1025.0" in lines[1]
    doc = json.loads(run("library", "history", "138-86-3", "--json", "--db", library_url).output)
    assert [d["action"] for d in doc] == ["add-compound", "add-observation", "add-observation"]
    res = cli("library", "history", "nothing-like-it", "--db", library_url)
    assert res.exit_code == 2 and "no compound" in res.output


def test_retire_merge_backup(library_url, tmp_path):
    ids = []
    for v in (1024.0, 1025.0, 1090.0):
        res = run("library", "add", "limonene", "--class", "nonpolar", "--ri", v, "--force", "--json", "--db", library_url)
        ids.append(json.loads(res.output)["observation_id"])
    res = run("library", "retire", ids[2], "--why", "wrong vial", "--db", library_url)
    assert res.exit_code == 0 and "retired observation" in res.output and "centre now 1024.5" in res.output
    res = cli("library", "retire", ids[2], "--why", "again", "--db", library_url)
    assert res.exit_code == 2 and "already retired" in res.output
    # merge a second library (a library CSV)
    f = tmp_path / "gc2.csv"
    f.write_text("name,phase_class,ri,source\nlimonene,nonpolar,1110,gc2\nsabinene,nonpolar,971,gc2\n", encoding="utf-8")
    res = run("library", "merge", f, "--db", library_url)
    assert res.exit_code == 0 and "1 observations added" in res.output and "conflict: limonene [nonpolar]" in res.output
    res = run("library", "merge", f, "--json", "--db", library_url)
    assert json.loads(res.output)["observations_added"] == 0
    if library_url.startswith("sqlite"):
        dest = tmp_path / "copy.sqlite"
        res = run("library", "backup", dest, "--db", library_url)
        assert res.exit_code == 0 and dest.is_file()
        assert export_library("sqlite:///" + str(dest)) == export_library(library_url)
        res = cli("library", "backup", dest, "--db", library_url)
        assert res.exit_code == 2 and "exists" in res.output
    else:
        res = cli("library", "backup", tmp_path / "x.sqlite", "--db", library_url)
        assert res.exit_code == 2 and "SQLite libraries only" in res.output


_CLI_WRITER = r"""
import sys, time
from matcher.cli.main import app
url, tag, start = sys.argv[1], sys.argv[2], float(sys.argv[3])
while time.time() < start:
    time.sleep(0.005)
for k in range(25):
    app(["library", "add", "limonene", "--class", "nonpolar", "--ri", str(1020 + k % 9),
         "--source", f"{tag}-{k}", "--analyst", tag, "--db", url], standalone_mode=False)
"""


def test_two_processes_running_library_add_lose_nothing(library_url):
    """Two processes, each running the `library add` command 25 times, started at the same moment."""
    assert run("library", "add", "limonene", "--class", "nonpolar", "--ri", "1024", "--db", library_url).exit_code == 0
    start = time.time() + 1.5
    procs = [subprocess.Popen([sys.executable, "-c", _CLI_WRITER, library_url, tag, str(start)],
                              stdout=subprocess.DEVNULL, stderr=subprocess.PIPE) for tag in ("a", "b")]
    for p in procs:
        _, err = p.communicate(timeout=600)
        assert p.returncode == 0, err.decode()
    sources = [o["source"] for o in show(library_url, "limonene")["observations"] if o["source"]]
    assert sorted(sources) == sorted(f"{t}-{k}" for t in ("a", "b") for k in range(25))
