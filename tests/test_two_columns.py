"""Two-column confirmation (matcher.identify.two_columns): pairing, joint posterior, flags, query, command line.

Sources of the values:

* 5 % phenyl indices: tests/data/essential_oil_indices.csv -- column ri_adams (R. P. Adams, Identification of
  Essential Oil Components by GC/MS, 4th ed., 2007) is the house library, column ri_compilation (V. I. Babushok,
  P. J. Linstrom, I. G. Zenkevich, J. Phys. Chem. Ref. Data 40, 043101, 2011, semi-standard non-polar averages)
  stands for the measured run: two independent compilations, so the run differs from the library as a real
  lab's would. Both written FROM MEMORY.
* Polyethylene-glycol indices: tests/data/polar_indices.csv (the same 2011 compilation's polar averages,
  written FROM MEMORY, rounded).
* That limonene, 1,8-cineole and p-cymene lie within a few units on 5 % phenyl but 12-75 units apart on a
  polyethylene-glycol phase is a fact of the trade (and visible in both tables above); the reason labs
  confirm on a second column of different polarity is common practice, no source.
* Areas: INVENTED (log-normal), the second run's areas a common split factor times the first's with a
  per-peak scatter, as one injection split to two columns gives.
* The assignment method's optimum is checked against brute force over all matchings (exhaustive, no source
  needed); Kuhn 1955 / Jonker & Volgenant 1987 are cited in the module.
"""

from __future__ import annotations

import csv
import itertools
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import matcher
from engine_helpers import DATA, essential_oils
from matcher.identify.two_columns import SecondColumn, best_matching, open_pairings, per_compound
from matcher.store.snapshot import CompoundTable, build_snapshot

ROWS = essential_oils()
POLAR = {r["name"]: float(r["ri_polar"]) for r in csv.DictReader(
    line for line in open(DATA / "polar_indices.csv", encoding="utf-8") if not line.startswith("#"))}


def two_class_library(only_first: tuple[str, ...] = ()):
    """Every compound on slightly-polar (Adams) and on polar (2011 compilation), except ``only_first`` (5 % phenyl only)."""
    comp = CompoundTable.from_records([{"id": i + 1, "name": r["name"], "formula": r["formula"], "cas": r["cas"]}
                                       for i, r in enumerate(ROWS)])
    ids, cls, ri = [], [], []
    for i, r in enumerate(ROWS):
        ids.append(i + 1); cls.append("slightly-polar"); ri.append(float(r["ri_adams"]))
        if r["name"] not in only_first:
            ids.append(i + 1); cls.append("polar"); ri.append(POLAR[r["name"]])
    return build_snapshot(comp, np.array(ids), np.array(cls), np.array(ri))


def library_csv(path):
    """The same two-class library as a library file to import (sources named, values from memory)."""
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["name", "phase_class", "ri", "cas", "formula", "source"])
        for r in ROWS:
            w.writerow([r["name"], "slightly-polar", r["ri_adams"], r["cas"], r["formula"], "Adams 2007, from memory"])
            w.writerow([r["name"], "polar", POLAR[r["name"]], r["cas"], r["formula"], "Babushok 2011, from memory"])
    return path


def sample_runs(seed: int, n: int = 33, area_scatter: float = 0.1):
    """Two runs of one invented sample: n compounds of the tables, the second run shuffled, areas split."""
    rng = np.random.default_rng(seed)
    pick = np.sort(rng.choice(len(ROWS), n, replace=False))
    names = [ROWS[i]["name"] for i in pick]
    xa = np.array([float(ROWS[i]["ri_compilation"]) for i in pick]) + rng.normal(0, 2.0, n)
    xb = np.array([POLAR[nm] for nm in names]) + rng.normal(0, 4.0, n)
    area = np.exp(rng.normal(0, 1.2, n)) * 1e5
    area_b = area * 0.6 * np.exp(rng.normal(0, area_scatter, n))
    first = pd.DataFrame({"peak": [f"P{i + 1}" for i in range(n)], "rt": np.arange(n) + 1.0, "ri": xa, "area": area})
    perm = rng.permutation(n)  # second-run row k holds compound perm[k]
    second = pd.DataFrame({"peak": [f"W{k + 1}" for k in range(n)], "rt": np.arange(n) + 1.0, "ri": xb[perm],
                           "area": area_b[perm]})
    truth = {f"P{perm[k] + 1}": f"W{k + 1}" for k in range(n)}
    return first, second, names, truth


