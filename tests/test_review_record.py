"""The review record (pure), reading whole results back, the exports and ``matcher confirm --review``.

The screened run is the bundled demo and the two-run factory result (all numbers invented)."""

from __future__ import annotations

import csv
import io
import json
import re
import shutil

import pytest
from typer.testing import CliRunner

from matcher import CAUTION
from matcher.cli.main import app
from matcher.errors import MatcherError
from matcher.io.result_files import read_result
from matcher.review import record as rec
from matcher.review.session import open_review, record_path, result_of_record
from result_factory import HOSTILE_NAMES, make_result
from review_helpers import copy_library, copy_result, demo, result  # noqa: F401 - fixtures

runner = CliRunner()


class _Run:
    """A command's outcome as the ``matcher`` script shows it: exit code 2 and the message for a MatcherError."""

    def __init__(self, args):
        r = runner.invoke(app, [str(a) for a in args])
        self.output = r.output
        if isinstance(r.exception, MatcherError):
            self.exit_code, self.output = 2, r.output + str(r.exception)
        else:
            self.exit_code = r.exit_code


def invoke(args):
    return _Run(args)


# ------------------------------------------------------------------ the record, pure


def _empty():
    return rec.new_record(result_file="s.csv", sha256="0" * 64, library_revision="7", library="lab.sqlite",
                          caution=CAUTION, now="2026-01-01T00:00:00Z")


def test_last_decision_per_peak_wins_and_history_keeps_all():
    r = _empty()
    r = rec.apply_decision(r, rec.check_decision({"run": "a", "peak": "1", "decision": "reject"}), reviewer="ana", now="t1")
    r = rec.apply_decision(r, rec.check_decision({"run": "b", "peak": "1", "decision": "unsure"}), reviewer="ana", now="t2")
    r = rec.apply_decision(r, rec.check_decision({"run": "a", "peak": "1", "decision": "accept", "name": "x"}),
                           reviewer="ben", now="t3")
    assert {(d["run"], d["peak"]): d["decision"] for d in r["decisions"]} == {("a", "1"): "accept", ("b", "1"): "unsure"}
    assert [d["time"] for d in r["history"]] == ["t1", "t2", "t3"]
    assert rec.counts(r, 5) == {"accept": 1, "reject": 0, "unsure": 1, "open": 3}
    assert rec.status(r, "a", "1") == "accept" and rec.status(r, "a", "2") == rec.OPEN


def test_apply_does_not_change_the_record_it_was_given():
    r = _empty()
    before = json.dumps(r, sort_keys=True)
    rec.apply_decision(r, rec.check_decision({"run": "a", "peak": "1", "decision": "reject"}), reviewer="ana", now="t")
    assert json.dumps(r, sort_keys=True) == before


@pytest.mark.parametrize("doc, message", [
    ({"format": "other"}, "not a matcher review record"),
    ({**_empty(), "format_version": 99}, "version 99"),
    ({**_empty(), "decisions": "x"}, "'decisions' is not a list"),
    ({**_empty(), "history": [{"run": "a", "peak": "1", "decision": "delete"}]}, "not one matcher wrote"),
])
def test_a_damaged_record_is_refused(doc, message):
    with pytest.raises(MatcherError, match=message):
        rec.check_record(doc, "x.review.json")


def test_a_damaged_record_file_is_refused_by_name(result):
    record_path(result).write_text('{"format": "matcher.review", "format_version": 1}', encoding="utf-8")
    with pytest.raises(MatcherError, match="review.json: the review record names no result checksum"):
        open_review(result)


def test_the_record_itself_is_not_a_result(result):
    open_review(result).decide({"run": "run", "peak": "2", "decision": "reject"})
    with pytest.raises(MatcherError, match="this is a review record"):
        open_review(record_path(result))
    assert result_of_record(record_path(result)) == result


# ------------------------------------------------------------------ reading whole results


