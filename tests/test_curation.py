"""Curation API (matcher.curate.library_edits): adding confirmed compounds, the outlier guard, confirm from
screening outputs, history, retire, merge, backup, and concurrent writers.

Retention indices used as "confirmed" values are close to the published values on a 5 % phenyl (slightly-polar) column in
Adams, Identification of Essential Oil Components by GC/MS, 4th ed. (2007) (from memory:
limonene 1024, alpha-pinene 932, gamma-terpinene 1054); CAS numbers are the registry's
(limonene 138-86-3, alpha-pinene 80-56-8), whose check digits the CAS rule verifies.
"""

from __future__ import annotations

import csv
import io
import json
import os
import sqlite3
import subprocess
import sys
from importlib.resources import as_file, files

import numpy as np
import pytest

from matcher.curate import library_edits as cu
from matcher.curate.merge import merge
from matcher.store.backup import backup
from matcher.classes import DEFAULT_WINDOWS
from matcher.errors import LibraryError, MatcherError, RefusedChange
from matcher.store.snapshot import SPREAD_FLOOR, summarise
from matcher.store.inspect import check, show
from matcher.store.library_io import export_library, import_library


@pytest.fixture
def demo_url(library_url, demo_csv):
    import_library(library_url, demo_csv)
    return library_url


def _export(url) -> str:
    return export_library(url)


def _rows(url) -> list[dict]:
    return list(csv.DictReader(io.StringIO(_export(url))))


def _class(url, name, cls):
    return show(url, name)["classes"][cls]


# --------------------------------------------------------------------------- name resolution


def test_case_and_spacing_variants_attach_to_the_existing_compound(demo_url):
    before = _rows(demo_url)
    n_before = len([o for o in show(demo_url, "limonene")["observations"]])
    a = cu.add_confirmed(demo_url, "LIMONENE", "nonpolar", 1024.0, analyst="ana")
    b = cu.add_confirmed(demo_url, "  Limo   nene ", "Nonpolar", 1025.0, analyst="ben")
    assert a.compound_id == b.compound_id and a.name == b.name == "limonene"
    assert not a.created and not b.created and a.attached_by == b.attached_by == "name"
    doc = show(demo_url, "limonene")
    assert len(doc["observations"]) == n_before + 2
    assert [o["ri"] for o in doc["observations"][-2:]] == [1024.0, 1025.0]
    assert [o["analyst"] for o in doc["observations"][-2:]] == ["ana", "ben"]
    after = _rows(demo_url)
    assert len({r["name"] for r in after}) == len({r["name"] for r in before})  # no second copy


def test_synonym_and_greek_spelling_find_the_compound(demo_url):
    r = cu.add_confirmed(demo_url, "eucalyptol", "nonpolar", 1031.0)  # listed as a synonym of 1,8-cineole
    assert r.name == "1,8-cineole" and r.attached_by == "synonym"
    r = cu.add_confirmed(demo_url, "alpha pinene", "nonpolar", 932.0)
    assert r.name == "α-pinene" and r.attached_by == "name"


def test_close_name_is_refused_with_the_matches_and_changes_nothing(demo_url):
    before = _export(demo_url)
    with pytest.raises(cu.Unresolved) as err:
        cu.add_confirmed(demo_url, "limonen", "nonpolar", 1024.0)
    assert [m.name for m in err.value.matches][:1] == ["limonene"]
    assert "limonene" in str(err.value) and "--as" in str(err.value) and "\n" not in str(err.value)
    assert _export(demo_url) == before


def test_as_existing_attaches_and_records_the_spelling_as_synonym(demo_url):
    r = cu.add_confirmed(demo_url, "a-pinene", "nonpolar", 933.0, as_existing="alpha-pinene")
    assert r.name == "α-pinene" and r.attached_by == "as"
    assert "a-pinene" in show(demo_url, "α-pinene")["synonyms"]
    again = cu.add_confirmed(demo_url, "A-Pinene", "nonpolar", 931.0)  # now found directly
    assert again.compound_id == r.compound_id and again.attached_by == "synonym"