def leading(result) -> pd.DataFrame:
    t = result.runs[0].table
    return t.groupby("peak", sort=False).head(1).set_index("peak")


@pytest.fixture(scope="module")
def library():
    return two_class_library()


@pytest.mark.parametrize("seed", [1, 2, 3, 4, 5])
def test_two_columns_rank_more_compounds_first_and_pair_the_peaks(library, seed):
    first, second, names, truth = sample_runs(seed)
    one = leading(matcher.screen(first, phase_class="slightly-polar", library=library))
    two = leading(matcher.screen(first, phase_class="slightly-polar", library=library, second=second,
                                 second_class="polar"))
    right_one = sum(one.loc[f"P{i + 1}", "name"] == nm for i, nm in enumerate(names))
    right_two = sum(two.loc[f"P{i + 1}", "name"] == nm for i, nm in enumerate(names))
    paired = sum(two.loc[p, "second_peak"] == w for p, w in truth.items())
    assert right_two >= 30, (right_one, right_two)  # measured 30-33 on these seeds
    assert right_two >= right_one + 3  # one column alone: 22-29 on these seeds
    assert paired >= 31  # measured 31-33
    assert set(two["second_peak"]) <= set(second["peak"]) | {""}
    # the second index shown is the paired peak's
    w_ri = dict(zip(second["peak"], second["ri"]))
    ok = two["second_peak"] != ""
    assert np.allclose(two.loc[ok, "second_ri"], [w_ri[w] for w in two.loc[ok, "second_peak"]])


def test_no_confident_wrong_calls_with_two_columns(library):
    """Over ten invented samples, no leading candidate with p >= 0.9 is wrong (probabilities are a promise)."""
    wrong_confident = confident = 0
    for seed in range(11, 21):
        first, second, names, _ = sample_runs(seed, area_scatter=0.2)
        two = leading(matcher.screen(first, phase_class="slightly-polar", library=library, second=second,
                                     second_class="polar"))
        p = two["probability"].to_numpy(float)
        hit = np.array([two.loc[f"P{i + 1}", "name"] == nm for i, nm in enumerate(names)])
        confident += int((p >= 0.9).sum())
        wrong_confident += int(((p >= 0.9) & ~hit).sum())
    assert confident >= 65  # the second column makes many calls confident (measured 79 of 330) ...
    assert wrong_confident == 0  # ... and none of them wrong (measured: 0)


def test_limonene_and_cineole_are_told_apart_by_the_polar_column(library):
    # 1031 on 5 % phenyl fits limonene (1024) and 1,8-cineole (1026) alike; on PEG they lie 12 units apart
    lim = matcher.query(1031, "slightly-polar", library=library, second_ri=1199, second_class="polar")
    cin = matcher.query(1031, "slightly-polar", library=library, second_ri=1211, second_class="polar")
    assert lim.best["name"] == "limonene" and cin.best["name"] == "1,8-cineole"
    assert lim.best["second_library_ri"] == 1199.0 and lim.best["second_delta_ri"] == pytest.approx(0.0)
    one = matcher.query(1031, "slightly-polar", library=library)
    p_one = {c["name"]: c["probability"] for c in one.candidates}
    assert lim.best["probability"] > p_one["limonene"]
    assert "columns-agree" in lim.best["flags"]
    # the second column's evidence is the index likelihood ratio there: ln φ(0; s) − ln λ
    s = lim.to_dict()["model"]["second"]
    assert s["class"] == "polar" and s["half_width"] == 20.0
    with pytest.raises(matcher.MatcherError, match="--second-class"):
        matcher.query(1031, "slightly-polar", library=library, second_ri=1199)