def test_csv_and_json_of_one_screen_read_back_the_same(tmp_path):
    res = make_result()
    res.to_csv(tmp_path / "s.csv")
    res.to_json(tmp_path / "s.json")
    a, b = read_result(tmp_path / "s.csv"), read_result(tmp_path / "s.json")
    assert [r["label"] for r in a.runs] == [r["label"] for r in b.runs] == [r.label for r in res.runs]
    for ra, rb in zip(a.runs, b.runs):
        assert [p["peak"] for p in ra["peaks"]] == [p["peak"] for p in rb["peaks"]]
        for pa, pb in zip(ra["peaks"], rb["peaks"]):
            assert [c["name"] for c in pa["candidates"]] == [c["name"] for c in pb["candidates"]]
            assert pa["flags"] == pb["flags"]
            for ca, cb in zip(pa["candidates"], pb["candidates"]):
                assert ca["probability"] == pytest.approx(cb["probability"], abs=1e-6)  # CSV rounds down to 6 places
                assert set(ca["evidence"]) == set(cb["evidence"])
    # a peak with no candidate is kept, with no candidates
    assert any(not p["candidates"] and "no-candidate" in p["flags"] for r in a.runs for p in r["peaks"])
    assert a.peak_count() == sum(r.table["peak"].nunique() for r in res.runs)


def test_the_sidecar_of_a_csv_is_not_a_result(tmp_path):
    make_result().to_csv(tmp_path / "s.csv")
    with pytest.raises(MatcherError, match="provenance sidecar of a CSV"):
        read_result(tmp_path / "s.csv.meta.json")


@pytest.mark.parametrize("text, message", [
    ("peak,rt\n1,2\n", "missing column(s) class, name, rank, ri"),
    ("peak,ri,class,rank,name\n1,800,nonpolar,1\n", "more or fewer fields"),
    (b"\xff\xfe\x00", "not UTF-8"),
])
def test_a_file_that_is_not_a_screening_csv_is_refused_by_name(tmp_path, text, message):
    p = tmp_path / "x.csv"
    (p.write_bytes if isinstance(text, bytes) else p.write_text)(text)
    with pytest.raises(MatcherError, match=re.escape(message)) as exc:
        read_result(p)
    assert "x.csv" in str(exc.value)


# ------------------------------------------------------------------ exports


def test_export_csv_lists_every_peak_with_its_status(result, tmp_path):
    review = open_review(result, reviewer="ana")
    review.decide({"run": "run", "peak": "12", "decision": "accept", "name": "terpinolene", "note": "=1+1"})
    review.decide({"run": "run", "peak": "13", "decision": "reject"})
    out = tmp_path / "review.csv"
    r = invoke(["review", str(result), "--export", str(out)])
    assert r.exit_code == 0, r.output
    text = out.read_text(encoding="utf-8")
    assert text.startswith("# " + CAUTION)
    rows = list(csv.DictReader(io.StringIO("".join(l for l in text.splitlines(True) if not l.startswith("#")))))
    assert len(rows) == 34
    by = {r["peak"]: r for r in rows}
    assert by["12"]["status"] == "accept" and by["12"]["accepted_name"] == "terpinolene"
    assert by["12"]["note"] == "'=1+1"  # a formula in a note is neutralised (OWASP guidance on CSV injection)
    assert by["13"]["status"] == "reject" and by["1"]["status"] == "open"
    assert by["12"]["top_candidate"] == "terpinolene"
    assert list(rows[0]) == list(__import__("matcher.review.exporting", fromlist=["x"]).EXPORT_COLUMNS)


def test_export_html_has_the_review_section_and_no_scripts(result, tmp_path):
    review = open_review(result, reviewer="<b>ana</b>")
    review.decide({"run": "run", "peak": "12", "decision": "unsure", "note": "<script>alert(1)</script>"})
    out = review.export(tmp_path / "review.html")
    html = out.read_text(encoding="utf-8")
    import html as html_lib

    assert 'id="review"' in html and html_lib.escape(CAUTION) in " ".join(html.split())
    assert "<script" not in html and "&lt;script&gt;" in html and "&lt;b&gt;ana" in html
    assert "default-src 'none'" in html


