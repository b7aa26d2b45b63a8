"""Honest answers on a crowded run: unlisted neighbours, one compound per peak, a robust adaptive fit.

The crowded scenario is built from a published table: linear indices of 43
essential-oil constituents on 5 % phenyl polysiloxane from R. P. Adams,
*Identification of Essential Oil Components by GC/MS*, 4th ed. (2007) as the
house library, and the averages of Babushok, Linstrom & Zenkevich, J. Phys.
Chem. Ref. Data 40, 043101 (2011) as the run's measured indices -- both
written FROM MEMORY (tests/data/essential_oil_indices.csv); the compilation
runs about 4 units above the handbook. Every other compound along the index
scale is left out of the library, so 21 or 22 of the 43 peaks are unlisted
compounds, many within a few units of a listed isomer of the same molecular
ion (sabinene next to beta-pinene, alpha-thujene next to alpha-pinene).
Molecular ions are the nominal masses of the formulas (C 12, H 1, O 16).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matcher.identify.assignment import assign
from matcher.chem.formula import nominal_mass
from matcher.identify.screening import screen_run
from matcher.identify.shortlist import PeakInput, prepare
from matcher.store.snapshot import CompoundTable, build_snapshot
from matcher.identify.unlisted import crowding_density

from engine_helpers import essential_oils, synthetic_snapshot

ROWS = essential_oils()
NAMES = np.array([r["name"] for r in ROWS], dtype=object)
ADAMS = np.array([float(r["ri_adams"]) for r in ROWS])
COMPILATION = np.array([float(r["ri_compilation"]) for r in ROWS])
MASS = np.array([nominal_mass(r["formula"]) for r in ROWS], dtype=float)


def crowded(parity: int):
    """Library: every other compound (by handbook index) starting at ``parity``; run: all 43."""
    order = np.argsort(ADAMS, kind="stable")
    listed = np.zeros(len(ROWS), dtype=bool)
    listed[order[parity::2]] = True
    idx = np.flatnonzero(listed)
    comp = CompoundTable.from_records(
        [{"id": k + 1, "name": ROWS[i]["name"], "formula": ROWS[i]["formula"]} for k, i in enumerate(idx)])
    snap = build_snapshot(comp, np.arange(1, len(idx) + 1), np.array(["slightly-polar"] * len(idx)), ADAMS[idx])
    return prepare(snap, "slightly-polar"), listed


def calls(sl, n):
    c = sl.columns
    top = c["rank"] == 1
    name = np.array([""] * n, dtype=object)
    prob = np.zeros(n)
    flags = np.array([""] * n, dtype=object)
    name[c["peak"][top]] = c["name"][top]
    prob[c["peak"][top]] = c["probability"][top]
    flags[c["peak"][top]] = c["flags"][top]
    return name, prob, flags


def compound_sums(sl):
    c = sl.columns
    has = c["compound"] >= 0
    return np.bincount(c["compound"][has], weights=c["probability"][has])


CASES = [(parity, extra, adaptive) for parity in (0, 1) for extra in (0.0, 4.0) for adaptive in (False, True)]


@pytest.mark.parametrize("parity,extra,adaptive", CASES)
def test_crowded_run_gives_honest_calls(parity, extra, adaptive):
    """Measured (this model): every call at p >= 0.9 right in all eight cases (15-20 such calls),
    unlisted peaks' mean top probability 0.04-0.21, no compound summing above 1."""
    home, listed = crowded(parity)
    x = COMPILATION + extra  # the compilation already sits ~4 above the handbook: offsets of ~4 and ~8
    sl, xc, model, info, corr, _ = screen_run(home, PeakInput(x, mol_ion=MASS), 3.0, adaptive=adaptive)
    name, prob, flags = calls(sl, len(x))
    right = (name == NAMES) & listed
    confident = prob >= 0.9
    if confident.any():
        assert right[confident].mean() >= 0.9
    wrong_sure = (prob >= 0.95) & ~right
    assert all("review" in f.split(";") for f in flags[wrong_sure])
    assert prob[~listed].mean() <= 0.5
    assert compound_sums(sl).max() <= 1.0 + 1e-9
    if adaptive:
        assert corr["applied"], corr["notice"]
        assert right[listed].mean() >= 0.8
        assert (right & (prob >= 0.7))[listed].mean() >= 0.4