def test_as_existing_must_exist_and_must_not_steal_another_name(demo_url):
    before = _export(demo_url)
    with pytest.raises(RefusedChange, match="no compound"):
        cu.add_confirmed(demo_url, "zz-compound", "nonpolar", 1500.0, as_existing="no such thing")
    with pytest.raises(RefusedChange, match="already names"):
        cu.add_confirmed(demo_url, "linalool", "nonpolar", 1100.0, as_existing="limonene")
    assert _export(demo_url) == before


def test_same_cas_under_another_name_is_refused_unless_new(demo_url):
    before = _export(demo_url)
    with pytest.raises(cu.Unresolved) as err:
        cu.add_confirmed(demo_url, "dipentene-x", "nonpolar", 1024.0, cas="138-86-3")
    assert any(m.name == "limonene" and "CAS" in m.reason for m in err.value.matches)
    assert _export(demo_url) == before
    r = cu.add_confirmed(demo_url, "dipentene-x", "nonpolar", 1024.0, cas="138-86-3", new=True)
    assert r.created and r.name == "dipentene-x"
    assert any("also belongs" in p for p in check(demo_url, strict=True))


def test_new_cannot_duplicate_an_existing_name(demo_url):
    before = _export(demo_url)
    with pytest.raises(RefusedChange, match="second copy"):
        cu.add_confirmed(demo_url, "Limonene", "nonpolar", 1024.0, new=True)
    with pytest.raises(MatcherError, match="either"):
        cu.add_confirmed(demo_url, "x", "nonpolar", 1.0, new=True, as_existing="limonene")
    assert _export(demo_url) == before


def test_ask_callback_decides(demo_url):
    seen = []

    def say_new(name, matches):
        seen.append((name, [m.name for m in matches]))
        return cu.NEW

    r = cu.add_confirmed(demo_url, "citronellyl", "nonpolar", 1300.0, ask=say_new, new=False)
    assert seen and seen[0][0] == "citronellyl" and r.created
    centre = _class(demo_url, "linalool", "nonpolar")["ri"]
    r = cu.add_confirmed(demo_url, "linalol", "nonpolar", centre + 1.0, ask=lambda n, m: m[0].name)
    assert r.name == "linalool" and "linalol" in show(demo_url, "linalool")["synonyms"]
    before = _export(demo_url)
    with pytest.raises(cu.Unresolved):
        cu.add_confirmed(demo_url, "limonen", "nonpolar", 1024.0, ask=lambda n, m: None)
    assert _export(demo_url) == before


def test_identity_contradiction_is_refused(demo_url):
    before = _export(demo_url)
    with pytest.raises(RefusedChange, match="contradicts"):
        cu.add_confirmed(demo_url, "limonene", "nonpolar", 1024.0, cas="80-56-8")  # alpha-pinene's CAS
    with pytest.raises(RefusedChange, match="contradicts"):
        cu.add_confirmed(demo_url, "limonene", "nonpolar", 1024.0, formula="C10H18O")
    assert _export(demo_url) == before


@pytest.mark.parametrize("kwargs,match", [
    ({"phase_class": "sticky"}, "unknown phase class"),
    ({"ri": float("nan")}, "between 0"),
    ({"ri": -5}, "between 0"),
    ({"ri": "abc"}, "number"),
    ({"cas": "138-86-4"}, "cas"),  # wrong check digit (the CAS rule: 8*1+3*2+8*3+6*4+8*5+1*6... mod 10 = 3)
    ({"formula": "C10H16Xx"}, "formula"),
    ({"name": " - "}, "name"),
])
def test_bad_values_are_refused_before_anything_is_written(demo_url, kwargs, match):
    before = _export(demo_url)
    args = {"name": "limonene", "phase_class": "nonpolar", "ri": 1024.0}
    args.update(kwargs)
    with pytest.raises(MatcherError, match=match):
        cu.add_confirmed(demo_url, args.pop("name"), args.pop("phase_class"), args.pop("ri"), **args)
    assert _export(demo_url) == before