def test_export_refuses_to_overwrite_its_inputs(result):
    review = open_review(result)
    review.decide({"run": "run", "peak": "12", "decision": "unsure"})
    for target in (result, record_path(result)):
        before = target.read_bytes()
        r = invoke(["review", str(result), "--export", str(target.with_suffix(".csv"))
                                if target == result else str(target)])
        assert r.exit_code != 0
        assert target.read_bytes() == before
    with pytest.raises(MatcherError, match="give a .csv or .html"):
        review.export(result.parent / "review.xlsx")


def test_hostile_names_are_text_in_the_exports(tmp_path):
    res = make_result(hostile=True)
    res.to_csv(tmp_path / "h.csv")
    review = open_review(tmp_path / "h.csv")
    html = review.export(tmp_path / "h-review.html").read_text(encoding="utf-8")
    assert "<script>alert" not in html and "<img" not in html
    text = review.export(tmp_path / "h-review.csv").read_text(encoding="utf-8")
    for row in csv.DictReader(l for l in text.splitlines() if not l.startswith("#")):
        assert not row["top_candidate"].startswith(("=", "@", "+")), row


# ------------------------------------------------------------------ confirm --review


def test_confirm_review_adds_only_peaks_confirmed_with_a_standard(demo, result, tmp_path):
    db = tmp_path / "lab.sqlite"
    copy_library(demo, db)
    review = open_review(result, reviewer="ana")
    review.decide({"run": "run", "peak": "12", "decision": "accept", "name": "terpinolene", "standard": True})
    review.decide({"run": "run", "peak": "11", "decision": "accept", "name": "gamma-terpinene"})  # putative only
    review.decide({"run": "run", "peak": "13", "decision": "reject"})
    rpath = record_path(result)
    r = invoke(["confirm", "--review", str(rpath), "--source", "std lot T-3", "--db", str(db)])
    assert r.exit_code == 0, r.output
    assert "peak 12 (run run), terpinolene" in r.output and "peak 11" not in r.output
    doc = json.loads(rpath.read_text(encoding="utf-8"))
    assert [(a["peak"], a["name"]) for a in doc["added"]] == [("12", "terpinolene")]
    # the same check as confirm: the observation carries the run's identity and the source
    import matcher

    hist = matcher.open_library(str(db)).history("terpinolene")
    assert any("std lot T-3" in json.dumps(h) for h in hist)
    # a second time: nothing left to add
    r = invoke(["confirm", "--review", str(rpath), "--db", str(db)])
    assert r.exit_code == 2 and "nothing to add" in r.output


def test_confirm_review_goes_through_the_outlier_guard(demo, result, tmp_path):
    db = tmp_path / "lab.sqlite"
    copy_library(demo, db)
    review = open_review(result, reviewer="ana")
    # peak 1 (index about 803) accepted as limonene (library centre about 1030): far outside max(3 spreads, window)
    review.decide({"run": "run", "peak": "1", "decision": "accept", "name": "limonene", "standard": True})
    r = invoke(["confirm", "--review", str(record_path(result)), "--db", str(db)])
    assert r.exit_code == 1, r.output
    assert "refused" in r.output
    assert json.loads(record_path(result).read_text(encoding="utf-8"))["added"] == []


def test_confirm_review_refuses_a_changed_result(demo, result, tmp_path):
    db = tmp_path / "lab.sqlite"
    copy_library(demo, db)
    open_review(result).decide({"run": "run", "peak": "12", "decision": "accept", "name": "terpinolene",
                                "standard": True})
    result.write_text(result.read_text(encoding="utf-8") + "\n", encoding="utf-8")
    r = invoke(["confirm", "--review", str(record_path(result)), "--db", str(db)])
    assert r.exit_code == 2 and "made for other content" in r.output


