"""Property-based tests (hypothesis) for the readers and formulas of the retention-index side.

Readers: whatever bytes or text arrive, the only exception is
:class:`~matcher.errors.InputError` (or another :class:`MatcherError`), whose
text is one line; what is accepted obeys the documented limits. Formulas:
the invariances that follow from the published equations.
"""

from __future__ import annotations

import csv
import io
import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from matcher.retention.calibration import Calibration, calibrate
from matcher.errors import InputError, MatcherError
from matcher.retention.kovats import kovats, kovats_index
from matcher.retention.ladder import read_ladder
from matcher.retention.linear_index import linear_index, van_den_dool_kratz
from matcher.io.peak_tables import MAX_MZ, MAX_RI, MAX_RT_MIN, parse_ions, read_peaks
from matcher.report.index_files import convert_times
from matcher.io.delimited import ECHO_LIMIT, echo, load_table, texts

FIXTURE = dict(deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def one_line(exc: Exception) -> None:
    s = str(exc)
    assert "\n" not in s and "\r" not in s and s.strip()


def put(tmp_path, name, data) -> str:
    p = tmp_path / name
    p.write_bytes(data if isinstance(data, bytes) else data.encode("utf-8"))
    return str(p)


# --------------------------------------------------------------------------- readers on arbitrary input

HEADERS = [b"", b"peak,rt\n", b"peak;rt;ri;mol_ion\n", b"\xef\xbb\xbfpeak,ri\n", b"rt,carbons\n", b"rt\tindex\tname\n"]


@settings(max_examples=150, **FIXTURE)
@given(st.sampled_from(HEADERS), st.binary(max_size=300))
def test_read_peaks_on_arbitrary_bytes_raises_only_input_error(tmp_path, head, blob):
    p = put(tmp_path, "p.csv", head + blob)
    try:
        t = read_peaks(p)
    except InputError as exc:
        one_line(exc)
        return
    # accepted: every documented limit holds
    assert len(t) > 0
    rt, ri = t.rt[~np.isnan(t.rt)], t.ri[~np.isnan(t.ri)]
    assert np.all((rt > 0) & (rt <= MAX_RT_MIN)) and np.all((ri >= 0) & (ri <= MAX_RI))
    assert np.all(np.isnan(t.rt) <= ~np.isnan(t.ri))  # each peak has a time or an index
    assert len(set(t.peak.tolist())) == len(t)


@settings(max_examples=150, **FIXTURE)
@given(st.sampled_from(HEADERS), st.binary(max_size=300))
def test_read_ladder_on_arbitrary_bytes_raises_only_input_error(tmp_path, head, blob):
    p = put(tmp_path, "l.csv", head + blob)
    try:
        lad = read_ladder(p)
    except MatcherError as exc:
        one_line(exc)
        return
    assert len(lad.rt) >= 2
    order = np.argsort(lad.index)
    assert np.all(np.diff(lad.rt[order]) > 0)  # accepted ladders rise strictly


cells = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr), st.integers(-5, 60).map(str),
                  st.sampled_from(["", "x", "1,5", "9" * 400, "-0", "1e-320", " 7 "]))


@settings(max_examples=150, **FIXTURE)
@given(st.lists(st.tuples(cells, cells), min_size=0, max_size=8), st.sampled_from(["programmed", "isothermal"]))
def test_ladder_and_calibration_from_arbitrary_numbers(tmp_path, rows, mode):
    """Random ladders: refused with one MatcherError, or calibrated with standards mapping to themselves."""
    body = "rt;carbons\n" + "".join(f"{a};{b}\n" for a, b in rows)
    p = put(tmp_path, "l.csv", body)
    try:
        cal = calibrate(read_ladder(p), mode=mode)
    except MatcherError as exc:
        one_line(exc)
        return
    out = convert_times(cal, times=[repr(float(t)) for t in cal.rt])
    assert np.allclose(out["ri"], cal.index, atol=1e-6)
    assert not np.any(out["extrapolated"])


@settings(max_examples=150, **FIXTURE)
@given(st.binary(max_size=400))
def test_calibration_load_on_arbitrary_bytes(tmp_path, blob):
    p = put(tmp_path, "c.json", blob)
    with pytest.raises(InputError) as ei:
        Calibration.load(p)
    one_line(ei.value)


