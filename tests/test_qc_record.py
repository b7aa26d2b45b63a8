"""The screening record for the QC file: report, schema and calibration file agree; the report shows what the
ladder checks found, the sample and who ran it, the composition, and ends with a sign-off block; nothing a
program prints for itself (None, True, nan, dict or list reprs) reaches a page, table or sheet.

Every ladder, run and library value here is invented for the tests. Facts from outside the project are named
where they are used: the Kováts relation (Helv. Chim. Acta 41, 1915, 1958: the index is linear in
log(t − tM) between n-alkanes, so an isothermal ladder built on it gives back its hold-up time), the n-alkane
chain lengths (C12 is dodecane), and juniper-berry oil's leading constituent (α-pinene; common practice of
essential-oil QC, no source, from memory).
"""

from __future__ import annotations

import json
import re
from html.parser import HTMLParser
from importlib.resources import files

import jsonschema
import numpy as np
import openpyxl
import pandas as pd
import pytest
from typer.testing import CliRunner

import matcher
from matcher.cli.main import app
from matcher.report.files import output_validator, schema_registry
from matcher.report.html import render_report
from matcher.retention.calibration import calibrate, load_schema
from matcher.retention.ladder import Ladder

runner = CliRunner()

#: What a program prints for itself and a reader must never see.
RAW = re.compile(r"\bNone\b|\bTrue\b|\bFalse\b|\bnan\b|\bNaN\b|\{'|\['|'\]|\bnull\b|<NA>")


class _Visible(HTMLParser):
    """The text a reader sees (no style, no title)."""

    def __init__(self):
        super().__init__()
        self.parts: list[str] = []
        self._hidden = 0

    def handle_starttag(self, tag, attrs):
        self._hidden += tag in ("style", "title")

    def handle_endtag(self, tag):
        self._hidden -= tag in ("style", "title")

    def handle_data(self, data):
        if not self._hidden:
            self.parts.append(data)


def visible_text(page: str) -> str:
    p = _Visible()
    p.feed(page)
    return " ".join(" ".join(p.parts).split())


def assert_no_raw_values(text: str, where: str) -> None:
    found = [text[max(0, m.start() - 40): m.end() + 20] for m in RAW.finditer(text)]
    assert not found, f"{where}: program values shown to the reader: {found[:5]}"


def _ladder(rt, carbons, names=None):
    c = np.array(carbons, float)
    return Ladder("ladder.csv", "alkanes", np.array(rt, float), c * 100.0,
                  list(names or [f"C{int(k)}" for k in carbons]), c, np.arange(1, len(rt) + 1))


#: Three ladders the issue names (invented times).
MISLABELLED = _ladder([3.05, 5.21, 7.55, 8.60, 11.92, 13.90, 15.80], range(8, 15))      # C11 out of the trend
T_M = 1.40
ISOTHERMAL = _ladder([round(T_M + 1.2 * 1.8 ** (c - 8), 4) for c in range(8, 13)], range(8, 13))
GAPPED = _ladder([3.10, 5.02, 6.95, 10.70, 12.55], [9, 10, 11, 13, 14])                    # no C12


@pytest.fixture(scope="module")
def library(tmp_path_factory):
    """The demo house library (invented values), shipped with the package."""
    folder = tmp_path_factory.mktemp("lib")
    lib = matcher.open_library(str(folder / "lab.sqlite"), create=True)
    with open(folder / "demo.csv", "w", encoding="utf-8") as fh:
        fh.write(files("matcher.shipped").joinpath("demo_library.csv").read_text(encoding="utf-8"))
    lib.import_file(str(folder / "demo.csv"))
    return lib


def _peaks(cal, n=8):
    """A few peaks inside the ladder (invented), with areas."""
    lo, hi = cal.rt_range
    rt = np.linspace(lo + 0.3, hi - 0.3, n)
    return pd.DataFrame({"peak": [f"p{k}" for k in range(1, n + 1)], "rt": rt.round(3),
                         "area": np.arange(1, n + 1) * 1000.0})


