"""Library CSV/XLSX import and export: validation, all-or-nothing writes, lossless round trips."""

from __future__ import annotations

import csv
import io

import pytest
from sqlalchemy import func, select

from matcher.errors import InputError
from matcher.store import database as dbm
from matcher.store.library_io import COLUMNS, export_library, export_rows, import_library, read_rows
from matcher.store.models import Compound, Observation, Synonym

HEADER = "name,phase_class,ri,cas,formula,synonyms\n"


def _count(url, model):
    with dbm.transaction(url, write=False) as s:
        return s.scalar(select(func.count()).select_from(model))


def _write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def _data_lines(path):
    return "".join(ln for ln in open(path, encoding="utf-8").read().splitlines(True) if not ln.startswith("#"))


def test_demo_round_trip_row_for_row_and_byte_identical(library_url, demo_csv, tmp_path):
    rep = import_library(library_url, demo_csv)
    assert rep.compounds_created >= 100 and rep.observations_added == rep.rows
    first = export_library(library_url, tmp_path / "a.csv")
    # export of the demo equals the demo's data lines (the demo is written in canonical form)
    assert first == _data_lines(demo_csv)
    # into a second library and out again: byte-identical
    url2 = library_url.replace("library.sqlite", "second.sqlite")
    dbm.init_library(url2)
    import_library(url2, tmp_path / "a.csv")
    assert export_library(url2) == first
    assert (tmp_path / "a.csv").read_text(encoding="utf-8") == first


def test_import_then_export_gives_the_same_values(library_url, tmp_path):
    text = (HEADER.strip() + ",ri_sd,n,mode,phase,source,analyst,date,key_ions,series\n"
            "Limonene,slightly-polar,1031.4,0138-86-3,C10H16,dipentene;  (RS)-limonene ,,,,,run 4 (invented),JM,2024-02-01,68 93 136,\n"
            "α-Pinene,nonpolar,930,80-56-8,C10H16,,1.5,12,isothermal,squalane,literature-style (invented),,,,\n"
            "decane,polar,1000,124-18-5,C10H22,,,,,,,,,57 71 85,n-alkanes\n")
    p = _write(tmp_path, "in.csv", text)
    import_library(library_url, p)
    rows = export_rows(library_url)
    assert [(r["name"], r["phase_class"], float(r["ri"])) for r in rows] == [
        ("Limonene", "slightly-polar", 1031.4), ("α-Pinene", "nonpolar", 930.0), ("decane", "polar", 1000.0)]
    assert rows[0]["cas"] == "138-86-3" and rows[0]["synonyms"] == "dipentene; (RS)-limonene"
    assert rows[0]["date"] == "2024-02-01" and rows[0]["key_ions"] == "68 93 136" and rows[0]["mode"] == "programmed"
    assert (rows[1]["ri_sd"], rows[1]["n"], rows[1]["mode"], rows[1]["phase"]) == ("1.5", "12", "isothermal", "squalane")
    assert rows[2]["series"] == "n-alkanes"


def test_one_wrong_check_digit_refuses_whole_file(library_url, demo_csv, tmp_path):
    import_library(library_url, demo_csv)
    before = export_library(library_url)
    rev = dbm.revision(library_url)
    lines = ["# invented test file", HEADER.strip()]
    lines += [f"compound {i},nonpolar,{900 + i},,," for i in range(1, 20)]
    lines.insert(12, "water,polar,1500,7732-18-4,H2O,")  # wrong check digit (published number 7732-18-5)
    p = _write(tmp_path, "bad.csv", "\n".join(lines) + "\n")
    with pytest.raises(InputError) as exc:
        import_library(library_url, p)
    msg = str(exc.value)
    # the 11th data row sits on physical line 13 (comment line 1, header line 2)
    assert "bad.csv" in msg and "data row 11 (line 13)" in msg and "column 'cas'" in msg and "check digit" in msg
    assert export_library(library_url) == before and dbm.revision(library_url) == rev


@pytest.mark.parametrize("row,column,words", [
    ("linalool,polar,abc,,,", "ri", "not a number"),
    ("linalool,polarish,1550,,,", "phase_class", "unknown phase class"),
    ("linalool,polar,1550,,C10H18Q,", "formula", "unknown element"),
    (",polar,1550,,,", "name", "name is required"),
    ("linalool,polar,-5,,,", "ri", "at least"),
])
def test_bad_cells_named(library_url, tmp_path, row, column, words):
    p = _write(tmp_path, "bad.csv", HEADER + "limonene,nonpolar,1030,,,\n" + row + "\n")
    with pytest.raises(InputError) as exc:
        import_library(library_url, p)
    assert exc.value.row == 2 and exc.value.line == 3 and exc.value.column == column
    assert words in str(exc.value)
    assert _count(library_url, Compound) == 0