def test_missing_information_is_filled_in_on_the_existing_compound(library_url):
    cu.add_confirmed(library_url, "sabinene", "nonpolar", 969.0)
    r = cu.add_confirmed(library_url, "Sabinene", "nonpolar", 970.0, cas="3387-41-5", formula="C10H16")
    doc = show(library_url, "sabinene")
    assert doc["cas"] == "3387-41-5" and doc["formula"] == "C10H16" and doc["nominal_mass"] == 136
    assert any("filled in" in n for n in r.notes)


# --------------------------------------------------------------------------- outlier guard and summaries


def test_an_observation_80_units_away_is_refused_without_force(demo_url):
    centre = _class(demo_url, "limonene", "nonpolar")
    before = _export(demo_url)
    with pytest.raises(RefusedChange) as err:
        cu.add_confirmed(demo_url, "limonene", "nonpolar", centre["ri"] + 80.0)
    msg = str(err.value)
    assert f"centre {centre['ri']:.1f}" in msg and f"spread {centre['sd']:.1f}" in msg
    assert f"{centre['n']} observations" in msg and "+80.0" in msg and "--force" in msg
    assert _export(demo_url) == before
    r = cu.add_confirmed(demo_url, "limonene", "nonpolar", centre["ri"] + 80.0, force=True)
    assert r.forced and r.after.count == centre["n"] + 1
    assert [h["action"] for h in cu.history(demo_url, "limonene")][-2:] == ["add-observation", "force-outlier"]


def test_guard_limit_is_three_spreads_or_the_window(library_url):
    # four widely scattered values: the spread beats the class window, so the limit is 3 spreads
    vals = [1000.0, 1006.0, 1012.0, 1018.0]
    for v in vals:
        cu.add_confirmed(library_url, "testene", "nonpolar", v, force=True)
    c, s, n = summarise(np.array(vals), np.ones(4), np.full(4, np.nan), SPREAD_FLOOR["nonpolar"])
    limit = max(3 * s, DEFAULT_WINDOWS["nonpolar"])
    assert limit == pytest.approx(3 * s) and limit > DEFAULT_WINDOWS["nonpolar"]
    assert cu.guard_limit(cu.summarise_observations(vals, phase_class="nonpolar"), "nonpolar") == pytest.approx(limit)
    before = _export(library_url)
    with pytest.raises(RefusedChange):
        cu.add_confirmed(library_url, "testene", "nonpolar", c + limit + 0.5)
    assert _export(library_url) == before
    r = cu.add_confirmed(library_url, "testene", "nonpolar", c - limit + 0.5)
    assert not r.forced
    # one observation: the spread is floor x sqrt(2) = 2.1, so the class window (10) rules
    cu.add_confirmed(library_url, "loneone", "polar", 1500.0)
    with pytest.raises(RefusedChange, match="limit is 20.0"):
        cu.add_confirmed(library_url, "loneone", "polar", 1520.5)
    cu.add_confirmed(library_url, "loneone", "polar", 1519.5)


def test_centre_and_spread_match_a_direct_computation(library_url):
    values = [1024.0, 1026.5, 1023.0, 1029.0, 1025.0, 1024.5]  # near Adams' 1024 for limonene (from memory)
    results = [cu.add_confirmed(library_url, "limonene", "nonpolar", v) for v in values]
    x = np.array(values)
    # direct: median; 1.4826 x median absolute deviation (normal consistency, Rousseeuw & Croux,
    # J. Am. Stat. Assoc. 88, 1273, 1993), floored, times the predictive factor sqrt(1 + 1/N)
    med = float(np.median(x))
    from scipy.stats import median_abs_deviation

    s_obs = float(median_abs_deviation(x, scale="normal"))
    assert s_obs == pytest.approx(1.4826 * float(np.median(np.abs(x - med))), rel=1e-4)
    spread = max(s_obs, SPREAD_FLOOR["nonpolar"]) * np.sqrt(1 + 1 / len(x))
    last = results[-1].after
    assert last.centre == pytest.approx(med) and last.count == len(values)
    assert last.spread == pytest.approx(spread, rel=1e-4)
    c, s, n = summarise(x, np.ones(len(x)), np.full(len(x), np.nan), SPREAD_FLOOR["nonpolar"])
    assert (last.centre, last.count) == (c, n) and last.spread == pytest.approx(s)
    doc = _class(library_url, "limonene", "nonpolar")
    assert doc["ri"] == pytest.approx(med) and doc["sd"] == pytest.approx(spread, rel=1e-4) and doc["n"] == 6
    # the snapshot screening uses agrees too
    from matcher.store.snapshot_loader import load_snapshot

    e = load_snapshot(library_url).entries("nonpolar")
    assert float(e.ri[0]) == pytest.approx(med) and float(e.sd[0]) == pytest.approx(spread, rel=1e-4)
    # each intermediate summary is the median of the values so far
    for k, r in enumerate(results):
        assert r.after.centre == pytest.approx(float(np.median(x[: k + 1])))


