"""The review API through Starlette's test client: token, Host check, cross-origin writes,
persistence, a changed result, two writers. The screened run is the bundled demo (invented numbers)."""

from __future__ import annotations

import csv
import hashlib
import json
import re
import shutil
import subprocess
import threading

import warnings

import pytest

with warnings.catch_warnings():  # newer Starlette suggests another HTTP client for its test client; httpx still works
    warnings.filterwarnings("ignore", message=".*httpx.*")
    from starlette.testclient import TestClient

from matcher.errors import MatcherError
from matcher.review.server import TOKEN_HEADER, create_app
from matcher.review.session import open_review, record_path
from review_helpers import PORT, copy_library, copy_result, demo, result  # noqa: F401 - fixtures

TOKEN = "t0ken-for-tests-only"
BASE = f"http://127.0.0.1:{PORT}"


def client_for(result, reviewer="ana", db=None):
    review = open_review(result, reviewer=reviewer)
    return TestClient(create_app(review, token=TOKEN, port=PORT, db=db), base_url=BASE), review


H = {TOKEN_HEADER: TOKEN}


def demo_peak_ids(result):
    with open(result, newline="", encoding="utf-8") as fh:
        ids = []
        for row in csv.DictReader(fh):
            if row["peak"] not in ids:
                ids.append(row["peak"])
    return ids


# ------------------------------------------------------------------ token


def test_peaks_are_not_served_without_the_token(result):
    client, _ = client_for(result)
    assert client.get("/api/peaks").status_code == 403
    assert client.get("/api/peaks", headers={TOKEN_HEADER: "wrong"}).status_code == 403
    assert client.get(f"/api/peaks?token={TOKEN}").status_code == 403  # the API wants the header, not the address
    assert client.get("/").status_code == 403                          # the page wants the token in the address
    assert client.get("/api/record").status_code == 403


def test_every_peak_is_listed_with_its_candidates_and_no_decision(result):
    client, _ = client_for(result)
    r = client.get("/api/peaks", headers=H)
    assert r.status_code == 200
    doc = r.json()
    peaks = doc["peaks"]
    # every peak id of the CSV, in file order (the demo run has 34 peaks)
    assert [p["peak"] for p in peaks] == demo_peak_ids(result)
    assert len(peaks) == 34 == doc["summary"]["peaks"]
    assert all(p["decision"] is None for p in peaks)
    first = peaks[0]
    with open(result, newline="", encoding="utf-8") as fh:
        rows = [r for r in csv.DictReader(fh) if r["peak"] == first["peak"]]
    assert [c["name"] for c in first["candidates"]] == [r["name"] for r in rows if r["rank"]]
    assert first["candidates"][0]["probability"] == pytest.approx(float(rows[0]["probability"]))
    # the ladder position: peak 1's index 923.93 lies between n-C9 (900) and n-C10 (1000) of the demo ladder
    assert first["ladder"]["below"]["index"] == 900 and first["ladder"]["above"]["index"] == 1000
    assert "Results are tentative" in doc["summary"]["caution"]


def test_a_decision_without_the_token_is_refused_and_one_with_it_is_kept(result):
    client, _ = client_for(result)
    body = {"run": "run", "peak": "7", "decision": "accept", "name": "6-methyl-5-hepten-2-one", "note": "checked"}
    assert client.post("/api/decisions", json=body).status_code == 403
    assert not record_path(result).exists()  # nothing written on a refused request
    r = client.post("/api/decisions", json=body, headers=H)
    assert r.status_code == 200, r.text
    assert r.json()["decision"]["reviewer"] == "ana"
    rec = json.loads(record_path(result).read_text(encoding="utf-8"))
    assert [(d["peak"], d["decision"], d["name"], d["note"]) for d in rec["decisions"]] == [
        ("7", "accept", "6-methyl-5-hepten-2-one", "checked")]


# ------------------------------------------------------------------ host and origin


@pytest.mark.parametrize("host", ["evil.example", f"evil.example:{PORT}", "127.0.0.1", f"127.0.0.1:{PORT + 1}",
                                  f"192.168.0.10:{PORT}", f"127.0.0.1.evil.example:{PORT}"])
