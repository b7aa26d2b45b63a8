"""The top-level Python interface (``import matcher``), its input rules and its documents."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from importlib.resources import as_file, files
from pathlib import Path

import jsonschema
import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

import matcher
from matcher.cli.main import app

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def demo_lib(tmp_path_factory):
    """The bundled demo library (invented numbers) in a fresh SQLite file, opened through the public API."""
    db = tmp_path_factory.mktemp("lib") / "demo.sqlite"
    lib = matcher.open_library(db, create=True)
    with as_file(files("matcher.shipped").joinpath("demo_library.csv")) as src:
        report = lib.import_file(src)
    assert "812 observations added" in report.summary()
    return lib


def _demo_frame(name: str) -> pd.DataFrame:
    with as_file(files("matcher.examples").joinpath(name)) as p:
        return pd.read_csv(p, skiprows=2)  # two "# invented numbers" lines above the header


def _demo_path(name: str) -> str:
    with as_file(files("matcher.examples").joinpath(name)) as p:
        return str(p)


# --------------------------------------------------------------------------- the package


def test_import_is_cheap_and_names_load_lazily():
    code = ("import sys, matcher; heavy = [m for m in ('pandas', 'numpy', 'sqlalchemy', 'typer') if m in sys.modules];"
            "print(heavy); print(callable(matcher.query), matcher.MatcherError.__module__)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split("\n")
    assert out[0] == "[]"                      # nothing heavy on `import matcher`
    assert out[1] == "True matcher.errors"


def test_public_names_and_submodule_of_the_same_name():
    for name in ("open_library", "calibrate", "read_peaks", "screen", "query", "evaluate", "MatcherError"):
        assert name in matcher.__all__ and name in dir(matcher)
    import importlib

    module = importlib.import_module("matcher.identify.query")  # the submodule must not replace the function
    from matcher.identify.query import QueryResult

    assert module.QueryResult is QueryResult and matcher.query is not module

    assert callable(matcher.query) and matcher.QueryResult is QueryResult
    with pytest.raises(AttributeError):
        matcher.no_such_name  # noqa: B018
    assert issubclass(matcher.InputError, matcher.MatcherError) and issubclass(matcher.LibraryError, matcher.MatcherError)


# --------------------------------------------------------------------------- validation in the library


@pytest.mark.parametrize("bad, message", [
    ({"top": 0}, "--top must be at least 1"),
    ({"top": -3}, "--top must be at least 1"),
    ({"top": 2.5}, "--top must be a whole number"),
    ({"hit_match": 500}, "--hit-match must be between 0 and 100, got 500"),
    ({"hit_match": -1}, "--hit-match must be between 0 and 100"),
    ({"ions": [93.7, -5]}, "--ions: an m/z must be a whole number from 1 to 5000, got 93.7"),
    ({"ions": [-5]}, "got -5"),
    ({"ions": "93 abc"}, "--ions: not an m/z value: 'abc'"),
    ({"window": -2}, "--window must be a positive number of index units, got -2"),
    ({"window": float("nan")}, "--window must be a positive number"),
    ({"window_percent": 30}, "--window-percent must be in (0, 20], got 30"),
    ({"window": 5, "window_percent": 1}, "give either --window or --window-percent, not both"),
])
def test_query_refuses_bad_settings_itself(demo_lib, bad, message):
    with pytest.raises(matcher.MatcherError, match=re.escape(message)):
        matcher.query(1031, "slightly-polar", library=demo_lib, **bad)


def test_query_refuses_an_index_outside_the_range_and_an_unknown_class(demo_lib):
    with pytest.raises(matcher.MatcherError, match="between 0 and 10000"):
        matcher.query(12000, "slightly-polar", library=demo_lib)
    with pytest.raises(matcher.MatcherError, match="unknown phase class 'wax'"):
        matcher.query(1031, "wax", library=demo_lib)


def test_screen_refuses_an_unknown_class_before_reading_anything(tmp_path):
    with pytest.raises(matcher.MatcherError, match="unknown phase class 'sticky'; use one of: nonpolar"):
        matcher.screen(tmp_path / "absent.csv", phase_class="sticky", library=tmp_path / "absent.sqlite")


def test_same_message_from_python_and_from_the_command_line(demo_lib):
    exe = str(Path(sys.executable).with_name("matcher"))
    proc = subprocess.run([exe, "query", "1031", "--class", "slightly-polar", "--top", "0", "--db", demo_lib.db],
                          capture_output=True, text=True, cwd=demo_lib.db.rsplit("/", 1)[0])
    assert proc.returncode == 2 and proc.stdout == ""
    with pytest.raises(matcher.MatcherError) as ei:
        matcher.query(1031, "slightly-polar", top=0, library=demo_lib)
    assert proc.stderr.strip() == f"error: {ei.value}"


def test_key_ions_accept_whole_numbers_and_text(demo_lib):
    a = matcher.query(1031, "slightly-polar", ions=[93, 68, 136.0], library=demo_lib)
    b = matcher.query(1031, "slightly-polar", ions="93;68 136", library=demo_lib)
    assert a.to_dict()["candidates"] == b.to_dict()["candidates"]


# --------------------------------------------------------------------------- results


def test_query_result_dict_table_and_schema(demo_lib):
    res = matcher.query(1031, "slightly-polar", mol_ion=136, library=demo_lib, top=3)
    doc = res.to_dict()
    schema_dir = ROOT / "schema"
    from referencing import Registry, Resource

    schemas = {p.name: json.loads(p.read_text(encoding="utf-8")) for p in schema_dir.glob("*.schema.json")}
    registry = Registry().with_resources(
        [(s["$id"], Resource.from_contents(s)) for s in schemas.values()])
    jsonschema.Draft202012Validator(schemas["query-output.schema.json"], registry=registry).validate(doc)
    two = matcher.query(1031, "slightly-polar", mol_ion=136, library=demo_lib, second_ri=1211, second_class="polar")
    jsonschema.Draft202012Validator(schemas["query-output.schema.json"], registry=registry).validate(two.to_dict())
    assert two.to_dict()["model"]["second"]["class"] == "polar" and "second" in two.best["evidence"]
    assert len(res.candidates) == 3 and list(res.table["rank"]) == [1, 2, 3]
    assert res.best is res.candidates[0] and res.best["nominal_mass"] == 136   # C10H16 → 136, fact of the trade
    assert set(res.best["evidence"]) == {"index", "mol_ion", "ions", "hit", "spectrum"}
    full = matcher.query(1031, "slightly-polar", mol_ion=136, library=demo_lib)
    total = sum(c["probability"] for c in full.candidates) + full.not_in_library
    assert total == pytest.approx(1.0, abs=1e-9)


def test_query_and_screen_json_use_the_same_candidate_record(demo_lib):
    peaks = pd.DataFrame({"peak": ["x"], "ri": [1031.0], "mol_ion": [136]})
    screened = matcher.screen(peaks, phase_class="slightly-polar", library=demo_lib, index_scatter=3.0)
    cand_screen = screened.to_dict()["runs"][0]["peaks"][0]["candidates"][0]
    cand_query = matcher.query(1031, "slightly-polar", mol_ion=136, library=demo_lib).candidates[0]
    assert list(cand_screen) == list(cand_query)
    assert list(cand_screen["evidence"]) == list(cand_query["evidence"])


def test_demo_as_dataframes_gives_the_command_lines_top_candidates(demo_lib, tmp_path):
    # the demo ladder and run (invented numbers) held in memory, screened through the top-level package
    ladder = _demo_frame("ladder.csv")
    run = _demo_frame("run.csv")
    cal = matcher.calibrate(ladder)
    result = matcher.screen(run, calibration=cal, phase_class="slightly-polar", library=demo_lib, top=3)
    out = tmp_path / "cli.csv"
    res = runner.invoke(app, ["screen", _demo_path("run.csv"), "--ladder", _demo_path("ladder.csv"),
                              "--class", "slightly-polar", "--top", "3", "-o", str(out), "--db", demo_lib.db, "-q"])
    assert res.exit_code == 0, res.output
    cli = pd.read_csv(out)
    py = result.top()
    cli_top = cli[cli["rank"] == 1].reset_index(drop=True)
    assert len(py) == len(cli_top) > 30
    assert py["peak"].astype(str).tolist() == cli_top["peak"].astype(str).tolist()
    assert py["name"].tolist() == cli_top["name"].tolist()
    assert np.allclose(py["ri"].to_numpy(float), cli_top["ri"].to_numpy(float), atol=0.006)
    assert np.allclose(py["probability"].to_numpy(float), cli_top["probability"].to_numpy(float), atol=1e-6)


def test_screen_result_writes_every_format(demo_lib, tmp_path):
    run = _demo_frame("run.csv").head(8)
    result = matcher.screen(run, ladder=_demo_frame("ladder.csv"), phase_class="slightly-polar", library=demo_lib)
    assert result.runs[0].label == "run" and result.runs[0].source == "<DataFrame>"
    written = result.to_csv(tmp_path / "s.csv")
    assert [p.name for p in written] == ["s.csv", "s.csv.meta.json"]
    assert pd.read_csv(tmp_path / "s.csv").shape[0] == len(result.table)
    result.to_json(tmp_path / "s.json")
    doc = json.loads((tmp_path / "s.json").read_text(encoding="utf-8"))
    from matcher.report.files import output_validator

    output_validator().validate(doc)
    assert json.loads(result.to_json())["runs"][0]["peak_count"] == 8
    result.to_xlsx(tmp_path / "s.xlsx")
    result.to_html(tmp_path / "s.html")
    assert matcher.CAUTION[:40] in (tmp_path / "s.html").read_text(encoding="utf-8")
    with pytest.raises(matcher.MatcherError, match="the report file must end in .html"):
        result.to_html(tmp_path / "s.txt")
    with pytest.raises(matcher.MatcherError, match="must end in .csv, .json or .xlsx"):
        result.write(tmp_path / "s.txt")


def test_a_bad_dataframe_cell_is_named_like_a_file_cell(demo_lib):
    run = pd.DataFrame({"peak": [1, 2], "rt": [5.0, "five"]})
    with pytest.raises(matcher.InputError) as ei:
        matcher.screen(run, calibration=matcher.calibrate(_demo_frame("ladder.csv")), phase_class="nonpolar",
                       library=demo_lib)
    assert str(ei.value).startswith("<DataFrame>, data row 2 (line 3), column 'rt':")


def test_batch_of_tables_with_one_calibration_each(demo_lib):
    run = _demo_frame("run.csv").head(5)
    cal = matcher.calibrate(_demo_frame("ladder.csv"))
    result = matcher.screen([run, run], calibration=[cal, cal], phase_class="slightly-polar", library=demo_lib,
                            labels=["lot-a", "lot-b"])
    assert [r.label for r in result.runs] == ["lot-a", "lot-b"]
    assert result.table["run"].unique().tolist() == ["lot-a", "lot-b"]
    with pytest.raises(matcher.MatcherError, match="3 calibration/ladder files for 2 runs"):
        matcher.screen([run, run], calibration=[cal, cal, cal], phase_class="slightly-polar", library=demo_lib)


def test_library_handle_accepts_snapshot_path_and_handle(demo_lib):
    snap = demo_lib.snapshot()
    by_handle = matcher.query(1031, "slightly-polar", library=demo_lib).candidates
    by_path = matcher.query(1031, "slightly-polar", library=demo_lib.db).candidates
    by_snapshot = matcher.query(1031, "slightly-polar", library=snap).candidates
    assert by_handle == by_path == by_snapshot
    with pytest.raises(matcher.MatcherError, match="library= takes"):
        matcher.query(1031, "slightly-polar", library=42)


def test_library_methods_mirror_the_commands(demo_lib, tmp_path):
    assert demo_lib.find("a-pinen", limit=1)[0].name == "α-pinene"
    shown = demo_lib.show("limonene")
    assert "slightly-polar" in shown["classes"]
    assert demo_lib.stats()["compounds"] == 131
    assert demo_lib.check() == []
    assert demo_lib.export().splitlines()[0].startswith("name,phase_class,ri")
    copy = matcher.open_library(tmp_path / "copy.sqlite")
    assert "password" not in repr(copy) and repr(copy).startswith("Library('sqlite:///")
    demo_lib.backup(tmp_path / "backup.sqlite")
    assert matcher.open_library(tmp_path / "backup.sqlite").stats()["compounds"] == 131
    assert getattr(matcher.Library, "import") is matcher.Library.import_file


def test_evaluate_from_python(demo_lib):
    ev = matcher.evaluate(demo_lib, phase_class="slightly-polar")
    assert set(ev.classes) == {"slightly-polar"}
    assert ev.to_dict()["queries"]["leave_one_out"] > 100
    with pytest.raises(matcher.MatcherError, match="--noise must be between 0 and 100"):
        matcher.evaluate(demo_lib, noise=-1)


# --------------------------------------------------------------------------- the README example


def _readme_python_block() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("\n## Python\n", 1)[1].split("\n## ", 1)[0]
    return re.search(r"```python\n(.*?)```", section, re.S).group(1)


def test_readme_python_example_runs(tmp_path):
    code = _readme_python_block()
    for name in ("ladder.csv", "run.csv", "ladder_polar.csv", "run_polar.csv"):
        (tmp_path / "examples").mkdir(exist_ok=True)
        (tmp_path / "examples" / name).write_text(files("matcher.examples").joinpath(name).read_text(encoding="utf-8"),
                                                   encoding="utf-8")
    (tmp_path / "library").mkdir()
    (tmp_path / "library" / "demo_library.csv").write_text(
        files("matcher.shipped").joinpath("demo_library.csv").read_text(encoding="utf-8"), encoding="utf-8")
    proc = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert (tmp_path / "shortlist.csv").is_file() and (tmp_path / "report.html").is_file()
    assert "limonene" in proc.stdout
    assert "second_peak" in proc.stdout and "W1" in proc.stdout  # the two-column screen from Python


def test_screen_with_output_streams_the_same_csv_as_the_table_written_afterwards(demo_lib, tmp_path, monkeypatch):
    """`output=` writes the CSV part by part (here in index windows of 10 peaks) and keeps the leading rows."""
    import matcher.identify.screening as S

    run, ladder = _demo_frame("run.csv"), _demo_frame("ladder.csv")
    whole = matcher.screen(run, ladder=ladder, phase_class="slightly-polar", library=demo_lib, top=3)
    whole.to_csv(tmp_path / "whole.csv")
    monkeypatch.setattr(S, "CHUNK", 10)
    streamed = matcher.screen(run, ladder=ladder, phase_class="slightly-polar", library=demo_lib, top=3,
                              output=tmp_path / "streamed.csv", report=tmp_path / "r.html")
    a = pd.read_csv(tmp_path / "whole.csv", dtype=str).sort_values(["peak", "rank"], key=lambda s: pd.to_numeric(s, errors="coerce"))
    b = pd.read_csv(tmp_path / "streamed.csv", dtype=str).sort_values(["peak", "rank"], key=lambda s: pd.to_numeric(s, errors="coerce"))
    assert len(a) == len(b) > 40
    for col in ("peak", "rank", "name", "ri", "library_ri", "flags"):
        assert a[col].tolist() == b[col].tolist(), col
    pa, pb = a["probability"].astype(float).to_numpy(), b["probability"].astype(float).to_numpy()
    assert np.abs(pa - pb).max() < 1e-3  # the joint model cut into index windows with a halo
    run0 = streamed.runs[0]
    assert run0.streamed and (tmp_path / "streamed.csv.meta.json").exists() and (tmp_path / "r.html").exists()
    kept = run0.table
    assert set(kept["peak"].astype(str)) == set(a["peak"])  # every peak keeps its leading row
    with pytest.raises(matcher.MatcherError, match="same file"):
        matcher.screen(tmp_path / "streamed.csv", phase_class="slightly-polar", library=demo_lib,
                       output=tmp_path / "streamed.csv")
    assert pd.read_csv(tmp_path / "streamed.csv").shape[0] == len(b)  # the input was not touched
