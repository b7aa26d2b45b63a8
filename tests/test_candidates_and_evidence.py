"""Window search and the evidence model."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matcher.identify.window_search import half_widths, window_pairs
from matcher.classes import DEFAULT_WINDOWS, PHASE_CLASSES
from matcher.identify.evidence import Model
from matcher.identify.query import query as _query
from matcher.identify.shortlist import PeakInput, prepare, shortlist
from matcher.store.snapshot import CompoundTable, build_snapshot

from engine_helpers import synthetic_snapshot


def query(*args, **kwargs) -> dict:
    """The ``matcher query --json`` document (``QueryResult.to_dict()``)."""
    return _query(*args, **kwargs).to_dict()


finite = st.floats(min_value=0, max_value=5000, allow_nan=False)


@settings(max_examples=150, deadline=None)
@given(st.lists(finite, max_size=40), st.lists(finite, max_size=20), st.floats(min_value=0.1, max_value=60))
def test_window_pairs_equal_brute_force(lib, peaks, w):
    lib = np.sort(np.array(lib, dtype=float))
    x = np.array(peaks, dtype=float)
    pairs = window_pairs(lib, x, np.full(len(x), w))
    got = sorted(zip(pairs.peak.tolist(), pairs.entry.tolist()))
    # the window is x - w <= ri <= x + w, computed as written (|x - ri| <= w can round the other way at the edge,
    # e.g. x = 1.0, w = 0.7, ri = 0.3)
    inside = lambda p, k: x[p] - w <= lib[k] <= x[p] + w  # noqa: E731
    want = sorted((p, k) for p in range(len(x)) for k in range(len(lib)) if inside(p, k))
    assert got == want
    assert pairs.count.tolist() == [sum(1 for k in range(len(lib)) if inside(p, k)) for p in range(len(x))]


def test_default_windows_are_the_documented_common_practice():
    # Common practice, no single source (README, polarity-class table; docs/formats.md): ±10 non-polar and slightly polar,
    # ±15 mid-polar, ±20 polar, ±25 highly polar.
    assert DEFAULT_WINDOWS == {"nonpolar": 10, "slightly-polar": 10, "mid-polar": 15, "polar": 20, "highly-polar": 25}
    assert half_widths(np.array([1500.0]), "mid-polar").tolist() == [15.0]
    assert half_widths(np.array([1500.0]), "nonpolar", window_percent=2).tolist() == [30.0]


def _alkane_snapshot(phase_class):
    # Definition of the retention index (Kováts 1958): n-alkane n has index 100·n on any phase.
    carbons = list(range(6, 31))
    comp = CompoundTable.from_records(
        [{"id": c, "name": f"n-C{c}", "formula": f"C{c}H{2 * c + 2}", "series": "n-alkanes"} for c in carbons])
    return build_snapshot(comp, np.array(carbons), np.array([phase_class] * len(carbons)),
                          np.array([100.0 * c for c in carbons]))


@pytest.mark.parametrize("phase_class", PHASE_CLASSES)
def test_alkane_queried_at_100n_returns_that_alkane_on_every_class(phase_class):
    snap = _alkane_snapshot(phase_class)
    for c in (8, 12, 17, 25):
        doc = query(100.0 * c, phase_class, snapshot=snap)
        assert doc["candidates"][0]["name"] == f"n-C{c}"
        assert doc["candidates"][0]["delta_ri"] == 0.0


def test_closer_candidate_scores_higher():
    snap = synthetic_snapshot([1000.0, 1006.0])
    doc = query(1001.0, "nonpolar", snapshot=snap)
    by = {c["name"]: c for c in doc["candidates"]}
    assert by["compound 0"]["score"] > by["compound 1"]["score"]
    assert by["compound 0"]["probability"] > by["compound 1"]["probability"]
    assert doc["candidates"][0]["name"] == "compound 0"


def test_molecular_ion_disagreement_lowers_a_candidate():
    comp = CompoundTable.from_records([{"id": 1, "name": "limonene", "formula": "C10H16"},
                                       {"id": 2, "name": "1,8-cineole", "formula": "C10H18O"}])
    snap = build_snapshot(comp, np.array([1, 2]), np.array(["slightly-polar"] * 2), np.array([1030.0, 1031.0]))
    plain = {c["name"]: c for c in query(1031, "slightly-polar", snapshot=snap)["candidates"]}
    with_ion = {c["name"]: c for c in query(1031, "slightly-polar", snapshot=snap, mol_ion=136)["candidates"]}
    # nominal mass of C10H18O is 154 (C 12, H 1, O 16), so m/z 136 disagrees
    assert with_ion["1,8-cineole"]["probability"] < plain["1,8-cineole"]["probability"]
    assert with_ion["1,8-cineole"]["evidence"]["mol_ion"] < 0
    assert "mass-mismatch" in with_ion["1,8-cineole"]["flags"]
    assert "mass-match" in with_ion["limonene"]["flags"]
    # m/z 136 agrees, but near 1031 half the class's compounds have mass 136, so an unlisted isomer is
    # as likely to show it: the agreement is worth ln(0.95 / q(136 | 1031)), about 1.06 (matcher.identify.unlisted)
    assert with_ion["limonene"]["evidence"]["mol_ion"] == pytest.approx(1.06, abs=0.02)
    assert 0.8 < with_ion["limonene"]["probability"] < 0.9


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(min_value=500, max_value=3000), min_size=1, max_size=30),
       st.floats(min_value=400, max_value=3100), st.sampled_from(PHASE_CLASSES),
       st.one_of(st.none(), st.integers(min_value=50, max_value=400)))
def test_probabilities_and_not_in_library_sum_to_one(lib, x, phase_class, mol):
    masses = [100 + (i * 7) % 200 for i in range(len(lib))]
    snap = synthetic_snapshot(lib, phase_class, masses=masses)
    doc = query(x, phase_class, snapshot=snap, mol_ion=mol)
    total = sum(c["probability"] for c in doc["candidates"]) + doc["not_in_library"]
    assert total == pytest.approx(1.0, abs=1e-5)
    ranks = [c["rank"] for c in doc["candidates"]]
    assert ranks == list(range(1, len(ranks) + 1))
    probs = [c["probability"] for c in doc["candidates"]]
    assert probs == sorted(probs, reverse=True)


def test_top_cuts_the_list_but_not_the_probabilities():
    snap = synthetic_snapshot([1000.0, 1002.0, 1004.0, 1006.0])
    full = query(1003, "nonpolar", snapshot=snap)
    cut = query(1003, "nonpolar", snapshot=snap, top=2)
    assert len(full["candidates"]) == 4 and len(cut["candidates"]) == 2
    assert cut["candidates"][0]["probability"] == full["candidates"][0]["probability"]
    assert cut["not_in_library"] == full["not_in_library"]


def test_query_far_from_everything_is_an_empty_shortlist():
    snap = synthetic_snapshot([1000.0, 1100.0])
    doc = query(2500, "nonpolar", snapshot=snap)
    assert doc["candidates"] == [] and doc["not_in_library"] == 1.0


def test_lone_entry_in_a_dense_region_is_not_a_sure_thing():
    """Not-in-library weight grows with the library's density around the index."""
    sparse = synthetic_snapshot([1000.0])
    dense = synthetic_snapshot(np.concatenate([[1000.0], np.linspace(900, 1100, 60)[np.abs(np.linspace(900, 1100, 60) - 1000) > 11]]))
    p_sparse = query(1004, "nonpolar", snapshot=sparse)["candidates"][0]["probability"]
    p_dense = query(1004, "nonpolar", snapshot=dense)["candidates"][0]["probability"]
    assert p_dense < p_sparse