def test_a_foreign_host_header_is_refused_even_with_the_token(result, host):
    # DNS rebinding: a foreign page's name resolved to 127.0.0.1 sends its own name as Host
    # (RFC 9110, section 7.2: Host carries the authority the client asked for)
    client, _ = client_for(result)
    assert client.get("/api/peaks", headers={**H, "Host": host}).status_code == 403
    r = client.post("/api/decisions", json={"run": "run", "peak": "7", "decision": "reject"},
                    headers={**H, "Host": host})
    assert r.status_code == 403
    assert not record_path(result).exists()


def test_localhost_with_the_right_port_is_accepted(result):
    client, _ = client_for(result)
    assert client.get("/api/peaks", headers={**H, "Host": f"localhost:{PORT}"}).status_code == 200


@pytest.mark.parametrize("headers, status", [
    ({"Origin": "http://evil.example"}, 403),
    ({"Origin": f"http://127.0.0.1:{PORT + 1}"}, 403),
    ({"Sec-Fetch-Site": "cross-site"}, 403),   # W3C Fetch Metadata Request Headers
    ({"Sec-Fetch-Site": "same-site"}, 403),
    ({"Origin": BASE, "Sec-Fetch-Site": "same-origin"}, 200),
])
def test_cross_origin_writes_are_refused(result, headers, status):
    client, _ = client_for(result)
    r = client.post("/api/decisions", json={"run": "run", "peak": "3", "decision": "unsure"}, headers={**H, **headers})
    assert r.status_code == status, r.text
    assert record_path(result).exists() == (status == 200)


def test_a_form_post_is_refused(result):
    client, _ = client_for(result)
    form = {"Content-Type": "application/x-www-form-urlencoded"}
    r = client.post("/api/decisions", content=b"run=run&peak=3&decision=reject", headers={**H, **form})
    assert r.status_code == 400 and "not JSON" in r.json()["error"]
    # without the token a form never gets as far as being read
    assert client.post("/api/decisions", content=b"run=run&peak=3&decision=reject", headers=form).status_code == 403
    assert not record_path(result).exists()


def test_json_sent_without_a_content_type_is_read_when_the_token_is_there(result):
    client, _ = client_for(result)
    r = client.post("/api/decisions", content=json.dumps({"run": "run", "peak": "3", "decision": "reject"}),
                    headers={**H, "Content-Type": ""})
    assert r.status_code == 200


def test_the_page_forbids_every_load_from_elsewhere(result):
    client, _ = client_for(result)
    r = client.get(f"/?token={TOKEN}")
    assert r.status_code == 200
    csp = r.headers["content-security-policy"]
    assert "default-src 'none'" in csp and "connect-src 'self'" in csp
    nonce = csp.split("'nonce-")[1].split("'")[0]
    assert f'<script nonce="{nonce}">' in r.text
    assert "src=" not in r.text.replace(f'nonce="{nonce}"', "")   # no external script, image or frame
    text = r.text.replace('"http://www.w3.org/2000/svg"', "")   # the SVG namespace name is not a load
    assert "http://" not in text and "https://" not in text
    assert r.headers["referrer-policy"] == "no-referrer"
    assert "Results are tentative" in r.text and "not a confirmation" in r.text
    # the peak list is in the page itself (before its script runs): every peak, marked ones first
    listed = re.findall(r'<li data-peak="([^"]+)" data-run="run" data-status="open">', r.text)
    assert sorted(listed) == sorted(demo_peak_ids(result))
    marked = [p["peak"] for p in client.get("/api/peaks", headers=H).json()["peaks"] if p["needs_review"]]
    assert listed[:len(marked)] == marked


# ------------------------------------------------------------------ bad decisions


@pytest.mark.parametrize("body, message", [
    ({"run": "run", "peak": "7", "decision": "maybe"}, "decision must be one of accept, reject, unsure"),
    ({"run": "run", "peak": "7", "decision": "accept"}, "accepting needs the name"),
    ({"run": "run", "peak": "999", "decision": "reject"}, "no peak '999' in run 'run'"),
    ({"run": "run", "peak": "7", "decision": "reject", "why": "x"}, "unknown field(s) why"),
    ({"run": "run", "peak": "7", "decision": "reject", "standard": True}, "only an accepted peak"),
    ({"run": "run", "peak": "7", "decision": "reject", "note": "a\x00b"}, "control characters"),
    (["run"], "a decision is a JSON object"),
])
def test_bad_decisions_are_refused_with_a_message_and_nothing_written(result, body, message):
    client, _ = client_for(result)
    r = client.post("/api/decisions", json=body, headers=H)
    assert r.status_code == 400
    assert message in r.json()["error"]
    assert not record_path(result).exists()