@pytest.mark.parametrize("parity,extra", [(p, e) for p in (0, 1) for e in (0.0, 4.0)])
def test_adaptive_never_ranks_fewer_listed_compounds_first(parity, extra):
    home, listed = crowded(parity)
    x = COMPILATION + extra
    plain = calls(screen_run(home, PeakInput(x, mol_ion=MASS), 3.0)[0], len(x))[0]
    adapt = calls(screen_run(home, PeakInput(x, mol_ion=MASS), 3.0, adaptive=True)[0], len(x))[0]
    assert ((adapt == NAMES) & listed).sum() >= ((plain == NAMES) & listed).sum()


def test_unlisted_sabinene_is_not_called_beta_pinene_with_confidence():
    """The case that started it: sabinene (not listed) 4 units from beta-pinene (listed), both m/z 136."""
    home, listed = crowded(0 if "beta-pinene" in NAMES[np.argsort(ADAMS)[0::2]] else 1)
    assert listed[list(NAMES).index("beta-pinene")] and not listed[list(NAMES).index("sabinene")]
    x = COMPILATION + 0.0
    sl, *_ = screen_run(home, PeakInput(x, mol_ion=MASS), 3.0)
    name, prob, flags = calls(sl, len(x))
    s = list(NAMES).index("sabinene")
    b = list(NAMES).index("beta-pinene")
    # the sabinene peak (975) lies closer to beta-pinene's library value (974) than beta-pinene's own
    # peak (979), so it may lead with beta-pinene, but the two peaks share the compound: never
    # confidently, and both go to review as contested (measured: 0.69 and 0.30)
    assert prob[s] < 0.9 and prob[s] + prob[b] <= 1.0 + 1e-9
    assert "contested" in flags[s] and "review" in flags[s]


def test_two_peaks_cannot_both_be_the_same_compound_with_confidence():
    snap = synthetic_snapshot([1000.0, 1100.0, 1200.0], phase_class="nonpolar")
    home = prepare(snap, "nonpolar")
    # 20 filler peaks far from the library so the run model has a run to learn from
    x = np.r_[996.0, 1004.0, 1100.0, 1200.0, np.linspace(1400, 2400, 20)]
    sl, *_ = screen_run(home, PeakInput(x), 3.0)
    c = sl.columns
    first = (c["compound"] == 0)
    p0 = c["probability"][first & (c["peak"] == 0)].sum()
    p1 = c["probability"][first & (c["peak"] == 1)].sum()
    assert p0 + p1 <= 1.0 + 1e-9
    assert p0 == pytest.approx(p1, abs=0.05)  # nearly symmetric around the entry: they share it
    flags = c["flags"][(c["rank"] == 1) & (c["peak"] <= 1)]
    assert all("contested" in f and "review" in f for f in flags)
    # relaxed for split peaks: each is scored alone
    sl2, *_ = screen_run(home, PeakInput(x), 3.0, exclusive=False)
    c2 = sl2.columns
    assert c2["probability"][(c2["compound"] == 0) & (c2["rank"] == 1)].sum() > 1.0


def test_planted_wrong_anchors_do_not_move_the_offset():
    """Unlisted isomers placed 5 units from listed compounds, in the run, with the listed compounds
    themselves present and offset by +6: the adaptive fit recovers -6 within 1 unit."""
    rng = np.random.default_rng(3)
    lib = np.sort(rng.uniform(900, 2000, 40))
    masses = rng.choice([136.0, 154.0, 204.0], 40)
    snap = synthetic_snapshot(lib, phase_class="slightly-polar", masses=masses)
    home = prepare(snap, "slightly-polar")
    decoys = lib[::3] + 5.0  # unlisted look-alikes, same molecular ion as their neighbour
    x = np.r_[lib + rng.normal(0, 1.0, 40), decoys] + 6.0
    mol = np.r_[masses, masses[::3]]
    sl, xc, model, info, corr, _ = screen_run(home, PeakInput(x, mol_ion=mol), 3.0, adaptive=True)
    assert corr["applied"], corr["notice"]
    shift = corr["a"] * 1450 + corr["b"]
    assert shift == pytest.approx(-6.0, abs=1.0)
    assert abs(corr["a"]) <= 0.01


