"""The review page in a real headless Chromium (Debian's ``chromium``), driven by Playwright.

The server is the installed ``matcher review`` command, started as a subprocess and read
back from the address it prints. Skipped cleanly when Playwright or the browser is missing
(``.ci/run`` installs Debian's ``chromium`` when it can). Playwright never downloads a
browser here: it is pointed at the system one.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
import sys
import time
from pathlib import Path

import pytest

from review_helpers import copy_result, demo_outputs

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--no-first-run"]

sync_api = pytest.importorskip("playwright.sync_api", reason="playwright is not installed")
pytestmark = pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="no chromium browser on this machine")


def _matcher() -> list[str]:
    exe = Path(sys.executable).with_name("matcher")
    return [str(exe)] if exe.exists() else [shutil.which("matcher") or "matcher"]


class Server:
    def __init__(self, result: Path, reviewer: str, cwd: Path):
        self.proc = subprocess.Popen(_matcher() + ["review", str(result), "--reviewer", reviewer],
                                     stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=cwd)
        line = self.proc.stdout.readline()
        m = re.search(r"(http://127\.0\.0\.1:(\d+)/\?token=[A-Za-z0-9_\-]+)", line)
        if not m:
            self.stop()
            raise AssertionError(f"no address printed: {line!r} {self.proc.stderr.read()}")
        self.url, self.port = m.group(1), int(m.group(2))
        self.base = f"http://127.0.0.1:{self.port}"

    def stop(self):
        self.proc.terminate()
        try:
            self.proc.wait(timeout=10)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()


@pytest.fixture(scope="module")
def browser():
    with sync_api.sync_playwright() as pw:
        try:
            b = pw.chromium.launch(executable_path=CHROMIUM, args=ARGS, headless=True)
        except sync_api.Error as exc:  # a browser that cannot start here (libraries missing): not our page's fault
            pytest.skip(f"chromium does not start on this machine: {str(exc).splitlines()[0]}")
        yield b
        b.close()


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return demo_outputs(tmp_path_factory.mktemp("demo"))


def _open(browser, server):
    page = browser.new_page()
    requests: list[str] = []
    page.on("request", lambda r: requests.append(r.url))
    page.goto(server.url)
    page.wait_for_selector("#peaks li")
    return page, requests


def test_the_page_lists_every_peak_carries_the_caution_and_a_keyboard_decision_survives_a_restart(browser, demo, tmp_path):
    result = copy_result(demo, tmp_path / "run")
    server = Server(result, "ana", tmp_path)
    try:
        page, requests = _open(browser, server)
        # every peak of the run, by id (the demo run has 34 peaks)
        listed = page.eval_on_selector_all("#peaks li", "els => els.map(e => e.dataset.peak)")
        import csv

        with open(result, newline="", encoding="utf-8") as fh:
            ids = list(dict.fromkeys(r["peak"] for r in csv.DictReader(fh)))
        assert sorted(listed) == sorted(ids) and len(listed) == 34
        # the caution and what accepting means are on the page
        text = " ".join(page.inner_text("body").split())
        assert "Results are tentative (putative) identifications, not confirmed identities." in text
        assert "not a confirmation" in text
        # peaks marked for review come first
        first = page.eval_on_selector("#peaks li.sel", "e => e.dataset.peak")
        top_name = page.inner_text("#cands tr.picked td:nth-child(2)")
        # a decision by keyboard: 'a' accepts the picked (first) candidate
        page.keyboard.press("a")
        page.wait_for_selector(f'#peaks li[data-peak="{first}"][data-status="accept"]')
        # the next peak is selected; 'u' marks it unsure
        second = page.eval_on_selector("#peaks li.sel", "e => e.dataset.peak")
        assert second != first
        page.keyboard.press("u")
        page.wait_for_selector(f'#peaks li[data-peak="{second}"][data-status="unsure"]')
        record = json.loads((result.parent / (result.name + ".review.json")).read_text(encoding="utf-8"))
        got = {d["peak"]: (d["decision"], d["name"], d["reviewer"]) for d in record["decisions"]}
        assert got == {first: ("accept", top_name, "ana"), second: ("unsure", "", "ana")}
        # nothing was loaded from anywhere but the review server itself
        assert requests and all(u.startswith(server.base + "/") for u in requests), requests
        page.close()
    finally:
        server.stop()

    # a restart (new process, new port, new token) shows the decisions again
    server = Server(result, "ben", tmp_path)
    try:
        page, requests = _open(browser, server)
        assert page.get_attribute(f'#peaks li[data-peak="{first}"]', "data-status") == "accept"
        assert page.get_attribute(f'#peaks li[data-peak="{second}"]', "data-status") == "unsure"
        page.click(f'#peaks li[data-peak="{first}"]')
        assert "by ana" in page.inner_text("#current")
        assert all(u.startswith(server.base + "/") for u in requests), requests
        page.close()
    finally:
        server.stop()


def test_the_page_refuses_to_open_without_the_token(browser, demo, tmp_path):
    result = copy_result(demo, tmp_path / "run")
    server = Server(result, "ana", tmp_path)
    try:
        page = browser.new_page()
        resp = page.goto(server.base + "/")
        assert resp.status == 403
        assert "token" in page.inner_text("body")
        page.close()
    finally:
        server.stop()


def test_filters_and_a_note_reach_the_record(browser, demo, tmp_path):
    result = copy_result(demo, tmp_path / "run")
    server = Server(result, "ana", tmp_path)
    try:
        page, _ = _open(browser, server)
        page.check("#f-review")
        marked = page.eval_on_selector_all("#peaks li", "els => els.map(e => e.dataset.peak)")
        assert 0 < len(marked) < 34
        page.keyboard.press("n")
        page.keyboard.type("two co-eluting peaks; re-run on the polar column")
        page.keyboard.press("Escape")
        page.keyboard.press("r")
        peak = marked[0]
        page.wait_for_selector(f'#peaks li[data-peak="{peak}"][data-status="reject"]')
        deadline = time.time() + 5
        path = result.parent / (result.name + ".review.json")
        while not path.exists() and time.time() < deadline:
            time.sleep(0.05)
        record = json.loads(path.read_text(encoding="utf-8"))
        assert record["decisions"][0]["note"] == "two co-eluting peaks; re-run on the polar column"
        page.close()
    finally:
        server.stop()


def test_hostile_library_text_never_runs_in_the_page(browser, tmp_path):
    from result_factory import make_result

    make_result(hostile=True).to_csv(tmp_path / "h.csv")
    server = Server(tmp_path / "h.csv", "ana", tmp_path)
    try:
        page = browser.new_page()
        dialogs: list[str] = []
        requests: list[str] = []
        page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
        page.on("request", lambda r: requests.append(r.url))
        page.goto(server.url)
        page.wait_for_selector("#cands")
        count = page.eval_on_selector_all("#peaks li", "els => els.length")
        for _ in range(count):
            page.keyboard.press("j")
        assert "<script>alert(1)</script>" in page.inner_text("#peaks")  # shown as text
        assert dialogs == []
        assert all(u.startswith(server.base + "/") for u in requests), requests
        page.close()
    finally:
        server.stop()


def test_a_two_column_result_shows_the_partner_and_the_second_deviation(browser, tmp_path):
    """Two invented runs of one sample on 5 % phenyl and polyethylene glycol (indices of
    tests/data/essential_oil_indices.csv and polar_indices.csv, recalled from memory)."""
    import matcher
    from test_two_columns import sample_runs, two_class_library

    first, second, _, truth = sample_runs(4, n=12)
    out = tmp_path / "both.csv"
    matcher.screen(first, phase_class="slightly-polar", library=two_class_library(), second=second,
                   second_class="polar", output=out)
    server = Server(out, "ana", tmp_path)
    try:
        page, _ = _open(browser, server)
        text = page.inner_text("#detail")
        first_peak = page.inner_text("#detail h2").split()[1]
        assert f"paired with peak {truth[first_peak]} of the second column" in text
        assert "second ΔRI" in page.inner_text("#cands")
        page.close()
    finally:
        server.stop()
