"""The two-column self-check (``matcher evaluate --class A --second-class B``) on a library of published indices.

Library: the 43 essential-oil constituents of tests/data/essential_oil_indices.csv on 5 % phenyl
polysiloxane (column ri_adams: R. P. Adams, *Identification of Essential Oil Components by GC/MS*,
4th ed., 2007; slightly-polar class) and the same compounds on polyethylene glycol from
tests/data/polar_indices.csv (averages of Babushok, Linstrom & Zenkevich, J. Phys. Chem. Ref. Data 40,
043101, 2011; polar class). Both tables were written FROM MEMORY (see their headers); one observation
per compound and class. The simulated runs themselves are invented (seeded); the thresholds below are
what this model measured on them (12 seeds of 10 runs each, reported beside each test) with a margin,
so a change that makes the second column worthless, the pairing random or the probabilities
over-confident fails here.
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest
from typer.testing import CliRunner

import matcher
from matcher.cli.main import app
from matcher.identify.evaluation_two_columns import TwoColumnEvaluation, compounds_on_both, evaluate_two_columns
from matcher.store.snapshot import CompoundTable, build_snapshot

from engine_helpers import DATA, essential_oils

ROWS = essential_oils()
NAMES = [r["name"] for r in ROWS]
with open(DATA / "polar_indices.csv", encoding="utf-8") as _fh:
    POLAR = {r["name"]: float(r["ri_polar"]) for r in csv.DictReader(ln for ln in _fh if not ln.startswith("#"))}
A, B = "slightly-polar", "polar"
RUNS = 10


def two_class_snapshot(names=None):
    """Both published tables as one library (one observation per compound and class)."""
    rows = [r for r in ROWS if names is None or r["name"] in names]
    comp = CompoundTable.from_records([{"id": i + 1, "name": r["name"], "formula": r["formula"]}
                                       for i, r in enumerate(rows)])
    ids = [i + 1 for i in range(len(rows))] + [i + 1 for i, r in enumerate(rows) if r["name"] in POLAR]
    cls = [A] * len(rows) + [B] * sum(r["name"] in POLAR for r in rows)
    ri = [float(r["ri_adams"]) for r in rows] + [POLAR[r["name"]] for r in rows if r["name"] in POLAR]
    return build_snapshot(comp, np.array(ids), np.array(cls), np.array(ri))


@pytest.fixture(scope="module")
def snap():
    return two_class_snapshot()


@pytest.fixture(scope="module")
def report(snap):
    return evaluate_two_columns(snap, A, B, runs=RUNS)


def test_the_published_tables_separate_on_the_second_column():
    """Why a second column helps, from the published tables alone (no model): of the 29 pairs of compounds
    within 10 units of each other on 5 % phenyl (the class's default window; common practice, no source),
    23 lie more than 20 units apart on polyethylene glycol (the polar window), e.g. p-cymene 1020 / 1272
    against limonene 1024 / 1199. Six pairs stay close on both (alpha-thujene / alpha-pinene among them)."""
    a = np.array([float(r["ri_adams"]) for r in ROWS])
    b = np.array([POLAR[n] for n in NAMES])
    i, j = np.triu_indices(len(a), 1)
    close_a = np.abs(a[i] - a[j]) <= 10
    close_b = np.abs(b[i] - b[j]) <= 20
    assert int(close_a.sum()) == 29
    assert int((close_a & ~close_b).sum()) == 23
    both = {frozenset((NAMES[i[k]], NAMES[j[k]])) for k in np.flatnonzero(close_a & close_b)}
    assert frozenset(("alpha-thujene", "alpha-pinene")) in both and len(both) == 6


def test_the_simulation_takes_every_compound_on_both_classes(snap, report):
    rows, centre, spread = compounds_on_both(snap, A, B)
    assert len(rows) == 43 and report["compounds_on_both"] == 43
    k = NAMES.index("p-cymene")
    assert centre[list(rows).index(k)].tolist() == [1020.0, 1272.0]
    # a single observation's spread: the class floor (0.15 × window) inflated by sqrt(1 + 1/1)
    assert spread[list(rows).index(k)] == pytest.approx([1.5 * np.sqrt(2), 3.0 * np.sqrt(2)])
    # 80 % of 43 drawn per run (34), 30 % of them out of the library (10)
    assert report["peaks"] == RUNS * 34 and report["unlisted_peaks"] == RUNS * 10


def test_second_column_raises_the_first_candidate_rate(report):
    """Measured (default seed, 10 runs): listed peaks first 84.2 % on one column, 93.8 % on two; over 12 seeds
    77.5-85.0 % against 88.8-94.2 %, the gain never below 3.7 points. The one-column rate stays below 90 %: the
    crowded sample is hard on one column (isomers 2-8 units apart on 5 % phenyl, run scatter 3 units)."""
    one, two = report["one_column"]["top1"], report["two_columns"]["top1"]
    # within five points of the measured values (the model may move a little; a large move needs a look)
    assert one == pytest.approx(0.8417, abs=0.05) and two == pytest.approx(0.9375, abs=0.05)
    assert one <= 0.9
    assert two >= one + 0.03
    assert two >= 0.85
    # unlisted peaks lose their false confidence: mean top probability 0.22 -> 0.07 (0.20-0.25 -> 0.07-0.11)
    assert report["two_columns"]["mean_top_probability_unlisted"] < 0.6 * report["one_column"]["mean_top_probability_unlisted"]


def test_peaks_are_paired_with_their_own_partner(report):
    """Measured (default seed): 80.6 % of the first run's peaks paired with their own peak of the shuffled second
    run, 91.3 % of the listed ones and 55 % of the unlisted ones (these share no candidate: only their areas
    pair them); over 12 seeds 71-81 % (listed 80-93 %). Chance is one in 34. Thresholds 65 % and 75 %: the
    lowest seed less a margin; the six pairs the tables leave close on both columns (test above) bound what
    the indices alone can pair."""
    two = report["two_columns"]
    assert two["pairing_accuracy"] == pytest.approx(0.8059, abs=0.08)
    assert two["pairing_accuracy"] >= 0.65
    assert two["pairing_accuracy_listed"] >= 0.75
    assert two["pairing_accuracy_unlisted"] >= 10 / 34  # well above chance even on areas alone
    assert two["paired"] >= 0.95  # every compound gives a peak on both columns: nearly all pair


def test_probabilities_are_not_over_confident(report):
    """ECE of the top probability (ten bins, as evaluate --crowded): measured 0.092 one column, 0.102 two columns
    (over 12 seeds 0.04-0.11 and 0.06-0.12), almost all of it under-confidence: the over-confident part
    (bins whose mean probability exceeds their hit rate) is 0.007 and 0.000 (at most 0.011 over the seeds).
    Calls at p >= 0.9 are right 94 % of the time with two columns (90-100 % over the seeds)."""
    for key in ("one_column", "two_columns"):
        r = report[key]
        assert r["ece"] <= 0.15, key
        assert r["overconfidence"] <= 0.03, key
        assert sum(b["peaks"] for b in r["reliability"]) == report["peaks"]
    two = report["two_columns"]
    assert two["confident_calls"] > 2 * report["one_column"]["confident_calls"]
    assert two["confident_precision"] >= 0.88


def test_wrong_calls_carry_second_column_disagrees(report):
    """Measured (default seed): 58 % of wrong first candidates (listed peaks called wrong, and unlisted peaks,
    whose first candidate is wrong by definition) carry second-column-disagrees, 2.7 % of right ones; over
    12 seeds 55-66 % against 0.9-5.3 %."""
    two = report["two_columns"]
    assert two["wrong_top"] > 0 and two["right_top"] > 0
    assert two["wrong_top_flagged"] >= 0.5
    assert two["right_top_flagged"] <= 0.08


def test_the_seed_fixes_the_numbers(snap):
    first = evaluate_two_columns(snap, A, B, runs=1, seed=11)
    again = evaluate_two_columns(snap, A, B, runs=1, seed=11)
    other = evaluate_two_columns(snap, A, B, runs=1, seed=12)
    assert json.dumps(first, sort_keys=True) == json.dumps(again, sort_keys=True)
    assert json.dumps(first, sort_keys=True) != json.dumps(other, sort_keys=True)


def test_too_few_compounds_on_both_classes():
    snap = two_class_snapshot(names={"limonene", "p-cymene", "linalool"})
    r = evaluate_two_columns(snap, A, B, runs=2)
    assert r["compounds_on_both"] == 3 and "fewer than four" in r["notice"] and "two_columns" not in r


def test_from_python_and_its_rules(snap):
    ev = matcher.evaluate(snap, phase_class="slightly polar", second_class="Polar", runs=2, seed=5)
    assert isinstance(ev, TwoColumnEvaluation) and isinstance(ev, matcher.TwoColumnEvaluation)
    doc = ev.to_dict()
    assert doc["mode"] == "two-columns" and doc["class"] == A and doc["second_class"] == B and doc["runs"] == 2
    assert doc == json.loads(json.dumps(doc)) and "notice" not in doc
    for kwargs, message in (
        ({"phase_class": A, "second_class": A}, "--second-class must differ from --class: both are slightly-polar"),
        ({"second_class": B}, "give the first column's polarity class too"),
        ({"phase_class": A, "second_class": B, "runs": 0}, "--runs must be a whole number from 1 to 1000"),
        ({"phase_class": A, "second_class": B, "runs": 2.5}, "--runs must be a whole number"),
        ({"phase_class": A, "second_class": B, "seed": -1}, "--seed must be a whole number"),
        ({"phase_class": A, "runs": 3}, "--runs and --seed belong to the two-column check"),
        ({"phase_class": A, "second_class": "wax"}, "wax"),
    ):
        with pytest.raises(matcher.MatcherError, match=message):
            matcher.evaluate(snap, **kwargs)


def test_the_command(tmp_path):
    db = str(tmp_path / "oils.sqlite")
    src = tmp_path / "oils.csv"
    with open(src, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["name", "phase_class", "ri", "formula"])
        for r in ROWS:
            w.writerow([r["name"], A, r["ri_adams"], r["formula"]])
            w.writerow([r["name"], B, POLAR[r["name"]], r["formula"]])
    runner = CliRunner()
    assert runner.invoke(app, ["library", "init", "--db", db]).exit_code == 0
    assert runner.invoke(app, ["library", "import", str(src), "--db", db]).exit_code == 0
    args = ["evaluate", "--class", A, "--second-class", B, "--runs", "2", "--seed", "3", "--db", db]
    res = runner.invoke(app, args + ["--json"])
    assert res.exit_code == 0, res.output
    doc = json.loads(res.output)
    assert doc["mode"] == "two-columns" and doc["compounds_on_both"] == 43 and doc["peaks"] == 68
    assert set(doc["two_columns"]) >= {"top1", "ece", "overconfidence", "pairing_accuracy", "wrong_top_flagged",
                                       "reliability"}
    text = runner.invoke(app, args)
    assert text.exit_code == 0, text.output
    assert "slightly-polar + polar" in text.output and "pairing:" in text.output
    assert "second-column-disagrees" in text.output
    bad = runner.invoke(app, ["evaluate", "--crowded", "--class", A, "--second-class", B, "--db", db])
    assert bad.exit_code != 0 and "two different checks" in str(bad.exception)  # run() prints it as one line