def test_key_ions_and_spectral_hit_raise_the_named_candidate():
    comp = CompoundTable.from_records([
        {"id": 1, "name": "alpha-pinene", "formula": "C10H16", "key_ions": [93, 77, 121]},
        {"id": 2, "name": "alpha-thujene", "formula": "C10H16", "key_ions": [93, 91, 77], "synonyms": ["thuj-4(10)-ene"]},
    ])
    snap = build_snapshot(comp, np.array([1, 2]), np.array(["slightly-polar"] * 2), np.array([932.0, 926.0]))
    base = {c["name"]: c["probability"] for c in query(929, "slightly-polar", snapshot=snap)["candidates"]}
    ions = {c["name"]: c for c in query(929, "slightly-polar", snapshot=snap, ions=[93, 91, 77])["candidates"]}
    assert ions["alpha-thujene"]["probability"] > base["alpha-thujene"]
    assert "ions-agree" in ions["alpha-thujene"]["flags"]
    hit = {c["name"]: c for c in query(929, "slightly-polar", snapshot=snap, hit="α-Thujene", hit_match=90)["candidates"]}
    assert hit["alpha-thujene"]["evidence"]["hit"] > 0 and "hit-agrees" in hit["alpha-thujene"]["flags"]
    assert hit["alpha-pinene"]["evidence"]["hit"] == 0


def test_ambiguous_flag_when_two_candidates_are_close():
    snap = synthetic_snapshot([1000.0, 1001.0])
    doc = query(1000.5, "nonpolar", snapshot=snap)
    assert all("ambiguous" in c["flags"] and "review" in c["flags"] for c in doc["candidates"])


def test_cross_class_fallback_finds_and_flags_a_neighbour_entry():
    comp = CompoundTable.from_records([{"id": 1, "name": "linalool", "formula": "C10H18O"},
                                       {"id": 2, "name": "decane", "formula": "C10H22"}])
    snap = build_snapshot(comp, np.array([1, 2]), np.array(["nonpolar", "slightly-polar"]), np.array([1090.0, 1000.0]))
    home_only = query(1099, "slightly-polar", snapshot=snap)
    assert home_only["candidates"] == []
    doc = query(1099, "slightly-polar", snapshot=snap, fallback=True)
    assert doc["candidates"][0]["name"] == "linalool"
    assert "cross-class" in doc["candidates"][0]["flags"] and "in-window" not in doc["candidates"][0]["flags"]
    assert sum(c["probability"] for c in doc["candidates"]) + doc["not_in_library"] == pytest.approx(1.0)


def test_shortlist_vectorised_equals_one_at_a_time():
    rng = np.random.default_rng(7)
    lib = rng.uniform(800, 2000, 200)
    snap = synthetic_snapshot(lib, masses=rng.integers(100, 200, 200))
    home = prepare(snap, "nonpolar")
    x = rng.uniform(800, 2000, 50)
    mol = rng.integers(100, 200, 50).astype(float)
    # each peak on its own (exclusive=False): scoring many at once must equal scoring one at a time
    together = shortlist(home, PeakInput(x, mol_ion=mol), Model(3.0, exclusive=False))
    for p in range(0, 50, 7):
        alone = shortlist(home, PeakInput(x[[p]], mol_ion=mol[[p]]), Model(3.0))
        rows = together.rows_of(p)
        np.testing.assert_allclose(together.columns["probability"][rows], alone.columns["probability"], rtol=1e-12)
        assert list(together.columns["name"][rows]) == list(alone.columns["name"])