# ------------------------------------------------------------------ persistence and the record


def test_a_restart_shows_every_decision_again(result):
    client, _ = client_for(result, reviewer="ana")
    for peak, decision in (("7", "unsure"), ("14", "reject"), ("12", "unsure")):
        assert client.post("/api/decisions", json={"run": "run", "peak": peak, "decision": decision}, headers=H).status_code == 200
    # a new session (new review object, new app, a new reviewer) on the same result
    client2, _ = client_for(result, reviewer="ben")
    peaks = {p["peak"]: p for p in client2.get("/api/peaks", headers=H).json()["peaks"]}
    assert {k: p["decision"]["decision"] for k, p in peaks.items() if p["decision"]} == {
        "7": "unsure", "14": "reject", "12": "unsure"}
    assert peaks["7"]["decision"]["reviewer"] == "ana"


def test_the_record_names_the_result_checksum_and_library_revision(result):
    client, _ = client_for(result)
    client.post("/api/decisions", json={"run": "run", "peak": "1", "decision": "accept", "name": "ethyl butanoate"},
                headers=H)
    rec = json.loads(record_path(result).read_text(encoding="utf-8"))
    assert rec["format"] == "matcher.review" and rec["format_version"] == 1
    assert rec["result"]["sha256"] == hashlib.sha256(result.read_bytes()).hexdigest()
    if shutil.which("sha256sum"):  # the same figure as coreutils' sha256sum (outside the project)
        out = subprocess.run(["sha256sum", str(result)], capture_output=True, text=True, check=True).stdout
        assert out.split()[0] == rec["result"]["sha256"]
    meta = json.loads((result.parent / "shortlist.csv.meta.json").read_text(encoding="utf-8"))
    assert rec["result"]["library_revision"] == str(meta["library"]["revision"])
    assert rec["decisions"][0]["time"].endswith("Z") and "not a confirmation" in rec["accepting_means"]


def test_a_changed_result_is_refused_not_mixed(result):
    client, _ = client_for(result)
    client.post("/api/decisions", json={"run": "run", "peak": "7", "decision": "reject"}, headers=H)
    before = record_path(result).read_bytes()
    result.write_text(result.read_text(encoding="utf-8").replace("923.93", "923.94"), encoding="utf-8")
    # the running session refuses the next decision ...
    r = client.post("/api/decisions", json={"run": "run", "peak": "8", "decision": "reject"}, headers=H)
    assert r.status_code == 409 and "changed since" in r.json()["error"]
    # ... and a new session refuses to start
    with pytest.raises(MatcherError, match="made for other content"):
        open_review(result)
    assert record_path(result).read_bytes() == before


def test_two_tabs_last_write_per_peak_wins_and_both_are_in_the_history(result):
    tab1, _ = client_for(result, reviewer="ana")
    tab2, _ = client_for(result, reviewer="ben")  # a second session on the same record
    assert tab1.post("/api/decisions", json={"run": "run", "peak": "7", "decision": "accept",
                                             "name": "6-methyl-5-hepten-2-one"}, headers=H).status_code == 200
    assert tab2.post("/api/decisions", json={"run": "run", "peak": "7", "decision": "reject"}, headers=H).status_code == 200
    assert tab1.post("/api/decisions", json={"run": "run", "peak": "9", "decision": "unsure"}, headers=H).status_code == 200
    rec = json.loads(record_path(result).read_text(encoding="utf-8"))
    current = {d["peak"]: (d["decision"], d["reviewer"]) for d in rec["decisions"]}
    assert current == {"7": ("reject", "ben"), "9": ("unsure", "ana")}  # tab 1's write did not drop tab 2's
    assert [(d["peak"], d["decision"], d["reviewer"]) for d in rec["history"]] == [
        ("7", "accept", "ana"), ("7", "reject", "ben"), ("9", "unsure", "ana")]