def test_a_compound_contradicted_by_the_second_column(library):
    """Peak P1 sits at limonene's 5 % phenyl index, but its partner (same share of the injection) elutes
    at 1450 on PEG, far from limonene (1199) and cineole (1211): the second column contradicts both."""
    first = pd.DataFrame({"peak": ["P1", "P2", "P3"], "ri": [1026.0, 1141.0, 1417.0], "area": [5e5, 1e5, 2e4]})
    second = pd.DataFrame({"peak": ["W1", "W2", "W3"], "ri": [1598.0, 1450.0, 1519.0], "area": [1.2e4, 3e5, 6e4]})
    two = matcher.screen(first, phase_class="slightly-polar", library=library, second=second, second_class="polar")
    lead = leading(two)
    assert lead.loc["P1", "second_peak"] == "W2"  # paired by area
    assert "second-column-disagrees" in lead.loc["P1", "flags"] and "review" in lead.loc["P1", "flags"]
    one = leading(matcher.screen(first, phase_class="slightly-polar", library=library))
    assert lead.loc["P1", "not_in_library"] > one.loc["P1", "not_in_library"] + 0.3
    assert lead.loc["P2", "name"] == "camphor" and lead.loc["P2", "second_peak"] == "W3"
    assert lead.loc["P3", "name"] == "beta-caryophyllene" and lead.loc["P3", "second_peak"] == "W1"
    assert "columns-agree" in lead.loc["P3", "flags"]


def test_unpaired_peaks_and_a_compound_listed_on_one_class_only():
    lib = two_class_library(only_first=("camphor",))
    first = pd.DataFrame({"peak": ["P1", "P2", "P3"], "ri": [1141.0, 1417.0, 1290.0], "area": [1e5, 2e4, 7e4]})
    # no partner for P3 (thymol co-elutes on the other column, say); W9 has no partner in the first run
    second = pd.DataFrame({"peak": ["W1", "W2", "W9"], "ri": [1598.0, 1519.0, 2500.0], "area": [1.2e4, 6e4, 3e3]})
    res = matcher.screen(first, phase_class="slightly-polar", library=lib, second=second, second_class="polar")
    lead = leading(res)
    assert lead.loc["P1", "name"] == "camphor"
    assert "not-on-second-class" in lead.loc["P1", "flags"] and lead.loc["P1", "evidence_second"] == 0.0
    assert np.isnan(lead.loc["P1", "second_library_ri"])
    assert lead.loc["P3", "second_peak"] == "" and "unpaired" in lead.loc["P3", "flags"]
    assert lead.loc["P2", "second_peak"] == "W1"
    run = res.runs[0]
    assert run.second["unpaired_second"] == ["W9"] or "W9" in run.second["unpaired_second"]
    assert any("second run paired with no peak" in n and "W9" in n for n in run.notices)
    assert run.second["class"] == "polar" and run.second["pairing"]["paired"] == 2


def _brute(gain: np.ndarray) -> float:
    n_a, n_b = gain.shape
    best = 0.0
    for k in range(0, min(n_a, n_b) + 1):
        for rows in itertools.combinations(range(n_a), k):
            for cols in itertools.permutations(range(n_b), k):
                best = max(best, sum(gain[r, c] for r, c in zip(rows, cols)))
    return best


@settings(max_examples=60, deadline=None)
@given(st.integers(1, 4), st.integers(1, 4), st.integers(0, 2 ** 31 - 1))
def test_best_matching_reaches_the_brute_force_optimum(n_a, n_b, seed):
    gain = np.random.default_rng(seed).normal(0.5, 2.0, (n_a, n_b))
    rows, cols = np.divmod(np.arange(n_a * n_b), n_b)
    m = best_matching(rows, cols, gain.ravel(), n_a, n_b)
    got = sum(gain[a, b] for a, b in enumerate(m) if b >= 0)
    assert got == pytest.approx(_brute(gain), abs=1e-9)
    used = m[m >= 0]
    assert len(used) == len(set(used.tolist()))  # a peak of the second run pairs once at most


