"""Direct tests of modules that no other test imports: rules, hints, identifiers, textable, run_summary,
series, store.location, svg_plots, homologues, results_reader."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matcher.identify import hints, homologues
from matcher.chem import identifiers
from matcher.io import result_files as results_reader
from matcher import rules
from matcher.report import summary as run_summary, svg as svg_plots, terminal as textable
from matcher.retention import series
from matcher.errors import InputError, MatcherError
from matcher import location


# --------------------------------------------------------------------------- rules

def test_rules_vocabularies_are_the_ones_the_other_modules_use():
    from matcher.retention import calibration
    from matcher import classes
    from matcher.store import library_io, models

    assert classes.PHASE_CLASSES is rules.PHASE_CLASSES
    assert calibration.MODES is rules.MODES and models.MODES is rules.MODES
    from matcher import limits

    assert library_io.RI_MAX == rules.RI_MAX == limits.MAX_RI == 10_000.0
    assert set(calibration.FORMULA) == set(rules.MODES)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.integers(min_value=1, max_value=rules.MAX_MZ), min_size=1, max_size=8))
def test_check_ions_accepts_whole_mz_in_every_spelling(ions):
    text = " ".join(map(str, ions))
    assert rules.check_ions(ions) == rules.check_ions(text) == rules.check_ions([float(i) for i in ions]) == tuple(ions)


@pytest.mark.parametrize("bad", [0, -5, 93.5, 5001, float("nan"), True, "x"])
def test_check_ions_refuses(bad):
    with pytest.raises(MatcherError, match="^--ions: "):
        rules.check_ions([93, bad])


def test_window_top_and_choice_rules():
    assert rules.check_window(None, None) == (None, None)
    assert rules.check_window(7, None) == (7.0, None)
    assert rules.check_window(None, 20) == (None, 20.0)
    for bad in ({"window": 0}, {"window": float("inf")}, {"window_percent": 0}, {"window_percent": 20.01}):
        with pytest.raises(MatcherError):
            rules.check_window(bad.get("window"), bad.get("window_percent"))
    assert rules.check_top(None) is None and rules.check_top(5.0) == 5
    assert rules.check_mode(None) == rules.check_mode("") == rules.check_mode("PROG") == "programmed"
    assert rules.check_rt_unit("seconds") == "s" and rules.check_rt_unit(None) is None
    with pytest.raises(MatcherError, match="--mode must be one of programmed, isothermal; got 'ramp'"):
        rules.check_mode("ramp")
    assert rules.check_ri(0) == 0.0 and rules.check_ri("10000") == 10000.0
    with pytest.raises(MatcherError, match="retention index must be a finite index between 0 and 10000"):
        rules.check_ri(-0.1)
    assert rules.check_shortlist_path("a/B.XLSX") == "a/B.XLSX"
    with pytest.raises(MatcherError, match="-o out.tsv: the shortlist file must end in .csv, .json or .xlsx"):
        rules.check_shortlist_path("out.tsv")
    assert rules.check_noise(0) == 0.0
    with pytest.raises(MatcherError):
        rules.check_noise(100.5)


# --------------------------------------------------------------------------- hints

def test_ion_bit_sets_count_and_overlap():
    m = hints.ion_masks([(93, 136, 121), (93,), (), (2000,)])   # m/z above MAX_ION is ignored
    assert hints.ion_count(m).tolist() == [3, 1, 0, 0]
    assert hints.ion_overlap(m[[0, 0, 1]], m[[1, 2, 1]]).tolist() == [1, 0, 1]


def test_hit_similarity_exact_fuzzy_and_absent():
    keys = [["limonene", "dipentene"], ["alpha-pinene"]]
    sim = hints.hit_similarity(np.array(["Limonene", "", "alpha pinene"], dtype=object), np.array([0, 1, 2, 0]),
                               np.array([0, 0, 1, 1]), keys, lambda s: s.lower())
    assert sim[0] == 1.0 and sim[1] == 0.0
    assert 0.9 < sim[2] < 1.0          # one character differs
    assert sim[3] < 0.9                # below the hit-agrees threshold: another compound


# --------------------------------------------------------------------------- identifiers

def test_inchikey_form():
    # water's standard InChIKey (IUPAC/InChI Trust; from memory)
    assert identifiers.is_inchikey("XLYOFNOQVPJJNP-UHFFFAOYSA-N")
    assert not identifiers.is_inchikey("XLYOFNOQVPJJNP-UHFFFAOYSA-NN")
    with pytest.raises(ValueError, match="not an InChIKey"):
        identifiers.normalise_inchikey("123")


# --------------------------------------------------------------------------- textable

def test_format_table_aligns_and_keeps_one_line_per_cell():
    out = textable.format_table(["name", "ri"], [["a\nb", 1031.25], ["c", float("nan")]])
    assert out.splitlines() == ["name       ri", "----  -------", "a b   1031.25", "c"]


# --------------------------------------------------------------------------- run_summary

def test_run_summary_fallback_rule_without_review_marks():
    t = pd.DataFrame({"peak": [1, 2], "rank": [1, 1], "probability": [0.9, 0.4], "not_in_library": [0.05, 0.6],
                      "flags": ["in-window;mass-match", "in-window;window-edge"]})
    s = run_summary.summarise_table(t)
    assert (s["review"], s["not_in_library"], s["with_candidates"]) == (1, 1, 2)
    assert run_summary.split_flags(["a", "b"]) == ["a", "b"] and run_summary.split_flags("a; b;") == ["a", "b"]


# --------------------------------------------------------------------------- series

def test_series_indices_follow_their_definitions():
    # n-alkanes: 100 x carbon number (Kovats 1958); Lee index (Lee et al. 1979)
    assert series.assigned_index("alkanes", carbons=[7, 20]).tolist() == [700.0, 2000.0]
    assert series.lee_index(" Picene ") == 500.0
    with pytest.raises(MatcherError, match="not a Lee-index standard: 'pyrene'"):
        series.assigned_index("pah", names=["naphthalene", "pyrene"])
    with pytest.raises(MatcherError, match="unknown reference series"):
        series.check_series("steroids")


# --------------------------------------------------------------------------- store.location

def test_library_location_rules(monkeypatch, tmp_path):
    monkeypatch.delenv("MATCHER_DB", raising=False)
    assert location.resolve(str(tmp_path / "x.sqlite")) == "sqlite:///" + str(tmp_path / "x.sqlite")
    monkeypatch.setenv("MATCHER_DB", "postgres://ana@db/ri")
    assert location.resolve(None) == "postgresql+psycopg://ana@db/ri"
    assert location.resolve("sqlite:///given.db") == "sqlite:///given.db"      # --db wins over $MATCHER_DB
    monkeypatch.delenv("MATCHER_DB")
    assert location.resolve(None).endswith("library.sqlite")
    masked = location.mask_url("postgresql://u:p%40ss@h/db")
    assert masked.endswith("://u:***@h/db") and "p%40ss" not in masked and "ss@" not in masked


# --------------------------------------------------------------------------- svg_plots

def test_svg_plot_scales_points_inside_the_frame():
    svg = svg_plots.xy_plot([svg_plots.points([0, 10], [0, 100]), svg_plots.line([0, 10], [0, 100], dashed=True)],
                            x_label="time", y_label="index", width=300, height=200)
    assert svg.count("<circle") == 2 and "stroke-dasharray" in svg
    assert svg_plots.nice_ticks(0.0, 1.0) == [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]
    empty = svg_plots.xy_plot([], x_label="x", y_label="y")
    assert empty.startswith("<svg") and "<circle" not in empty


# --------------------------------------------------------------------------- homologues

def test_homologue_increment_of_the_alkanes_is_one_hundred():
    # n-alkanes: exactly 100 units per CH2 by the definition of the index (Kovats 1958)
    a, b, sd = homologues.fit_increment(np.array([8, 9, 10, 12]), np.array([800.0, 900.0, 1000.0, 1200.0]))
    assert (a, b) == (0.0, 100.0) and sd == pytest.approx(0.0, abs=1e-9)


# --------------------------------------------------------------------------- results_reader

def test_read_peak_from_a_screen_json(tmp_path):
    from result_factory import make_result
    from matcher.report.files import write_json

    result = make_result()
    path = tmp_path / "out.json"
    write_json(result, path)
    doc = json.loads(path.read_text(encoding="utf-8"))
    run = doc["runs"][0]
    peak = run["peaks"][0]
    facts = results_reader.read_peak(path, peak["peak"], run=run["label"])
    assert math.isclose(facts.ri, peak["ri"]) and facts.phase_class == run["class"]
    with pytest.raises(InputError):
        results_reader.read_peak(tmp_path / "absent.json", 1)