json_values = st.recursive(st.none() | st.booleans() | st.floats() | st.integers() | st.text(max_size=8),
                           lambda inner: st.lists(inner, max_size=3) | st.dictionaries(st.text(max_size=6), inner, max_size=3),
                           max_leaves=8)


@pytest.fixture(scope="module")
def good_calibration(tmp_path_factory):
    d = tmp_path_factory.mktemp("cal")
    p = d / "l.csv"
    p.write_text("rt,carbons\n4.12,8\n6.30,9\n8.50,10\n10.60,11\n", encoding="utf-8")  # invented times
    return calibrate(read_ladder(str(p)), mode="programmed").to_dict()


def _paths(d, prefix=()):
    if isinstance(d, dict):
        for k, v in d.items():
            yield prefix + (k,)
            yield from _paths(v, prefix + (k,))
    elif isinstance(d, list):
        for i, v in enumerate(d):
            yield prefix + (i,)
            yield from _paths(v, prefix + (i,))


@settings(max_examples=200, **FIXTURE)
@given(st.data())
def test_calibration_with_one_field_damaged_loads_or_raises_input_error(tmp_path, good_calibration, data):
    """A hand-edited calibration file: any one value replaced by any JSON value."""
    d = json.loads(json.dumps(good_calibration))
    paths = list(_paths(d))
    path = data.draw(st.sampled_from(paths))
    new = data.draw(json_values)
    node = d
    for k in path[:-1]:
        node = node[k]
    node[path[-1]] = new
    p = put(tmp_path, "c.json", json.dumps(d, allow_nan=True))
    try:
        cal = Calibration.load(p)
    except InputError as exc:
        one_line(exc)
        return
    assert np.all(np.diff(cal.rt) > 0) and np.all(np.diff(cal.index) > 0)
    out = convert_times(cal, times=["5.0"])
    assert out["ri"].shape == (1,)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.text(max_size=12), max_size=6))
def test_time_arguments_raise_only_input_error(times):
    from matcher.report.index_files import _parse_time_args

    try:
        v = _parse_time_args(times, None)
    except InputError as exc:
        one_line(exc)
        return
    assert np.all(np.isfinite(v) & (v > 0))


@settings(max_examples=300, deadline=None)
@given(st.text(max_size=40))
def test_parse_ions_accepts_only_whole_mz_in_range(text):
    try:
        ions = parse_ions(text)
    except ValueError:
        return
    assert all(isinstance(i, int) and 1 <= i <= MAX_MZ for i in ions)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.integers(1, MAX_MZ), max_size=10), st.sampled_from([" ", ";", ", ", " ; "]))
def test_parse_ions_round_trip(ions, sep):
    assert parse_ions(sep.join(map(str, ions))) == tuple(ions)


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=300), st.integers(5, 80))
def test_echo_is_one_short_line(text, limit):
    s = echo(text, limit)
    assert "\n" not in s and "\r" not in s
    assert len(s) <= 10 * (limit + 3) + 30  # repr may escape a character into up to 10


@settings(max_examples=200, deadline=None)
@given(st.text(), st.text(max_size=30), st.none() | st.integers(1, 10**6), st.none() | st.text(max_size=30))
def test_input_error_text_is_always_one_line(message, file, row, column):
    assume(message.strip())
    file = "".join(ch for ch in file if ch.isprintable())  # a line break in a file name: see the next test
    e = InputError(message, file=file or None, row=row, line=None if row is None else row + 1, column=column)
    assert len(str(e).splitlines()) == 1


@settings(max_examples=50, deadline=None)
@given(st.sampled_from(["\n", "\r", "\u2028", "\x85"]))
def test_input_error_with_a_line_break_in_the_file_name_is_one_line(brk):
    e = InputError("empty file", file=f"run{brk}42.csv", row=3, line=4, column="rt")
    assert len(str(e).splitlines()) == 1


# --------------------------------------------------------------------------- load_table round trip

cell_text = st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs", "Cc"), exclude_characters="\ufeff")
                    | st.sampled_from(list(',;\t"\n')), min_size=1, max_size=15).map(str.strip).filter(bool)


@settings(max_examples=150, **FIXTURE)
@given(st.lists(st.lists(cell_text, min_size=3, max_size=3), min_size=1, max_size=6),
       st.sampled_from([",", ";", "\t"]), st.sampled_from(["utf-8", "utf-8-sig", "utf-16"]))