def test_open_pairings_sum_to_one_and_put_the_chosen_partner_first():
    s = {(0, 0): 6.0, (0, 1): 5.5, (1, 1): 6.0}
    opts, p = open_pairings(np.array([0, 0, 1]), np.array([0, 1, 1]), s, np.array([0, 1]), 2)
    assert opts[0, 0] == 0 and opts[1, 0] == 1
    assert np.allclose(p.sum(axis=1), 1.0)
    # P0 could take W1 only if P1 gave it up: Δ = 5.5 − 6 − 6 = −6.5, below the floor of 0.01
    assert p[0, 0] > 0.99


def test_second_column_evidence_is_the_index_likelihood_ratio():
    sc = SecondColumn(phase_class="polar", partner=np.array([0, -1]), peak_id=np.array(["W1", ""], dtype=object),
                      ri=np.array([1205.0, np.nan]), unlisted=np.array([0.02, 1.0]), window=np.array([20.0, np.nan]),
                      library_ri=np.array([1199.0, np.nan]), library_spread=np.array([3.0, np.nan]), index_scatter=4.0)
    ev = sc.evidence(np.array([0, 0, 1]), np.array([0, 1, 0]))
    s = 5.0  # sqrt(3² + 4²)
    want = -0.5 * (6.0 / s) ** 2 - np.log(s) - 0.5 * np.log(2 * np.pi) - np.log(0.02)
    assert ev["evidence"][0] == pytest.approx(want)
    assert ev["evidence"][1] == 0.0 and not ev["listed"][1]  # not listed on the second class
    assert ev["evidence"][2] == 0.0 and not ev["paired"][2]  # unpaired peak
    assert ev["inside"][0] and ev["delta_ri"][0] == pytest.approx(6.0)


def test_per_compound_takes_measured_entries_only(library):
    ri, sd = per_compound(library.entries("polar"), len(library.compounds))
    names = list(library.compounds.name)
    assert ri[names.index("1,8-cineole")] == 1211.0 and ri[names.index("p-cymene")] == 1272.0
    assert np.all(np.isfinite(ri))


def test_two_column_settings_are_checked(library):
    first, second, _, _ = sample_runs(1, n=5)
    with pytest.raises(matcher.MatcherError, match="--second-class"):
        matcher.screen(first, phase_class="slightly-polar", library=library, second=second)
    with pytest.raises(matcher.MatcherError, match="one run with one run"):
        matcher.screen([first, first], phase_class="slightly-polar", library=library, second=second,
                       second_class="polar")
    with pytest.raises(matcher.MatcherError, match="class"):
        matcher.screen(first, phase_class="slightly-polar", library=library, second=second, second_class="waxy")
    lonely = matcher.screen(first, phase_class="slightly-polar", library=library, second=second,
                            second_class="nonpolar")  # a class the library does not hold
    assert any("holds no nonpolar entries" in n for n in lonely.runs[0].notices)
    assert leading(lonely)["flags"].str.contains("not-on-second-class").all()
    with pytest.raises(matcher.MatcherError, match="no 'ri' column; give --second-calibration CAL.json or --second-ladder"):
        matcher.screen(first, phase_class="slightly-polar", library=library, second=second.drop(columns="ri"),
                       second_class="polar")
    with pytest.raises(matcher.MatcherError, match="--second-calibration or --second-ladder, not both"):
        matcher.screen(first, phase_class="slightly-polar", library=library, second=second, second_class="polar",
                       second_calibration="c.json", second_ladder="l.csv")


