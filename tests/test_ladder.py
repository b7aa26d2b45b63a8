"""Ladder files: hard checks refuse, soft checks name the probable problem."""

from __future__ import annotations

import numpy as np
import pytest

from matcher.errors import InputError
from matcher.retention.ladder import check_ladder, read_ladder


def lad(tmp_path, text, name="ladder.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return str(p)


# invented demo ladder (programmed oven, roughly even spacing)
GOOD = "rt,carbons,name\n3.10,8,octane\n5.02,9,nonane\n7.15,10,decane\n9.20,11,undecane\n11.18,12,dodecane\n13.05,13,tridecane\n"


def test_reads_and_assigns_100n(tmp_path):
    # n-alkanes: I = 100 n (Kovats 1958, definition)
    L = read_ladder(lad(tmp_path, GOOD))
    assert L.series == "alkanes"
    assert L.index.tolist() == [800.0, 900, 1000, 1100, 1200, 1300]
    assert L.names[0] == "octane" and L.rt_unit == "min"


def test_unsorted_rows_are_sorted_by_index(tmp_path):
    L = read_ladder(lad(tmp_path, "rt,carbons\n7.15,10\n3.10,8\n5.02,9\n"))
    assert L.rt.tolist() == [3.10, 5.02, 7.15] and L.rows.tolist() == [2, 3, 1]


def test_seconds_from_header_and_option(tmp_path):
    L = read_ladder(lad(tmp_path, "RT [s],carbons\n186,8\n301.2,9\n"))
    assert L.rt.tolist() == pytest.approx([3.1, 5.02]) and L.rt_unit == "s"
    L2 = read_ladder(lad(tmp_path, "rt,carbons\n186,8\n301.2,9\n", "b.csv"), rt_unit="s")
    assert L2.rt.tolist() == pytest.approx([3.1, 5.02])


@pytest.mark.parametrize("text,match,row,column", [
    ("rt,carbons\n3.1,8\n2.9,9\n", "retention goes backwards", 2, "rt"),
    ("rt,carbons\n3.1,8\n3.1,9\n", "tied retention times", 2, "rt"),
    ("rt,carbons\n3.1,8\n4.0,9\n5.0,9\n", "duplicate chain length 9", 3, "carbons"),
    ("rt,carbons\n3.1,8\n4.0,8.5\n", "whole number", 2, "carbons"),
    ("rt,carbons\n3.1,8\n", "at least two standards", None, None),
    ("rt,carbons\n3.1,8\nabc,9\n", "not a number", 2, "rt"),
    ("rt,carbons\n-3.1,8\n4,9\n", "positive", 1, "rt"),
    ("rt,name\n3.1,x\n4,y\n", "no 'carbons' or 'index' column", None, None),
    ("time_of_day,carbons\n3,8\n4,9\n", "no retention-time column", None, None),
])
def test_hard_checks_refuse_with_location(tmp_path, text, match, row, column):
    with pytest.raises(InputError, match=match) as ei:
        read_ladder(lad(tmp_path, text))
    assert ei.value.row == row and ei.value.column == column
    assert "\n" not in str(ei.value)


def test_missing_standard_is_named(tmp_path):
    # C11 skipped while the labels run on (C12 label on the real C11 peak's neighbour): spacing doubles.
    rt = np.array([2.0, 4.0, 6.0, 10.0, 12.0, 14.0])
    qc = check_ladder(rt, 100.0 * np.arange(8, 14), names=[f"C{n}" for n in range(8, 14)])
    codes = [(f["code"], f["standard"]) for f in qc.findings]
    assert codes == [("probable-missing-standard", "C11")]
    assert qc.flags[3] == "missing?"


def test_mislabelled_standard_is_named():
    # C11 recorded at a time far off the even spacing of its neighbours
    rt = np.array([2.0, 4.0, 6.0, 9.5, 10.0, 12.0, 14.0])
    qc = check_ladder(rt, 100.0 * np.arange(8, 15), names=[f"C{n}" for n in range(8, 15)])
    assert [(f["code"], f["standard"]) for f in qc.findings if f["level"] == "warning"] == [("probable-mislabel", "C11")]


def test_sound_ladder_has_no_warnings_and_zero_isothermal_residuals():
    c = np.arange(8, 16)
    t = 0.9 + 0.4 * 1.7 ** (c - 8)
    qc = check_ladder(t, 100.0 * c, mode="isothermal", holdup=0.9)
    assert not [f for f in qc.findings if f["level"] == "warning"]
    assert max(abs(v) for v in qc.fit_residual) < 1e-6
    assert max(abs(v) for v in qc.loo_residual if v is not None) < 1e-6
    qc2 = check_ladder(np.linspace(3, 30, 12), 100.0 * np.arange(6, 18))
    assert not qc2.findings and qc2.index_range == (600.0, 1700.0)


def test_gaps_are_reported():
    qc = check_ladder(np.array([2.0, 4.0, 8.0, 10.0]), np.array([800.0, 900, 1100, 1200]))
    assert qc.gaps == [{"from": 900.0, "to": 1100.0, "missing": ["C10"]}]


def test_fame_pah_and_custom_series(tmp_path):
    # FAME: ECL of saturated straight-chain FAMEs = chain length (Miwa et al., Anal. Chem. 32, 1739, 1960); x100 here
    F = read_ladder(lad(tmp_path, "rt,carbons\n10,14\n12,16\n14,18\n", "f.csv"), series="fame")
    assert F.index.tolist() == [1400.0, 1600.0, 1800.0] and F.names[0] == "C14 FAME"
    # Lee index: naphthalene 200, phenanthrene 300, chrysene 400, picene 500 (Lee et al., Anal. Chem. 51, 768, 1979)
    P = read_ladder(lad(tmp_path, "rt,name\n8.2,Naphthalene\n15.1,Phenanthrene\n24.3,Chrysene\n31.0,Picene\n", "p.csv"))
    assert P.series == "pah" and P.index.tolist() == [200.0, 300.0, 400.0, 500.0]
    C = read_ladder(lad(tmp_path, "rt,index\n5,512.5\n9,730\n", "c.csv"))
    assert C.series == "custom" and C.index.tolist() == [512.5, 730.0]
    with pytest.raises(InputError, match="not a Lee-index standard"):
        read_ladder(lad(tmp_path, "rt,name\n8.2,naphthalene\n15.1,anthracene\n", "q.csv"), series="pah")