def test_table_written_by_csv_module_reads_back(tmp_path, rows, delim, encoding):
    """Any table the csv module writes (quoting as needed) reads back cell for cell."""
    assume(all(not r[0].startswith("#") for r in rows))
    buf = io.StringIO()
    w = csv.writer(buf, delimiter=delim, lineterminator="\n")
    w.writerow(["peak", "name", "note"])
    w.writerows(rows)
    p = put(tmp_path, "t.csv", buf.getvalue().encode(encoding))
    try:
        raw = load_table(p)
    except InputError as exc:  # only the 1,000-character limit may refuse such a table
        pytest.fail(f"refused: {exc}")
    assert raw.header == ["peak", "name", "note"]
    assert raw.delimiter == delim
    assert [texts(raw, h) for h in raw.header] == [[r[i] for r in rows] for i in range(3)]


# --------------------------------------------------------------------------- formulas

pos = st.floats(0.05, 500.0)


@settings(max_examples=300, deadline=None)
@given(pos, pos, pos, st.integers(4, 40), st.integers(1, 5), st.floats(0.0, 2.0), st.floats(0.01, 100.0))
def test_kovats_invariant_under_scaling_adjusted_times(a, b, c, n, dn, tm, k):
    """Kovats, Helv. Chim. Acta 41, 1915 (1958): I depends on ratios of adjusted times only,
    so multiplying every t' = tR - tM by one factor leaves I unchanged."""
    tn, tx, tN = sorted([a, b, c])
    assume(tN / tn > 1.01)
    N = n + dn
    i1 = kovats(tm + tx, tm + tn, tm + tN, n, N, tm)
    i2 = kovats(tm + k * tx, tm + k * tn, tm + k * tN, n, N, tm)
    assert i1 == pytest.approx(i2, abs=1e-6)
    assert 100 * n - 1e-6 <= i1 <= 100 * N + 1e-6  # a bracketed compound lies between its standards
    assert kovats(tm + tn, tm + tn, tm + tN, n, N, tm) == pytest.approx(100 * n)
    assert kovats(tm + tN, tm + tn, tm + tN, n, N, tm) == pytest.approx(100 * N)


@settings(max_examples=300, deadline=None)
@given(pos, pos, pos, st.integers(4, 40), st.integers(1, 5), st.floats(-50.0, 50.0), st.floats(0.01, 100.0))
def test_linear_index_invariant_under_affine_time_changes(a, b, c, n, dn, shift, k):
    """van den Dool & Kratz, J. Chromatogr. 11, 463 (1963): I is linear in time between the
    standards, so any shift of the time origin (tM cancels) or change of unit leaves it unchanged."""
    tn, tx, tN = sorted([a, b, c])
    assume(tN - tn > 1e-3)
    N = n + dn
    i1 = van_den_dool_kratz(tx, tn, tN, n, N)
    i2 = van_den_dool_kratz(k * tx + shift, k * tn + shift, k * tN + shift, n, N)
    assert i1 == pytest.approx(i2, abs=1e-6)
    assert 100 * n - 1e-6 <= i1 <= 100 * N + 1e-6


ladders = st.lists(st.floats(0.05, 5.0), min_size=2, max_size=12).map(lambda d: np.cumsum(d) + 1.0)


@settings(max_examples=200, deadline=None)
@given(ladders, st.floats(0.01, 0.9), st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=1, max_size=20))
def test_vectorised_indices_match_the_scalar_formulas(t_std, tm_frac, raw_times):
    """The array functions agree with the scalar published formulas for every bracketed time,
    and times at or before the hold-up time give NaN (never an exception)."""
    i_std = 100.0 * (np.arange(len(t_std)) + 6)
    tm = tm_frac * t_std[0]
    times = np.array(raw_times)
    ri_l, _ = linear_index(times, t_std, i_std)
    ri_k, _ = kovats_index(times, t_std, i_std, tm)
    assert np.all(np.isnan(ri_k[times <= tm]))
    for t, rl, rk in zip(times, ri_l, ri_k):
        j = np.searchsorted(t_std, t)
        if 1 <= j < len(t_std) and t_std[j - 1] <= t <= t_std[j]:
            n, N = i_std[j - 1] / 100, i_std[j] / 100
            assert rl == pytest.approx(van_den_dool_kratz(t, t_std[j - 1], t_std[j], n, N), abs=1e-6)
            assert rk == pytest.approx(kovats(t, t_std[j - 1], t_std[j], n, N, tm), abs=1e-6)
    assert np.all(np.isfinite(ri_l))