def test_command_line_two_columns(tmp_path, library, monkeypatch):
    from typer.testing import CliRunner

    from matcher.cli.main import app

    lib_csv = library_csv(tmp_path / "lib.csv")
    db = f"sqlite:///{tmp_path / 'lib.sqlite'}"
    runner = CliRunner()
    assert runner.invoke(app, ["library", "init", "--db", db]).exit_code == 0
    assert runner.invoke(app, ["library", "import", str(lib_csv), "--db", db]).exit_code == 0
    first, second, names, truth = sample_runs(2)
    a, b = tmp_path / "phenyl.csv", tmp_path / "peg.csv"
    first.to_csv(a, index=False)
    second.to_csv(b, index=False)
    out = tmp_path / "both.json"
    r = runner.invoke(app, ["screen", str(a), "--class", "slightly-polar", "--second", str(b), "--second-class",
                            "polar", "-o", str(out), "--db", db])
    assert r.exit_code == 0, r.output
    doc = json.loads(out.read_text(encoding="utf-8"))
    peaks = doc["runs"][0]["peaks"]
    got = {p["peak"]: p.get("second_peak") or (p["candidates"][0].get("second_peak") if p["candidates"] else None)
           for p in peaks}
    assert sum(got[p] == w for p, w in truth.items()) >= 31
    # an output pointing at the second run is refused, and the run is untouched
    before = b.read_bytes()
    r = runner.invoke(app, ["screen", str(a), "--class", "slightly-polar", "--second", str(b), "--second-class",
                            "polar", "-o", str(b), "--db", db])
    assert r.exit_code != 0 and "second run" in (r.output + str(r.exception)) and b.read_bytes() == before
    r = runner.invoke(app, ["query", "1031", "--class", "slightly-polar", "--second-ri", "1199", "--second-class",
                            "polar", "--db", db])
    assert r.exit_code == 0 and "second ΔRI" in r.output
    assert r.output.split("limonene")[0].count("\n   1  ") == 1 or "   1  limonene" in r.output