def test_many_writers_at_once_lose_nothing(result):
    client, review = client_for(result)
    ids = demo_peak_ids(result)[:20]
    errors = []

    def write(peak):
        r = client.post("/api/decisions", json={"run": "run", "peak": peak, "decision": "unsure"}, headers=H)
        if r.status_code != 200:
            errors.append(r.text)

    threads = [threading.Thread(target=write, args=(p,)) for p in ids]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    rec = json.loads(record_path(result).read_text(encoding="utf-8"))
    assert sorted(d["peak"] for d in rec["decisions"]) == sorted(ids)
    assert len(rec["history"]) == 20
    assert not [p for p in result.parent.iterdir() if p.name.startswith(".")]  # no temporary files left


# ------------------------------------------------------------------ adding to the library from the page


def test_adding_from_the_page_goes_through_confirm_and_is_listed(demo, result, tmp_path):
    db = tmp_path / "lab.sqlite"
    copy_library(demo, db)
    client, _ = client_for(result, db=str(db))
    # not accepted yet: refused
    assert client.post("/api/library", json={"run": "run", "peak": "7"}, headers=H).status_code == 409
    client.post("/api/decisions", json={"run": "run", "peak": "7", "decision": "accept",
                                        "name": "δ-3-carene"}, headers=H)
    r = client.post("/api/library", json={"run": "run", "peak": "7"}, headers=H)
    assert r.status_code == 409 and "confirmed with an authentic standard" in r.json()["error"]  # accepting is not confirming
    client.post("/api/decisions", json={"run": "run", "peak": "7", "decision": "accept",
                                        "name": "δ-3-carene", "standard": True}, headers=H)
    r = client.post("/api/library", json={"run": "run", "peak": "7", "source": "std lot M-7"}, headers=H)
    assert r.status_code == 200, r.text
    assert r.json()["added"] is True
    # the same peak twice: refused by the review record
    assert client.post("/api/library", json={"run": "run", "peak": "7"}, headers=H).status_code == 409
    peaks = {p["peak"]: p for p in client.get("/api/peaks", headers=H).json()["peaks"]}
    assert peaks["7"]["added"]["observation"] == r.json()["observation"]
    import matcher

    hist = matcher.open_library(str(db)).history("δ-3-carene")
    assert any("std lot M-7" in json.dumps(h) for h in hist)


def test_without_a_library_the_page_cannot_add(result):
    client, _ = client_for(result)
    r = client.post("/api/library", json={"run": "run", "peak": "7"}, headers=H)
    assert r.status_code == 409 and "--db" in r.json()["error"]


def test_hostile_library_text_is_only_text_on_the_page(tmp_path):
    from result_factory import HOSTILE_NAMES, make_result

    make_result(hostile=True).to_csv(tmp_path / "h.csv")
    client, _ = client_for(tmp_path / "h.csv")
    r = client.get(f"/?token={TOKEN}")
    assert r.status_code == 200
    assert "<script>alert(1)</script>" not in r.text and "<img src=x" not in r.text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in r.text   # shown, escaped (HTML5 character references)
    names = {c["name"] for p in client.get("/api/peaks", headers=H).json()["peaks"] for c in p["candidates"]}
    assert "<script>alert(1)</script>" in names  # the API hands the text over as it is; the page sets it as text


def test_two_reviews_of_one_result_writing_at_once_lose_nothing(result):
    """Two sessions (as two `matcher review` processes would be) each with its own in-process lock:
    the lock on the result file makes them queue."""
    a, b = open_review(result, reviewer="ana"), open_review(result, reviewer="ben")
    ids = demo_peak_ids(result)
    errors = []

    def write(review, peaks):
        try:
            for p in peaks:
                review.decide({"run": "run", "peak": p, "decision": "unsure"})
        except Exception as exc:  # noqa: BLE001 - reported below
            errors.append(repr(exc))

    t1 = threading.Thread(target=write, args=(a, ids[:15]))
    t2 = threading.Thread(target=write, args=(b, ids[15:30]))
    t1.start(); t2.start(); t1.join(); t2.join()
    assert not errors
    rec = json.loads(record_path(result).read_text(encoding="utf-8"))
    assert sorted(d["peak"] for d in rec["decisions"]) == sorted(ids[:30])
    assert len(rec["history"]) == 30
    assert {d["reviewer"] for d in rec["history"]} == {"ana", "ben"}
