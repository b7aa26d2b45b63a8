"""Hold-up time: Peterson & Hirsch and least squares recover exact values from exact data."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matcher.errors import MatcherError
from matcher.retention.holdup import equally_spaced_triple, fit_holdup, peterson_hirsch, resolve_holdup
from matcher.retention.kovats import kovats_index


def exact(tm, a, b, carbons):
    # isothermal retention: t' = a b^n (Kovats 1958; Peterson & Hirsch 1959)
    return tm + a * b ** (np.asarray(carbons, dtype=float) - carbons[0])


def test_peterson_hirsch_formula_exact():
    # Peterson & Hirsch, J. Lipid Res. 1, 132 (1959): tM = (t1 t3 - t2^2)/(t1 + t3 - 2 t2)
    t1, t2, t3 = exact(1.25, 0.6, 1.8, [8, 9, 10])
    assert peterson_hirsch(t1, t2, t3) == pytest.approx(1.25, abs=1e-12)
    # hand check: t = 2, 3, 5 gives (10 - 9)/(7 - 6) = 1
    assert peterson_hirsch(2.0, 3.0, 5.0) == pytest.approx(1.0)


def test_peterson_hirsch_refuses_linear_spacing():
    with pytest.raises(MatcherError, match="spacing grows"):
        peterson_hirsch(2.0, 4.0, 6.0)


def test_equally_spaced_triple_for_gapped_ladder():
    assert equally_spaced_triple([700, 800, 1000, 1300]) == (0, 2, 3)  # 700, 1000, 1300: the widest span
    i, j, k = equally_spaced_triple([700, 800, 1000, 1300])
    idx = [700, 800, 1000, 1300]
    assert idx[j] - idx[i] == idx[k] - idx[j]
    with pytest.raises(MatcherError):
        equally_spaced_triple([700, 800, 1000])


def test_fit_recovers_exact_holdup_and_indices_within_005():
    # Issue acceptance: estimated tM reproduces indices to 0.05 on exact data.
    carbons = np.array([8, 9, 10, 11, 12, 14, 16])
    tm = 1.137
    t = exact(tm, 0.42, 1.63, carbons)
    h = fit_holdup(t, 100 * carbons)
    assert h.value == pytest.approx(tm, abs=1e-6)
    x = np.array([850.0, 1234.0, 1590.0])
    tx = tm + 0.42 * 1.63 ** (x / 100 - 8)
    ri, _ = kovats_index(tx, t, 100.0 * carbons, h.value)
    assert np.max(np.abs(ri - x)) < 0.05


@settings(max_examples=60, deadline=None)
@given(st.floats(0.2, 3.0), st.floats(0.05, 2.0), st.floats(1.2, 2.5), st.integers(3, 12))
def test_fit_property_exact_data(tm, a, b, n):
    carbons = np.arange(6, 6 + n)
    t = exact(tm, a, b, carbons)
    h = fit_holdup(t, 100 * carbons)
    x = 100 * carbons[0] + np.linspace(0, 100 * (n - 1), 9)
    tx = tm + a * b ** (x / 100 - carbons[0])
    ri, _ = kovats_index(tx, t, 100.0 * carbons, h.value)
    assert np.max(np.abs(ri - x)) < 0.05


def test_fit_needs_three_standards():
    with pytest.raises(MatcherError, match="three"):
        fit_holdup([2.0, 3.0], [800, 900])


def test_resolve_given_marker_and_defaults():
    t = exact(1.0, 0.5, 1.6, [8, 9, 10, 11])
    assert resolve_holdup(t, [800, 900, 1000, 1100], method=None, dead_time=0.9).method == "given"
    assert resolve_holdup(t, [800, 900, 1000, 1100], method=None, marker=0.95).method == "marker"
    h = resolve_holdup(t, [800, 900, 1000, 1100], method=None)
    assert h.method == "fit" and h.value == pytest.approx(1.0, abs=1e-6)
    ph = resolve_holdup(t, [800, 900, 1000, 1100], method="peterson-hirsch")
    assert ph.value == pytest.approx(1.0, abs=1e-9)
    with pytest.raises(MatcherError, match="not before the first standard"):
        resolve_holdup(t, [800, 900, 1000, 1100], method="given", dead_time=5.0)
    with pytest.raises(MatcherError, match="needs --marker"):
        resolve_holdup(t, [800, 900, 1000, 1100], method="marker")