def test_two_run_files_with_spectra_are_paired_and_confirmed(tmp_path):
    """Both columns as GC-MS run files (invented ASTM E2077 runs with counting noise; spectra constructed by
    tests/spectra_helpers.py, not measured), each calibrated with its own ladder run. On polyethylene glycol
    δ-cadinene and geranyl acetate share an index (1758 in the 2011 compilation, from memory), so one of them
    finds no partner there."""
    from run_factory import Compound, counting_noise, ladder_compounds, write_e2077
    from spectra_helpers import constructed_spectrum
    from typer.testing import CliRunner

    from matcher.cli.main import app

    runner = CliRunner()

    def cli(*args):
        res = runner.invoke(app, [str(a) for a in args])
        assert res.exit_code == 0, res.output + str(res.exception)
        return res.output

    lad = ladder_compounds(8, 24, step_s=120.0)
    apex = np.array([c.apex_s for c in lad])
    minutes, scans = 40.0, 12_000

    def time_of(ri):
        return float(np.interp(ri, 100.0 * np.arange(8, 25), apex))

    cals = []
    for k in (1, 2):  # one ladder run per column (the same invented programme)
        path = tmp_path / f"alkanes{k}.cdf"
        write_e2077(path, counting_noise(lad, minutes=minutes, scans=scans, seed=20 + k))
        cli("calibrate", path, "-o", tmp_path / f"cal{k}.json")
        cals.append(tmp_path / f"cal{k}.json")
    sample = ["alpha-pinene", "sabinene", "myrcene", "p-cymene", "limonene", "1,8-cineole", "gamma-terpinene",
              "linalool", "camphor", "terpinen-4-ol", "alpha-terpineol", "carvone", "geraniol", "(E)-anethole",
              "carvacrol", "eugenol", "geranyl acetate", "beta-caryophyllene", "delta-cadinene", "caryophyllene oxide"]
    by_name = {r["name"]: r for r in ROWS}
    rng = np.random.default_rng(5)
    first, second = [], []
    for nm in sample:
        r = by_name[nm]
        mz, y = constructed_spectrum(nm, r["formula"])
        height = float(rng.uniform(3e4, 3e5))
        for side, ri, share in ((first, float(r["ri_compilation"]), 1.0), (second, POLAR[nm], 0.55)):
            yy = y * np.exp(rng.normal(0.0, 0.1, len(y)))
            side.append(Compound(nm, time_of(ri), height * share * float(np.exp(rng.normal(0, 0.05))),
                                 dict(zip(mz.astype(int).tolist(), yy)), ri=ri))
    a, b = tmp_path / "phenyl.cdf", tmp_path / "peg.cdf"
    write_e2077(a, counting_noise(first, minutes=minutes, scans=scans, seed=31))
    write_e2077(b, counting_noise(second, minutes=minutes, scans=scans, seed=32))
    lib = library_csv(tmp_path / "lib.csv")
    db = str(tmp_path / "lab.sqlite")
    cli("library", "init", "--db", db)
    cli("library", "import", lib, "--db", db)
    out = tmp_path / "both.csv"
    said = cli("screen", a, "--calibration", cals[0], "--class", "slightly-polar", "--second", b,
               "--second-calibration", cals[1], "--second-class", "polar", "-o", out, "--db", db)
    assert "peaks paired" in said
    side = json.loads((tmp_path / "both.csv.meta.json").read_text(encoding="utf-8"))["runs"][0]
    assert len(side["checksum"]["spectra_sha256"]) == 64 and len(side["second"]["checksum"]["spectra_sha256"]) == 64
    assert side["second"]["checksum"]["spectra_sha256"] != side["checksum"]["spectra_sha256"]
    table = pd.read_csv(out, keep_default_na=False, na_values=[""])
    lead = table[table["rank"] == 1]
    named = {nm: lead[lead["name"] == nm] for nm in sample}
    right = [nm for nm, rows in named.items() if len(rows) and abs(rows["ri"].iloc[0] - float(by_name[nm]["ri_compilation"])) <= 2]
    assert len(right) >= 18  # measured: 20 of 20 named at the right index
    confirmed = [nm for nm in right if abs(float(named[nm]["second_ri"].iloc[0]) - POLAR[nm]) <= 3]
    assert len(confirmed) >= 17, (right, confirmed)  # measured: 18, the two sharing 1758 on PEG left unpaired
    # the two compounds sharing 1758 on PEG: at most one of them has a partner there
    both = [named[nm] for nm in ("geranyl acetate", "delta-cadinene") if len(named[nm])]
    partners = [str(rows["second_peak"].iloc[0]) for rows in both]
    assert len([p for p in partners if p not in ("", "nan")]) <= 2
    assert len(set(p for p in partners if p not in ("", "nan"))) == len([p for p in partners if p not in ("", "nan")])
    for rows, p in zip(both, partners):  # measured: both unpaired (their shared PEG peak is a mixture)
        if p in ("", "nan"):
            assert "unpaired" in rows["flags"].iloc[0] and "review" in rows["flags"].iloc[0]


def test_the_review_page_receives_each_peaks_partner(library, tmp_path):
    """The review API serves a two-column result's partner per peak (the page shows it beside the facts)."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        from starlette.testclient import TestClient
    from matcher.review.server import TOKEN_HEADER, create_app
    from matcher.review.session import open_review

    first, second, _, truth = sample_runs(4)
    out = tmp_path / "both.csv"
    matcher.screen(first, phase_class="slightly-polar", library=library, second=second, second_class="polar",
                   output=out)
    review = open_review(out, reviewer="ana")
    client = TestClient(create_app(review, token="t", port=48124), base_url="http://127.0.0.1:48124")
    peaks = client.get("/api/peaks", headers={TOKEN_HEADER: "t"}).json()["peaks"]
    got = {p["peak"]: p["second_peak"] for p in peaks}
    assert sum(got[p] == w for p, w in truth.items()) >= 31
    p0 = peaks[0]
    assert isinstance(p0["second_ri"], float) and 0.0 <= p0["second_pair_probability"] <= 1.0
    assert "second_delta_ri" in p0["candidates"][0] and "second" in p0["candidates"][0]["evidence"]
    js = (Path(matcher.__file__).parent / "review" / "assets" / "review.js").read_text(encoding="utf-8")
    assert "p.second_peak" in js and "second ΔRI" in js  # the page shows them