def test_contradicting_rows_refused(library_url, tmp_path):
    p = _write(tmp_path, "c.csv", HEADER + "limonene,nonpolar,1030,138-86-3,,\nLimonene,polar,1200,5989-27-5,,\n")
    with pytest.raises(InputError, match="contradicts") as exc:
        import_library(library_url, p)
    assert exc.value.row == 2 and exc.value.column == "cas"
    assert _count(library_url, Observation) == 0


def test_rows_attach_to_existing_compounds(library_url, tmp_path):
    import_library(library_url, _write(tmp_path, "a.csv", HEADER + "α-Pinene,nonpolar,932,80-56-8,C10H16,2-pinene\n"))
    p = _write(tmp_path, "b.csv", HEADER +
               "ALPHA PINENE,slightly-polar,936,,,\n"     # by normalised name
               "2-pinene,polar,1022,,,\n"                 # by synonym
               "pin-2-ene,nonpolar,931,80-56-8,,\n")       # by CAS: the new name becomes a synonym
    rep = import_library(library_url, p)
    assert rep.compounds_created == 0 and rep.observations_added == 3
    assert _count(library_url, Compound) == 1
    with dbm.transaction(library_url, write=False) as s:
        assert sorted(s.scalars(select(Synonym.name))) == ["2-pinene", "pin-2-ene"]
    # the same file again adds nothing (identical observations are recognised)
    rep = import_library(library_url, p)
    assert rep.observations_added == 0 and rep.observations_skipped == 3


def test_row_tying_two_compounds_refused(library_url, tmp_path):
    import_library(library_url, _write(tmp_path, "a.csv", HEADER + "limonene,nonpolar,1030,138-86-3,,\nlinalool,nonpolar,1098,78-70-6,,\n"))
    p = _write(tmp_path, "b.csv", HEADER + "limonene,polar,1200,78-70-6,,\n")
    with pytest.raises(InputError, match="ties together"):
        import_library(library_url, p)
    assert _count(library_url, Observation) == 2


def test_replace_and_dry_run(library_url, demo_csv, tmp_path):
    import_library(library_url, demo_csv)
    small = _write(tmp_path, "s.csv", HEADER + "limonene,nonpolar,1030,138-86-3,C10H16,\n")
    rep = import_library(library_url, small, replace=True, dry_run=True)
    assert rep.observations_added == 1 and _count(library_url, Compound) > 100  # dry run wrote nothing
    import_library(library_url, small, replace=True)
    assert _count(library_url, Compound) == 1 and _count(library_url, Observation) == 1


def test_xlsx_import_and_export(library_url, demo_csv, tmp_path):
    import_library(library_url, demo_csv)
    text = export_library(library_url, tmp_path / "lib.xlsx")
    url2 = library_url.replace("library.sqlite", "x.sqlite")
    dbm.init_library(url2)
    import_library(url2, tmp_path / "lib.xlsx")
    assert export_library(url2) == text


def test_header_aliases_and_unknown_columns(tmp_path):
    p = _write(tmp_path, "h.csv", "Compound;Class;RI;CAS number;odour\nlinalool;polar;1550,5;78-70-6;floral\n")
    rows, ignored = read_rows(p)
    assert rows[0].ri == 1550.5 and rows[0].cas == "78-70-6" and ignored == ["odour"]


def test_export_columns_fixed():
    assert COLUMNS[:3] == ("name", "phase_class", "ri") and "series" in COLUMNS and "key_ions" in COLUMNS


def test_export_is_atomic_on_failure(library_url, tmp_path):
    target = tmp_path / "nowhere" / "out.csv"
    with pytest.raises(Exception):
        export_library(library_url, target)
    assert not target.exists()


def test_shared_cas_inside_one_file_keeps_names_apart(library_url, tmp_path):
    from matcher.store.inspect import check

    # a table listing the racemate and a name variant under one CAS number keeps both rows' names
    p = _write(tmp_path, "t.csv", HEADER + "limonene,nonpolar,1030,138-86-3,,\nDL-limonene,nonpolar,1031,138-86-3,,\n")
    import_library(library_url, p)
    assert [r["name"] for r in export_rows(library_url)] == ["limonene", "DL-limonene"]
    assert check(library_url) == []
    assert any("138-86-3" in x for x in check(library_url, strict=True))