# --------------------------------------------------------------------------- confirm from screening outputs


@pytest.fixture
def screened(demo_url, tmp_path):
    """A real screening of the example run against the demo library: CSV (+ sidecar) and JSON."""
    from matcher.retention.calibration import calibrate
    from matcher.retention.ladder import read_ladder
    from matcher.identify.screening import screen
    from matcher.report.files import write_results

    with as_file(files("matcher.examples").joinpath("ladder.csv")) as lad, \
            as_file(files("matcher.examples").joinpath("run.csv")) as run:
        cal = calibrate(read_ladder(str(lad)))
        cal_path = tmp_path / "cal.json"
        cal.save(str(cal_path))
        run_copy = tmp_path / "jb0412.csv"
        run_copy.write_bytes(open(run, "rb").read())
    result = screen([str(run_copy)], "slightly-polar", db=demo_url, calibration=str(cal_path), top=3)
    out_csv, out_json = tmp_path / "out.csv", tmp_path / "out.json"
    write_results(result, out_csv)
    write_results(result, out_json)
    return demo_url, out_csv, out_json


def _csv_peak(path, peak):
    with open(path, newline="", encoding="utf-8") as fh:
        return [r for r in csv.DictReader(fh) if r["peak"] == str(peak)]


def test_confirm_from_a_screening_csv_adds_the_peaks_index(screened):
    url, out_csv, _ = screened
    row = _csv_peak(out_csv, 11)[0]
    n0 = len(show(url, "γ-terpinene")["observations"])
    r = cu.confirm_from_results(url, out_csv, "11", "gamma-terpinene", source="std lot G-221", analyst="ana")
    assert r.name == "γ-terpinene" and r.phase_class == row["class"] == "slightly-polar"
    assert r.ri == pytest.approx(float(row["ri"]))
    obs = show(url, "γ-terpinene")["observations"]
    assert len(obs) == n0 + 1
    o = obs[-1]
    assert o["ri"] == pytest.approx(float(row["ri"])) and o["analyst"] == "ana"
    assert "std lot G-221" in o["source"] and "out.csv" in o["source"] and "peak 11" in o["source"]
    assert "run jb0412" in o["source"] and "jb0412.csv" in o["source"]
    side = json.loads(open(str(out_csv) + ".meta.json", encoding="utf-8").read())
    assert o["date"] == side["runs"][0]["calibration"]["created"][:10]
    conf = [h for h in cu.history(url, "γ-terpinene") if h["action"] == "confirm"][-1]["after"]
    assert conf["peak"] == "11" and conf["run"] == "jb0412" and conf["mode"] == "programmed"
    assert conf["results"] == os.path.abspath(out_csv) and conf["observation"] == r.observation_id


def test_confirm_from_json_gives_the_same_index(screened):
    url, out_csv, out_json = screened
    row = _csv_peak(out_csv, 12)[0]
    r = cu.confirm_from_results(url, out_json, 12, "terpinolene")
    assert r.ri == pytest.approx(float(row["ri"]), abs=0.005)  # the CSV rounds to 2 decimals