def test_an_implausible_correction_is_refused_with_a_notice():
    snap = synthetic_snapshot(np.linspace(1000, 2000, 30), phase_class="nonpolar")
    home = prepare(snap, "nonpolar")
    ref = np.linspace(1000, 2000, 30)
    # anchors file saying the run is tilted by 3 % per index unit
    x = ref * 1.03 - 30.0
    sl, xc, model, info, corr, notices = screen_run(home, PeakInput(x), 3.0, adaptive=True,
                                                    user_anchors=(np.arange(30), ref, [f"c{i}" for i in range(30)]))
    assert not corr["applied"] and "refused" in corr["notice"]
    assert np.array_equal(xc, x)  # fell back to the plain screen


def test_crowding_prior_names_and_numbers():
    # common practice, our own presets: unlisted peaks per 100 index units
    assert crowding_density("sparse") == pytest.approx(0.01)
    assert crowding_density(None) == crowding_density("moderate") == pytest.approx(0.04)
    assert crowding_density("12") == pytest.approx(0.12)
    from matcher.errors import MatcherError

    for bad in ("busy", "-1", "nan", 0):
        with pytest.raises(MatcherError):
            crowding_density(bad)


def test_a_crowded_prior_lowers_a_single_query():
    from matcher.identify.query import query

    snap = synthetic_snapshot([1000.0], phase_class="nonpolar")
    sparse = query(1000.0, "nonpolar", snapshot=snap, crowding="sparse").candidates[0]["probability"]
    dense = query(1000.0, "nonpolar", snapshot=snap, crowding="dense").candidates[0]["probability"]
    assert sparse > 0.8 > 0.5 > dense


def test_a_hit_naming_a_compound_outside_the_library_is_evidence_for_unlisted():
    from matcher.identify.query import query

    snap = synthetic_snapshot([1000.0], phase_class="nonpolar", names=["alpha-pinene"])
    base = query(1000.0, "nonpolar", snapshot=snap).not_in_library
    other = query(1000.0, "nonpolar", snapshot=snap, hit="sabinene", hit_match=90).not_in_library
    named = query(1000.0, "nonpolar", snapshot=snap, hit="a-pinene", hit_match=90).not_in_library
    assert named < base < other


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 9), st.integers(0, 5), st.floats(-8, 8)), min_size=1, max_size=40))
def test_a_compounds_probabilities_over_a_run_never_sum_above_one(edges):
    seen = {}
    for p, c, w in edges:
        seen[(p, c)] = w
    peak = np.array([k[0] for k in seen])
    comp = np.array([k[1] for k in seen])
    logw = np.array(list(seen.values()))
    order = np.argsort(peak, kind="stable")
    prob, nil = assign(logw[order], peak[order], comp[order], 10)
    assert np.all(np.bincount(comp[order], weights=prob) <= 1.0 + 1e-9)
    per_peak = np.bincount(peak[order], weights=prob, minlength=10) + nil
    assert np.allclose(per_peak, 1.0)
    assert np.all(prob >= 0) and np.all(nil >= -1e-12)


