"""Kovats and van den Dool & Kratz indices against their published forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matcher.retention.kovats import kovats, kovats_index
from matcher.retention.linear_index import linear_index, van_den_dool_kratz


def test_n_alkane_index_is_100n_on_any_phase():
    # Definition of the retention index: an n-alkane with n carbons has I = 100 n on every
    # stationary phase (Kovats, Helv. Chim. Acta 41, 1915, 1958). Two invented phases:
    carbons = np.array([8, 9, 10, 12, 14])
    for tm, a, b in [(0.9, 0.4, 1.55), (1.3, 0.2, 2.1)]:
        t = tm + a * b ** (carbons - 8)
        ri, ext = kovats_index(t, t, 100.0 * carbons, tm)
        assert np.allclose(ri, 100.0 * carbons, atol=1e-9) and not ext.any()
        ri, ext = linear_index(t, t, 100.0 * carbons)
        assert np.allclose(ri, 100.0 * carbons, atol=1e-9) and not ext.any()


def test_kovats_published_form_with_non_adjacent_standards():
    # Kovats (1958) general form: I = 100[n + (N-n)(log t'x - log t'n)/(log t'N - log t'n)], N = n + 2 here.
    tm, tn, tN, tx = 1.0, 3.0, 9.0, 5.0
    expected = 100 * (10 + 2 * (math.log10(tx - tm) - math.log10(tn - tm)) / (math.log10(tN - tm) - math.log10(tn - tm)))
    assert kovats(tx, tn, tN, 10, 12, tm) == pytest.approx(expected, abs=1e-9)
    ri, ext = kovats_index([tx], [tn, tN], [1000.0, 1200.0], tm)
    assert ri[0] == pytest.approx(expected, abs=1e-9) and not ext[0]
    # hand value: log(4/2)/log(8/2) = 0.5 exactly, so I = 1100
    assert expected == pytest.approx(1100.0, abs=1e-9)


def test_kovats_exact_exponential_data_gives_exact_indices():
    # On exact data t' = a b^(I/100) the Kovats index of any compound is its own I (Kovats 1958).
    tm, a, b = 0.85, 0.3, 1.7
    std_i = np.array([700.0, 800, 900, 1100, 1400])  # gaps: no C10, C12, C13
    t = lambda i: tm + a * b ** (np.asarray(i) / 100.0)
    x = np.array([712.3, 955.5, 1234.56, 1399.0])
    ri, ext = kovats_index(t(x), t(std_i), std_i, tm)
    assert np.allclose(ri, x, atol=1e-8) and not ext.any()


def test_van_den_dool_kratz_published_form_gapped():
    # van den Dool & Kratz (J. Chromatogr. 11, 463, 1963): I = 100[n + (N-n)(tx-tn)/(tN-tn)].
    assert van_den_dool_kratz(12.5, 10.0, 14.0, 10, 12) == pytest.approx(1125.0)
    t_std = np.array([5.0, 9.0, 17.0, 20.0])
    i_std = np.array([800.0, 1000, 1400, 1500])
    tx = np.array([6.0, 13.0, 19.0])
    ri, ext = linear_index(tx, t_std, i_std)
    want = [van_den_dool_kratz(6.0, 5, 9, 8, 10), van_den_dool_kratz(13.0, 9, 17, 10, 14), van_den_dool_kratz(19.0, 17, 20, 14, 15)]
    assert np.allclose(ri, want, atol=1e-9) and not ext.any()


def test_linear_index_matches_numpy_interp_inside_the_ladder():
    # General-purpose reference: numpy.interp is piecewise-linear interpolation.
    rng = np.random.default_rng(3)
    t_std = np.cumsum(rng.uniform(0.5, 3.0, 12)) + 2
    i_std = 100.0 * np.arange(6, 18)
    tx = rng.uniform(t_std[0], t_std[-1], 10_000)
    ri, ext = linear_index(tx, t_std, i_std)
    assert np.allclose(ri, np.interp(tx, t_std, i_std), atol=1e-9) and not ext.any()


def test_outside_the_ladder_uses_the_nearest_pair_and_is_flagged():
    t_std, i_std = np.array([4.0, 6.0, 10.0]), np.array([900.0, 1000.0, 1100.0])
    ri, ext = linear_index([2.0, 4.0, 10.0, 12.0], t_std, i_std)
    assert ri.tolist() == [800.0, 900.0, 1100.0, 1150.0]
    assert ext.tolist() == [True, False, False, True]


def test_kovats_before_holdup_is_nan_and_flagged():
    ri, ext = kovats_index([0.5, 1.0, 2.5], [2.0, 3.0], [800.0, 900.0], 1.0)
    assert math.isnan(ri[0]) and math.isnan(ri[1]) and ext[:2].all()
    assert np.isfinite(ri[2])


ladders = st.lists(st.floats(0.05, 5.0), min_size=2, max_size=15).map(lambda d: np.cumsum(d) + 1.0)


@settings(max_examples=200, deadline=None)
@given(ladders, st.lists(st.floats(0.01, 200.0), min_size=1, max_size=50), st.sampled_from(["programmed", "isothermal"]))
def test_properties_monotone_exact_at_standards_flag_outside(t_std, times, mode):
    i_std = 100.0 * (np.arange(len(t_std)) + 7)
    tx = np.sort(np.array(times))
    if mode == "isothermal":
        tm = 0.5
        conv = lambda t: kovats_index(t, t_std, i_std, tm)
    else:
        conv = lambda t: linear_index(t, t_std, i_std)
    ri, ext = conv(tx)
    ok = np.isfinite(ri)
    assert np.all(np.diff(ri[ok]) >= -1e-9)                  # the index rises with time
    assert np.array_equal(ext, (tx < t_std[0]) | (tx > t_std[-1]))  # flagged exactly outside
    ri_s, ext_s = conv(t_std)
    assert np.allclose(ri_s, i_std, rtol=0, atol=1e-9) and not ext_s.any()  # standards map to themselves