def test_confirm_twice_and_bad_peaks_change_nothing(screened, tmp_path):
    url, out_csv, out_json = screened
    cu.confirm_from_results(url, out_csv, "11", "gamma-terpinene")
    before = _export(url)
    with pytest.raises(RefusedChange, match="already recorded"):
        cu.confirm_from_results(url, out_csv, "11", "gamma-terpinene")
    with pytest.raises(MatcherError, match="no peak"):
        cu.confirm_from_results(url, out_csv, "999", "gamma-terpinene")
    with pytest.raises(MatcherError, match="no peak"):
        cu.confirm_from_results(url, out_csv, "11", "gamma-terpinene", run="other-run")
    with pytest.raises(MatcherError, match="sidecar"):
        cu.confirm_from_results(url, str(out_csv) + ".meta.json", "11", "gamma-terpinene")
    bad = tmp_path / "notes.csv"
    bad.write_text("a,b\n1,2\n", encoding="utf-8")
    with pytest.raises(MatcherError, match="not a screening CSV"):
        cu.confirm_from_results(url, bad, "1", "gamma-terpinene")
    # an index 80 units off (a wrong peak) meets the outlier guard
    with pytest.raises(RefusedChange, match="centre"):
        cu.confirm_from_results(url, out_csv, "1", "gamma-terpinene")
    assert _export(url) == before


def test_confirm_needs_the_run_when_the_output_holds_several(demo_url, tmp_path):
    from matcher.report.files import write_results
    from matcher.identify.screening import screen
    from matcher.retention.calibration import calibrate
    from matcher.retention.ladder import read_ladder

    with as_file(files("matcher.examples").joinpath("ladder.csv")) as lad, \
            as_file(files("matcher.examples").joinpath("run.csv")) as run:
        cal = calibrate(read_ladder(str(lad)))
        cal.save(str(tmp_path / "cal.json"))
        a, b = tmp_path / "lotA.csv", tmp_path / "lotB.csv"
        a.write_bytes(open(run, "rb").read())
        b.write_bytes(open(run, "rb").read())
    result = screen([str(a), str(b)], "slightly-polar", db=demo_url, calibration=str(tmp_path / "cal.json"))
    out = tmp_path / "both.csv"
    write_results(result, out)
    with pytest.raises(MatcherError, match="several runs"):
        cu.confirm_from_results(demo_url, out, "12", "terpinolene")
    r = cu.confirm_from_results(demo_url, out, "12", "terpinolene", run="lotB")
    assert "run lotB" in show(demo_url, "terpinolene")["observations"][-1]["source"] and r.name == "terpinolene"


def test_confirm_without_sidecar_still_uses_the_csv_and_says_so(screened):
    url, out_csv, _ = screened
    os.remove(str(out_csv) + ".meta.json")
    row = _csv_peak(out_csv, 12)[0]
    r = cu.confirm_from_results(url, out_csv, "12", "terpinolene")
    assert r.ri == pytest.approx(float(row["ri"]))
    assert "no provenance sidecar" in show(url, "terpinolene")["observations"][-1]["source"]


# --------------------------------------------------------------------------- history and retire


def test_history_lists_the_additions(library_url):
    cu.add_confirmed(library_url, "limonene", "nonpolar", 1024.0, analyst="ana", cas="138-86-3")
    cu.add_confirmed(library_url, "Limonene", "nonpolar", 1025.5, analyst="ben", source="std lot 7")
    rows = cu.history(library_url, "138-86-3")  # by CAS number
    assert [r["action"] for r in rows] == ["add-compound", "add-observation", "add-observation"]
    assert [r["who"] for r in rows] == ["ana", "ana", "ben"]
    assert rows[1]["before"] is None and rows[1]["after"]["ri"] == 1024.0
    assert rows[2]["after"]["ri"] == 1025.5 and rows[2]["after"]["source"] == "std lot 7"
    assert all(r["when"] and r["revision"] for r in rows)
    with pytest.raises(LibraryError, match="close names: limonene"):
        cu.history(library_url, "limonen")