# --------------------------------------------------------------------------- one set of keys


@pytest.mark.parametrize("ladder, mode", [(MISLABELLED, "programmed"), (ISOTHERMAL, "isothermal"),
                                          (GAPPED, "programmed")], ids=["mislabelled", "isothermal", "gapped"])
def test_calibration_files_and_screen_json_validate_against_the_schemas(library, tmp_path, ladder, mode):
    cal = calibrate(ladder, mode=mode)
    cal.save(tmp_path / "cal.json")
    doc = json.loads((tmp_path / "cal.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(load_schema()).validate(doc)
    result = matcher.screen(_peaks(cal), calibration=str(tmp_path / "cal.json"), phase_class="slightly-polar",
                            library=library, sample="lot 7", analyst="ana")
    screen_doc = result.to_dict()
    output_validator().validate(screen_doc)
    # the run carries exactly the calibration file's document: the report reads the same keys
    assert screen_doc["runs"][0]["calibration"]["qc"] == doc["qc"]
    assert screen_doc["runs"][0]["calibration"]["holdup"] == doc["holdup"]
    # a report-side key that the calibration file does not write is refused by the schema
    broken = json.loads(json.dumps(screen_doc))
    broken["runs"][0]["calibration"]["qc"]["checks"] = []
    with pytest.raises(jsonschema.ValidationError):
        output_validator().validate(broken)


def test_the_schemas_resolve_each_other():
    registry = schema_registry()
    assert "https://matcher.invalid/schema/calibration.schema.json" in registry
    jsonschema.Draft202012Validator.check_schema(json.loads(
        files("matcher.schemas").joinpath("screen-output.schema.json").read_text(encoding="utf-8")))


def test_report_says_what_the_ladder_checks_found(library):
    runs = []
    for ladder, mode in ((MISLABELLED, "programmed"), (ISOTHERMAL, "isothermal"), (GAPPED, "programmed")):
        cal = calibrate(ladder, mode=mode)
        runs.append((_peaks(cal), cal))
    result = matcher.screen([r for r, _ in runs], calibration=[c for _, c in runs], phase_class="slightly-polar",
                            library=library, labels=["mislabelled", "isothermal", "gapped"])
    text = visible_text(render_report(result))
    # the probable mislabel that calibrate warned about reaches the report, with the standard's name
    assert "probable mislabelled standard" in text and "C11 (index 1100, 8.6 min) breaks the trend" in text
    # the fitted hold-up time of the isothermal ladder is shown with its value: the Kováts relation gives T_M back
    fitted = result.runs[1].calibration["holdup"]
    assert fitted["method"] == "fit" and fitted["value"] == pytest.approx(T_M, abs=2e-3)
    assert f"{fitted['value']:.3f} min (least-squares fit over the ladder" in text
    # a gap is one readable line: C12 (dodecane) missing between 1100 and 1300
    assert "1100 to 1300: no C12" in text
    assert_no_raw_values(text, "report")


# --------------------------------------------------------------------------- the record


def _export_with_preamble(path):
    """An instrument-style peak export: four preamble lines, R.Time, Area, Area% (invented numbers)."""
    path.write_text(
        "[Header]\n"
        "Sample Name,Rosemary oil lot 7\n"
        "Acquisition Date,2026-05-14 09:12\n"
        "Operator,ben\n"
        "Peak#,R.Time,Area,Area%,Name\n"
        "1,8.105,12000,12.00,α-pinene\n"
        "2,9.420,8000,8.00,\n"
        "3,10.530,50000,50.00,limonene\n"
        "4,12.210,30000,30.00,\n", encoding="utf-8")
    return path


def test_a_peak_export_with_a_preamble_screens_every_peak_with_its_areas(library, tmp_path):
    cal = calibrate(MISLABELLED)
    cal.save(tmp_path / "cal.json")
    run = _export_with_preamble(tmp_path / "rosemary-lot7.csv")
    out = tmp_path / "shortlist.csv"
    res = runner.invoke(app, ["screen", str(run), "--calibration", str(tmp_path / "cal.json"), "--class",
                              "slightly-polar", "-o", str(out), "--report", str(tmp_path / "r.html"),
                              "--instrument", "GC-2", "--column", "5 % phenyl 30 m", "--db", library.db, "-q"])
    assert res.exit_code == 0, res.output
    table = pd.read_csv(out, dtype={"peak": str})
    per_peak = table.groupby("peak").first()
    assert sorted(per_peak.index) == ["1", "2", "3", "4"]
    assert per_peak["area"].tolist() == [12000, 8000, 50000, 30000]
    assert per_peak["area_percent"].tolist() == [12.0, 8.0, 50.0, 30.0]
    side = json.loads((tmp_path / "shortlist.csv.meta.json").read_text(encoding="utf-8"))
    record = side["runs"][0]["record"]
    # the preamble fills the record; the options add to it
    assert record["sample"] == "Rosemary oil lot 7" and record["analyst"] == "ben"
    assert record["acquired"] == "2026-05-14 09:12" and record["instrument"] == "GC-2"
    assert record["area_percent"] == "file"
    text = visible_text((tmp_path / "r.html").read_text(encoding="utf-8"))
    assert "Rosemary oil lot 7" in text and "Composition" in text and "GC-2" in text
    assert_no_raw_values(text, "report of a preamble export")


def test_area_percent_is_computed_when_the_table_has_only_areas(library):
    cal = calibrate(GAPPED)
    result = matcher.screen(_peaks(cal, 4), calibration=cal, phase_class="slightly-polar", library=library)
    first = result.table.groupby("peak").first()
    assert first["area_percent"].sum() == pytest.approx(100.0)
    assert first["area_percent"].tolist() == pytest.approx([10.0, 20.0, 30.0, 40.0])  # 1:2:3:4 of the summed area
    assert result.runs[0].record["area_percent"] == "computed from area"


def test_screen_options_go_into_provenance_and_report_header(library, tmp_path):
    cal = calibrate(GAPPED)
    cal.save(tmp_path / "cal.json")
    _peaks(cal).to_csv(tmp_path / "run.csv", index=False)
    out = tmp_path / "s.json"
    res = runner.invoke(app, ["screen", str(tmp_path / "run.csv"), "--calibration", str(tmp_path / "cal.json"),
                              "--class", "slightly-polar", "--adaptive", "--sample", "juniper lot JB-0412",
                              "--analyst", "ana", "--instrument", "GC-MS 2", "--column", "5 % phenyl, 30 m",
                              "--output", str(out), "--report", str(tmp_path / "r.html"), "--db", library.db, "-q"])
    assert res.exit_code == 0, res.output
    doc = json.loads(out.read_text(encoding="utf-8"))
    output_validator().validate(doc)
    assert doc["runs"][0]["record"] == {"sample": "juniper lot JB-0412", "analyst": "ana", "instrument": "GC-MS 2",
                                        "column": "5 % phenyl, 30 m", "area_percent": "computed from area"}
    page = (tmp_path / "r.html").read_text(encoding="utf-8")
    header = visible_text(page.split("</header>")[0])
    for fact in ("juniper lot JB-0412", "ana", "GC-MS 2", "5 % phenyl, 30 m"):
        assert fact in header
    text = visible_text(page)
    assert "RI column" in text and "linear (van den Dool & Kratz) index from the ladder calibration" in text
    # the sign-off block ends the record, after every run
    assert text.index("Review and sign-off") > text.index("Shortlists")
    assert "reviewed by" in text and "signature" in text and "date" in text
    assert_no_raw_values(text, "report")


def test_report_states_the_corrected_index_when_adaptive_ran():
    from matcher.report.wording import index_statement

    cal = {"mode": "programmed"}
    assert "corrected by the run's adaptive fit" in index_statement(cal, {"applied": True})
    assert "uncorrected" in index_statement(cal, {"applied": False})
    assert "Kováts" in index_statement({"mode": "isothermal"}, None)
    assert "given in the peak table" in index_statement(None, None)


def test_two_classes_apply_per_run_and_a_count_mismatch_is_refused(library, tmp_path):
    pd.DataFrame({"peak": ["a"], "ri": [1031.0]}).to_csv(tmp_path / "one.csv", index=False)
    pd.DataFrame({"peak": ["b"], "ri": [1200.0]}).to_csv(tmp_path / "two.csv", index=False)
    out = tmp_path / "s.json"
    res = runner.invoke(app, ["screen", str(tmp_path / "one.csv"), str(tmp_path / "two.csv"), "--class",
                              "slightly-polar", "--class", "polar", "-o", str(out), "--db", library.db, "-q"])
    assert res.exit_code == 0, res.output
    doc = json.loads(out.read_text(encoding="utf-8"))
    assert [r["class"] for r in doc["runs"]] == ["slightly-polar", "polar"]
    assert [r["window"]["value"] for r in doc["runs"]] == [10.0, 20.0]  # class defaults (common practice)
    res = runner.invoke(app, ["screen", str(tmp_path / "one.csv"), "--class", "polar", "--class", "nonpolar",
                              "-o", str(tmp_path / "x.json"), "--db", library.db, "-q"])
    assert isinstance(res.exception, matcher.MatcherError) and "2 --class values for 1 runs" in str(res.exception)
    assert not (tmp_path / "x.json").exists()


# --------------------------------------------------------------------------- no program values anywhere


def test_no_program_values_in_the_sheets_or_the_report(library, tmp_path):
    cal = calibrate(ISOTHERMAL, mode="isothermal")
    result = matcher.screen(_peaks(cal), calibration=cal, phase_class="slightly-polar", library=library,
                            adaptive=True, sample="lot 9")
    result.to_xlsx(tmp_path / "s.xlsx")
    wb = openpyxl.load_workbook(tmp_path / "s.xlsx", read_only=True)
    for sheet in wb.worksheets:
        for row in sheet.iter_rows(values_only=True):
            for v in row:
                if isinstance(v, str):
                    assert_no_raw_values(v, f"sheet {sheet.title}")
    cells = [str(v) for r in wb["runs"].iter_rows(values_only=True) for v in r if v is not None]
    assert not any(c.startswith(("setting ", "qc ")) for c in cells)  # labels, not raw keys
    assert "hold-up time (min)" in cells
    result.to_csv(tmp_path / "s.csv")
    assert_no_raw_values((tmp_path / "s.csv").read_text(encoding="utf-8"), "CSV")
    assert_no_raw_values(visible_text(render_report(result)), "report")


def test_the_demo_report_and_its_juniper_berry_oil(tmp_path):
    from matcher.demo import run_demo

    out = run_demo(str(tmp_path / "demo"))
    table = pd.read_csv(out.shortlist)
    first = table[table["rank"] == 1]
    # juniper-berry oil: α-pinene is the main peak of its composition (common practice, from memory)
    pinene = first[first["name"] == "α-pinene"]
    assert len(pinene) == 1 and pinene["area_percent"].iloc[0] == first["area_percent"].max()
    assert {"sabinene", "myrcene"} <= set(first["name"])
    text = visible_text(open(out.report, encoding="utf-8").read())
    assert "invented" in text and "Composition" in text
    assert_no_raw_values(text, "demo report")


def test_calibrate_and_screen_show_times_as_given(tmp_path, library):
    ladder = tmp_path / "ladder.csv"
    ladder.write_text("rt,carbons\n3.10,8\n5.02,9\n7.998,10\n9.2,11\n12.5,12\n", encoding="utf-8")  # invented
    res = runner.invoke(app, ["calibrate", str(ladder), "-o", str(tmp_path / "cal.json")])
    assert res.exit_code == 0, res.output
    rows = {ln.split()[0]: ln.split()[1] for ln in res.output.splitlines() if ln.startswith("C")}
    assert rows == {"C8": "3.10", "C9": "5.02", "C10": "7.998", "C11": "9.2", "C12": "12.5"}
    doc = json.loads((tmp_path / "cal.json").read_text(encoding="utf-8"))
    assert [s["rt_decimals"] for s in doc["standards"]] == [2, 2, 3, 1, 1]
    run = tmp_path / "run.csv"
    run.write_text("peak,rt\n1,4.2150\n2,9.95\n3,11.1\n", encoding="utf-8")
    out = tmp_path / "s.csv"
    res = runner.invoke(app, ["screen", str(run), "--calibration", str(tmp_path / "cal.json"), "--class",
                              "slightly-polar", "-o", str(out), "--db", library.db, "-q"])
    assert res.exit_code == 0, res.output
    import csv

    with open(out, newline="", encoding="utf-8") as fh:
        times = {r["peak"]: r["rt"] for r in csv.DictReader(fh)}
    assert times == {"1": "4.2150", "2": "9.95", "3": "11.1"}


# --------------------------------------------------------------------------- preamble property

from hypothesis import given, settings, strategies as st  # noqa: E402

def _not_a_column_name(word: str) -> bool:
    """Preamble words that no peak-table header spelling matches (a line naming two columns would be a header)."""
    from matcher.io.delimited import normalize_header
    from matcher.io.peak_tables import ALIASES

    known = {normalize_header(a) for canon, names in ALIASES.items() for a in [canon, *names]}
    return normalize_header(word) not in known


_WORDS = (st.text(alphabet="abcdefghijklmnopqrstuvwxyz ", min_size=1, max_size=12).map(str.strip)
          .filter(bool).filter(_not_a_column_name))
_LINE = st.one_of(
    st.tuples(_WORDS, _WORDS).map(lambda kv: f"{kv[0]},{kv[1]}"),
    st.tuples(_WORDS, _WORDS).map(lambda kv: f"{kv[0]}: {kv[1]}"),
    _WORDS.map(lambda w: f"[{w}]"),
    st.just(""),
)


@settings(max_examples=60, deadline=None)
@given(st.lists(_LINE, min_size=0, max_size=8))
def test_any_key_value_preamble_leaves_the_peaks_unchanged(tmp_path_factory, lines):
    from matcher.io.peak_tables import read_peaks

    body = "Peak#,R.Time,Area,Area%\n1,5.012,1200,12.5\n2,6.500,8400,87.5\n"
    path = tmp_path_factory.mktemp("pre") / "export.csv"
    path.write_text("".join(ln + "\n" for ln in lines) + body, encoding="utf-8")
    table = read_peaks(str(path))
    assert table.peak.tolist() == ["1", "2"] and table.rt.tolist() == [5.012, 6.5]
    assert table.area_percent.tolist() == [12.5, 87.5]
    assert len(table.preamble) <= len(lines)


def test_a_workbook_with_a_preamble_reads_like_the_csv(tmp_path):
    from matcher.io.peak_tables import read_peaks

    wb = openpyxl.Workbook()
    ws = wb.active
    for row in (["[Header]"], ["Sample Name", "oil lot 9"], ["Operator", "ana"], [], ["Peak#", "R.Time", "Area", "Area%"],
                [1, 5.012, 1200, 12.5], [2, 6.5, 8400, 87.5]):
        ws.append(row)
    wb.save(tmp_path / "export.xlsx")
    table = read_peaks(str(tmp_path / "export.xlsx"))
    assert table.peak.tolist() == ["1", "2"] and table.rt.tolist() == [5.012, 6.5]
    assert table.area_percent.tolist() == [12.5, 87.5] and table.lines.tolist() == [6, 7]  # physical rows
    assert table.metadata == {"sample": "oil lot 9", "analyst": "ana"}