def test_the_joint_posterior_equals_a_sum_over_all_assignments():
    """Brute force over every assignment of 4 peaks to 3 compounds (a loopy graph)."""
    import itertools

    rng = np.random.default_rng(1)
    peak = np.repeat(np.arange(4), 3)
    comp = np.tile(np.arange(3), 4)
    logw = rng.normal(0, 2, 12)
    w = np.exp(logw)
    z = 0.0
    marg = np.zeros(12)
    for choice in itertools.product(*[[None, 0, 1, 2]] * 4):
        used = [c for c in choice if c is not None]
        if len(used) != len(set(used)):
            continue
        wt = np.prod([w[p * 3 + c] for p, c in enumerate(choice) if c is not None])
        z += wt
        for p, c in enumerate(choice):
            if c is not None:
                marg[p * 3 + c] += wt
    prob, _ = assign(logw, peak, comp, 4)
    np.testing.assert_allclose(prob, marg / z, atol=1e-12)


def test_isothermal_time_at_or_before_the_holdup_time_is_refused():
    """Kováts (Helv. Chim. Acta 41, 1915, 1958): I needs log(tR - tM), undefined for tR <= tM."""
    from matcher.retention.calibration import calibrate
    from matcher.errors import MatcherError
    from matcher.retention.ladder import Ladder

    lad = Ladder("ladder.csv", "alkanes", np.array([2.0, 3.0, 5.0]), np.array([800.0, 900.0, 1000.0]),
                 ["octane", "nonane", "decane"], np.array([8, 9, 10]), np.array([1, 2, 3]))
    cal = calibrate(lad, mode="isothermal", dead_time=1.0)
    with pytest.raises(MatcherError, match="at or before the hold-up time"):
        cal.convert([0.9, 2.5])
    with pytest.raises(MatcherError, match="at or before the hold-up time"):
        cal.convert([1.0])
    with pytest.raises(MatcherError, match="not both"):
        calibrate(lad, mode="isothermal", dead_time=1.0, marker=0.9)


def test_the_crowded_self_check_with_the_librarys_spectra():
    """``matcher evaluate --crowded`` on a library with reference spectra: the 43 compounds of the published
    table (Adams' indices, from memory) with two constructed spectra each (tests/spectra_helpers.py: invented,
    NOT measured; the second a noisy replicate). Removed compounds keep none of their spectra in the library."""
    from matcher.chem.spectra import ReferenceSpectra
    from matcher.identify.evaluation import evaluate_crowded, evaluate_crowded_all
    from spectra_helpers import constructed_spectrum, noisy_unknown

    comp = CompoundTable.from_records([{"id": i + 1, "name": r["name"], "formula": r["formula"]}
                                       for i, r in enumerate(ROWS)])
    rng = np.random.default_rng(4)
    rows, spectra = [], []
    for i, r in enumerate(ROWS):
        ref = constructed_spectrum(r["name"], r["formula"])
        rows += [i, i]
        spectra += [ref, noisy_unknown(ref, r["formula"], rng, noise=0.15, strays=2)]
    refs = ReferenceSpectra.build(np.array(rows), spectra)
    snap = build_snapshot(comp, np.arange(1, len(ROWS) + 1), np.array(["slightly-polar"] * len(ROWS)), ADAMS)
    snap = type(snap)(snap.compounds, snap.classes, spectra=refs)
    plain = evaluate_crowded(snap, "slightly-polar", offset=4.0)
    spec = evaluate_crowded(snap, "slightly-polar", offset=4.0, with_spectra=True)
    assert spec["peaks"] == plain["peaks"] == 43 and spec["peaks_with_spectrum"] == 43
    # measured: index and molecular ion already rank every listed compound first here; the spectra make more
    # calls confident (15 -> 21), none wrong, and tell the removed (unlisted) isomers apart far better (mean top
    # probability on them 0.077 -> 0.009; probability error 0.071 -> 0.013)
    assert spec["listed_first"] >= plain["listed_first"] == 1.0
    assert spec["confident_calls"] > plain["confident_calls"] and spec["confident_precision"] == 1.0
    assert spec["mean_top_probability_removed"] < plain["mean_top_probability_removed"] / 2
    assert spec["ece"] < plain["ece"]
    assert spec["max_compound_sum"] <= 1.0 + 1e-9
    both = evaluate_crowded_all(snap, "slightly-polar")
    assert set(both["classes"]["slightly-polar"]) == {"plain", "adaptive", "spectra"}