def test_retire_keeps_the_row_and_moves_the_centre(library_url):
    ids = [cu.add_confirmed(library_url, "linalool", "nonpolar", v).observation_id for v in (1095.0, 1096.0, 1104.0)]
    doc = cu.retire(library_url, ids[2], "vial mislabelled")
    assert doc["before"]["centre"] == 1096.0 and doc["after"]["centre"] == pytest.approx(1095.5)
    obs = show(library_url, "linalool")["observations"]
    assert len(obs) == 3 and obs[2]["active"] is False and obs[2]["retired_reason"] == "vial mislabelled"
    h = cu.history(library_url, "linalool")[-1]
    assert h["action"] == "retire-observation" and h["before"]["active"] is True and h["after"]["active"] is False
    before = _export(library_url)
    with pytest.raises(RefusedChange, match="already retired"):
        cu.retire(library_url, ids[2], "again")
    with pytest.raises(LibraryError, match="no observation"):
        cu.retire(library_url, 99999, "x")
    with pytest.raises(MatcherError, match="why"):
        cu.retire(library_url, ids[0], "  ")
    assert _export(library_url) == before


# --------------------------------------------------------------------------- merge


def _second_library(tmp_path, name="gc2.sqlite"):
    from matcher.store.database import init_library

    url = "sqlite:///" + str(tmp_path / name)
    init_library(url)
    return url


def test_merge_adds_reports_conflicts_and_is_idempotent(library_url, tmp_path):
    for v in (1024.0, 1025.0, 1026.0):
        cu.add_confirmed(library_url, "limonene", "nonpolar", v)
    cu.add_confirmed(library_url, "sabinene", "nonpolar", 970.0)
    other = _second_library(tmp_path)
    cu.add_confirmed(other, "Limonene", "nonpolar", 1110.0, source="gc2")     # conflicts: 85 units away
    cu.add_confirmed(other, "limonene", "polar", 1198.0, source="gc2")        # no polar value here: added
    cu.add_confirmed(other, "sabinene", "nonpolar", 972.0, source="gc2")      # agrees: added
    cu.add_confirmed(other, "myrcene", "nonpolar", 991.0, source="gc2", cas="123-35-3")  # new compound
    rep = merge(library_url, other)
    assert rep.observations_added == 3 and rep.compounds_created == 1 and rep.observations_held == 1
    assert len(rep.conflicts) == 1
    c = rep.conflicts[0]
    assert (c.compound, c.phase_class) == ("limonene", "nonpolar") and c.ours["centre"] == 1025.0
    assert c.theirs["centre"] == 1110.0
    assert _class(library_url, "limonene", "nonpolar")["ri"] == 1025.0   # not overwritten
    assert _class(library_url, "limonene", "polar")["ri"] == 1198.0
    assert show(library_url, "myrcene")["cas"] == "123-35-3"
    once = _export(library_url)
    again = merge(library_url, other)
    assert again.observations_added == 0 and again.observations_present == 3 and len(again.conflicts) == 1
    assert _export(library_url) == once


def test_merge_from_a_library_csv_and_identity_conflicts(library_url, tmp_path):
    cu.add_confirmed(library_url, "limonene", "nonpolar", 1024.0, cas="138-86-3")
    f = tmp_path / "gc2.csv"
    f.write_text("name,phase_class,ri,cas\nlimonene,nonpolar,1025,80-56-8\nsabinene,nonpolar,971,3387-41-5\n",
                 encoding="utf-8")
    rep = merge(library_url, str(f))
    assert rep.observations_added == 1 and rep.observations_held == 1
    assert "identity" in rep.conflicts[0].reason and "80-56-8" in rep.conflicts[0].reason
    assert merge(library_url, str(f)).observations_added == 0


# --------------------------------------------------------------------------- backup (SQLite)


def _sqlite_only(url):
    if not url.startswith("sqlite"):
        with pytest.raises(LibraryError, match="SQLite libraries only"):
            backup(url, "/nonexistent/copy.sqlite")
        pytest.skip("backup uses SQLite's online backup API; other backends are refused (checked above)")


