"""The peak table reader: lab header spellings, units and refusals."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from matcher.errors import InputError, MatcherError
from matcher.io.peak_tables import read_peaks, time_unit


def pk(tmp_path, text, name="peaks.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return str(p)


def test_canonical_columns(tmp_path):
    t = read_peaks(pk(tmp_path, "peak,rt,mol_ion,ions,hit,hit_match,area\n"
                                "p1,5.2,136,93 121;136,limonene,91,1200\np2,6.1,,,,,\n"))
    assert t.peak.tolist() == ["p1", "p2"] and t.rt.tolist() == [5.2, 6.1]
    assert t.ions == ((93, 121, 136), ()) and t.hit.tolist() == ["limonene", ""]
    assert t.mol_ion[0] == 136 and np.isnan(t.mol_ion[1]) and t.hit_match[0] == 91
    assert t.has_rt and not t.has_ri


@pytest.mark.parametrize("header,unit", [
    ("Ret. time (min)", "min"), ("Retention time [s]", "s"), ("RT", "min"), ("R.T.", "min"),
    ("Retention Time", "min"), ("RT (sec)", "s"), ("rt_seconds", "s"),
])
def test_lab_spellings_and_units(tmp_path, header, unit):
    t = read_peaks(pk(tmp_path, f"Peak #,{header},M+,Library hit,Match,Area\n1,300,136,limonene,88,5\n"))
    assert t.rt[0] == pytest.approx(5.0 if unit == "s" else 300.0)
    assert t.mol_ion[0] == 136 and t.hit[0] == "limonene" and t.hit_match[0] == 88 and t.area[0] == 5
    assert (unit == "s") == ("header" in t.rt_unit_source and unit == "s")


def test_rt_unit_override_and_generated_ids(tmp_path):
    t = read_peaks(pk(tmp_path, "RT [s]\n120\n240\n"), rt_unit="min")
    assert t.rt.tolist() == [120.0, 240.0] and t.peak.tolist() == ["1", "2"]
    assert t.rt_unit_source == "option (--rt-unit min)"


def test_ri_only_table(tmp_path):
    t = read_peaks(pk(tmp_path, "No.,RI\n1,1031\n2,1100\n"))
    assert t.has_ri and not t.has_rt and t.ri.tolist() == [1031.0, 1100.0] and np.isnan(t.rt).all()


def test_semicolon_decimal_comma_and_bom(tmp_path):
    p = tmp_path / "eu.csv"
    p.write_bytes("\ufeffPeak;RT (min);Area\n1;5,25;10,5\n".encode("utf-8"))
    t = read_peaks(str(p))
    assert t.rt.tolist() == [5.25] and t.area.tolist() == [10.5]


def test_map_override(tmp_path):
    t = read_peaks(pk(tmp_path, "id,Apex,other\n1,5.5,2\n"), overrides={"rt": "Apex"})
    assert t.rt.tolist() == [5.5]


@pytest.mark.parametrize("text,match,row,column", [
    ("peak,area\n1,2\n", "neither a retention-time column", None, None),
    ("peak,rt\n1,5\n1,6\n", "duplicate peak id '1'", 2, "peak"),
    ("peak,rt\n1,5\n2,-1\n", "must be positive", 2, "rt"),
    ("peak,rt\n1,0\n", "must be positive", 1, "rt"),
    ("peak,rt\n1,nan\n", "finite", 1, "rt"),
    ("peak,rt\n1,inf\n", "finite", 1, "rt"),
    ("peak,rt\n1,abc\n", "not a number: 'abc'", 1, "rt"),
    ("peak,rt\n1,\n", "empty cell", 1, "rt"),
    ("peak,rt\n1,1e9\n", "at most 10000", 1, "rt"),
    ("peak,ri\n1,-5\n", "at least 0", 1, "ri"),
    ("peak,ri\n1,123456\n", "at most 10000", 1, "ri"),
    ("peak,rt,hit_match\n1,5,130\n", "at most 100", 1, "hit_match"),
    ("peak,rt,mol_ion\n1,5,136.5\n", "whole number", 1, "mol_ion"),
    ("peak,rt,ions\n1,5,93 x\n", "not an ion", 1, "ions"),
    ("peak,rt\n", "no peaks", None, None),  # header only: nothing to screen is refused
])
def test_refusals(tmp_path, text, match, row, column):
    path = pk(tmp_path, text)
    with pytest.raises(InputError, match=match) as ei:
        read_peaks(path)
    assert ei.value.row == row and ei.value.column == column and ei.value.file == path


def test_time_unit_rules():
    assert time_unit("Retention time (s)")[0] == "s"
    assert time_unit("time sec")[0] == "s"
    assert time_unit("RT min")[0] == "min"
    with pytest.raises(MatcherError, match="--rt-unit must be one of min, s; got 'hours'"):
        time_unit("rt", "hours")


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.text(max_size=200))
def test_arbitrary_text_only_raises_input_error(tmp_path, text):
    p = tmp_path / "h.csv"
    p.write_text("peak,rt,ions,hit_match\n" + text, encoding="utf-8")
    try:
        read_peaks(str(p))
    except InputError:
        pass