def test_confirm_without_review_still_needs_its_arguments():
    r = invoke(["confirm", "--peak", "1"])
    assert r.exit_code == 2 and "confirm needs RESULTS, --name" in r.output


def test_a_written_record_matches_its_schema(demo, result, tmp_path):
    import importlib.resources

    import jsonschema

    schema = json.loads(importlib.resources.files("matcher.schemas").joinpath("review-record.schema.json")
                        .read_text(encoding="utf-8"))
    db = tmp_path / "lab.sqlite"
    copy_library(demo, db)
    review = open_review(result, reviewer="ana")
    review.decide({"run": "run", "peak": "12", "decision": "accept", "name": "terpinolene", "standard": True,
                   "note": "std lot T-3"})
    review.decide({"run": "run", "peak": "13", "decision": "unsure"})
    assert invoke(["confirm", "--review", str(record_path(result)), "--db", str(db)]).exit_code == 0
    doc = json.loads(record_path(result).read_text(encoding="utf-8"))
    jsonschema.validate(doc, schema)
    assert len(doc["added"]) == 1
    bad = {**doc, "decisions": [{**doc["decisions"][0], "decision": "maybe"}]}
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(bad, schema)


# ------------------------------------------------------------------ the command's own refusals


def test_review_refuses_a_bad_or_busy_port_before_serving(result):
    import socket

    r = invoke(["review", result, "--port", "70000"])
    assert r.exit_code == 2 and "--port must be between 1 and 65535" in r.output
    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen(1)
        port = busy.getsockname()[1]
        r = invoke(["review", result, "--port", port])
        assert r.exit_code == 2 and f"cannot listen on 127.0.0.1:{port}" in r.output


def test_export_with_server_options_is_refused(result, tmp_path):
    r = invoke(["review", result, "--export", tmp_path / "r.csv", "--open"])
    assert r.exit_code == 2 and "leave out --port and --open" in r.output
    assert not (tmp_path / "r.csv").exists()


def test_a_missing_result_is_refused_by_name(tmp_path):
    r = invoke(["review", tmp_path / "nope.csv", "--export", tmp_path / "r.csv"])
    assert r.exit_code == 2 and "nope.csv" in r.output and "not found" in r.output


def test_further_fields_of_a_json_result_reach_the_page(tmp_path):
    """A peak's spectrum and a candidate's extra figures (as a newer screen may write them) pass through."""
    res = make_result()
    res.to_json(tmp_path / "s.json")
    doc = json.loads((tmp_path / "s.json").read_text(encoding="utf-8"))
    peak = next(p for p in doc["runs"][0]["peaks"] if p["candidates"])
    peak["spectrum"] = [[93, 999], [136, 310]]  # invented
    peak["candidates"][0]["spectrum_similarity"] = 0.91
    (tmp_path / "s.json").write_text(json.dumps(doc), encoding="utf-8")
    got = next(p for p in open_review(tmp_path / "s.json").peaks() if p["peak"] == str(peak["peak"])
               and p["run"] == doc["runs"][0]["label"])
    assert got["spectrum"] == [[93, 999], [136, 310]]
    assert got["candidates"][0]["spectrum_similarity"] == 0.91


def test_a_json_result_edited_into_another_shape_is_refused_by_name(tmp_path):
    res = make_result()
    res.to_json(tmp_path / "s.json")
    doc = json.loads((tmp_path / "s.json").read_text(encoding="utf-8"))
    doc["runs"][0]["peaks"][0] = "not a peak"
    (tmp_path / "s.json").write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(MatcherError, match="s.json: not a matcher screening output"):
        read_result(tmp_path / "s.json")


def test_review_help_carries_the_caution_and_what_accepting_means():
    r = runner.invoke(app, ["review", "--help"])
    text = " ".join(r.output.split())
    assert " ".join(CAUTION.split()) in text
    assert "putative annotation, not a confirmation" in text