def test_backup_is_a_faithful_copy(demo_url, tmp_path):
    _sqlite_only(demo_url)
    cu.add_confirmed(demo_url, "limonene", "nonpolar", 1024.0)
    dest = tmp_path / "copy.sqlite"
    rep = backup(demo_url, dest)
    # a single self-contained file (rollback journal), per the SQLite file format's header
    # (https://www.sqlite.org/fileformat.html: bytes 18-19 are 1 for rollback, 2 for WAL)
    with open(dest, "rb") as fh:
        header = fh.read(20)
    assert header[:16] == b"SQLite format 3\x00" and header[18:20] == b"\x01\x01"
    copy_url = "sqlite:///" + str(dest)
    assert _export(copy_url) == _export(demo_url)
    assert check(copy_url) == []
    from matcher.store.database import revision

    assert rep.revision == revision(demo_url) and rep.bytes == dest.stat().st_size
    with pytest.raises(MatcherError, match="exists"):
        backup(demo_url, dest)
    with pytest.raises(MatcherError, match="library itself"):
        backup(demo_url, demo_url[len("sqlite:///"):], overwrite=True)
    backup(demo_url, dest, overwrite=True)


_WRITER = r"""
import sys, time
from matcher.curate import library_edits as cu
from matcher.curate.merge import merge
from matcher.store.backup import backup
url, tag, count, start = sys.argv[1], sys.argv[2], int(sys.argv[3]), float(sys.argv[4])
while time.time() < start:
    time.sleep(0.005)
for k in range(count):
    cu.add_confirmed(url, "limonene", "nonpolar", 1020.0 + (k % 9), source=f"{tag}-{k}", analyst=tag)
"""


def _writers(url, tags, count=25, script=_WRITER):
    """Writer processes that all start adding at the same moment; (processes, start time)."""
    import time

    start = time.time() + 1.5
    procs = [subprocess.Popen([sys.executable, "-c", script, url, t, str(count), str(start)],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE) for t in tags]
    return procs, start


def test_two_writer_processes_lose_nothing(library_url):
    cu.add_confirmed(library_url, "limonene", "nonpolar", 1024.0)
    procs, _ = _writers(library_url, ["p1", "p2"])
    for p in procs:
        out, err = p.communicate(timeout=300)
        assert p.returncode == 0, err.decode()
    sources = [o["source"] for o in show(library_url, "limonene")["observations"]]
    assert sorted(s for s in sources if s) == sorted(f"{t}-{k}" for t in ("p1", "p2") for k in range(25))
    assert len(sources) == 51
    acts = [h["action"] for h in cu.history(library_url, "limonene")]
    assert acts.count("add-observation") == 51
    assert check(library_url) == []


def test_backup_while_another_process_writes_is_consistent(library_url, tmp_path):
    _sqlite_only(library_url)
    cu.add_confirmed(library_url, "limonene", "nonpolar", 1024.0)
    procs, start = _writers(library_url, ["w"], count=60)
    import time

    time.sleep(max(0.0, start - time.time()))
    live = library_url.split("///", 1)[1]

    def written() -> int:
        con = sqlite3.connect(live, timeout=30)
        try:
            return con.execute("SELECT COUNT(*) FROM observations").fetchone()[0]
        finally:
            con.close()

    deadline = time.time() + 120
    while procs[0].poll() is None and written() < 2 and time.time() < deadline:
        time.sleep(0.01)  # wait for the writer's first addition, so copies are taken while it writes
    copies = []
    while procs[0].poll() is None and len(copies) < 40:
        dest = tmp_path / f"b{len(copies)}.sqlite"
        backup(library_url, dest)
        copies.append(dest)
        time.sleep(0.02)
    procs[0].communicate(timeout=300)
    assert procs[0].returncode == 0 and copies
    counts = []
    for dest in copies:
        con = sqlite3.connect(dest)
        # in a consistent copy every audited observation exists, and each transaction bumped the revision once
        n_obs = con.execute("SELECT COUNT(*) FROM observations").fetchone()[0]
        n_audit = con.execute("SELECT COUNT(*) FROM audit_log WHERE action = 'add-observation'").fetchone()[0]
        rev = con.execute("SELECT revision FROM library_state").fetchone()[0]
        max_rev = con.execute("SELECT MAX(revision) FROM audit_log").fetchone()[0]
        con.close()
        assert n_obs == n_audit and rev == max_rev
        counts.append(n_obs)
    assert any(1 < n < 61 for n in counts), counts  # at least one copy was taken mid-way
