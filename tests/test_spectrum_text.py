"""The ``spectrum`` cell format (m/z:intensity pairs) and its reading in peak tables."""

import numpy as np
import pytest
from hypothesis import given, strategies as st

from matcher.errors import InputError
from matcher.io.spectrum_text import format_spectrum_text, parse_spectrum_text
from matcher.io.peak_tables import read_peaks


def test_pairs_sorted_and_separators():
    mz, y = parse_spectrum_text(" 93:45;68:100,  41:12.5 ")
    assert mz.tolist() == [41.0, 68.0, 93.0]
    assert y.tolist() == [12.5, 100.0, 45.0]


@pytest.mark.parametrize("bad, word", [("93", "m/z:intensity"), ("0:5", "between 1"), ("93:-1", "at least 0"),
                                       ("93:1 93:2", "twice"), ("a:b", "m/z:intensity"), ("93:nan", "at least 0")])
def test_bad_pairs_refused(bad, word):
    with pytest.raises(ValueError, match=word):
        parse_spectrum_text(bad)


@given(st.dictionaries(st.integers(1, 5000), st.floats(0, 1e9, allow_nan=False), min_size=1, max_size=50))
def test_round_trip_is_lossless(d):
    mz = np.array(list(d), dtype=float)
    y = np.array(list(d.values()))
    back = parse_spectrum_text(format_spectrum_text(mz, y))
    order = np.argsort(mz)
    assert back[0].tolist() == mz[order].tolist()
    assert back[1].tolist() == y[order].tolist()


def test_peak_table_spectrum_column(tmp_path):
    f = tmp_path / "p.csv"
    f.write_text("peak,rt,spectrum\n1,5.0,41:10 93:100\n2,6.0,\n")
    t = read_peaks(str(f))
    assert t.spectra[0][0].tolist() == [41.0, 93.0] and t.spectra[1] is None
    f.write_text("peak,rt,spectrum\n1,5.0,41:10 93:x\n")
    with pytest.raises(InputError) as e:
        read_peaks(str(f))
    assert "spectrum" in str(e.value) and "line 2" in str(e.value)


def test_peak_table_without_spectra_has_none(tmp_path):
    f = tmp_path / "p.csv"
    f.write_text("peak,rt\n1,5.0\n")
    assert read_peaks(str(f)).spectra == ()


@given(st.lists(st.one_of(
    st.just(""), st.just("93:45 68:100, 41:12"), st.just("93"), st.just("0:5"), st.just("93:1 93:2"), st.just("1:2:3 4:5"),
    st.just("93 :45"), st.just("41:1e400"),
    st.dictionaries(st.integers(1, 5000), st.floats(0, 1e9, allow_nan=False), min_size=1, max_size=20).map(
        lambda d: " ".join(f"{k}:{v!r}" for k, v in d.items()))), max_size=12))
def test_column_parse_agrees_with_the_cell_parse(cells):
    """The vectorised column reading gives exactly what the one-cell reading gives, or the same refusal."""
    from matcher.io.spectrum_text import parse_spectrum_cells

    expected, error = [], None
    for c in cells:
        try:
            expected.append(parse_spectrum_text(c))
        except ValueError as exc:
            error = error or str(exc)
    if error:
        with pytest.raises(ValueError):
            parse_spectrum_cells(cells)
        return
    got = parse_spectrum_cells(cells)
    for a, b in zip(got, expected):
        assert (a is None) == (b is None)
        if a is not None:
            assert a[0].tolist() == b[0].tolist() and a[1].tolist() == b[1].tolist()
