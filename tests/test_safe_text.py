"""Spreadsheet-formula neutralisation and HTML escaping.

Trigger characters and the single-quote remedy follow the OWASP guidance on
CSV injection (OWASP Foundation, "CSV Injection",
https://owasp.org/www-community/attacks/CSV_Injection) and OWASP ASVS 5.0
requirement 1.2.10 (which adds NUL). HTML escaping is checked against the
Python standard library's own html.escape / html.unescape and html.parser.
"""

from __future__ import annotations

from html.parser import HTMLParser

import pytest
from hypothesis import given
from hypothesis import strategies as st

from matcher.safe_text import (
    FORMULA_TRIGGERS,
    html_text,
    is_plain_number,
    needs_neutralising,
    neutralise,
    spreadsheet_text,
)

# OWASP CSV Injection page: cells starting with =, +, -, @, tab (0x09) or CR (0x0D) are dangerous.
OWASP_TRIGGERS = ["=", "+", "-", "@", "\t", "\r"]


@pytest.mark.parametrize("first", OWASP_TRIGGERS)
def test_every_owasp_trigger_gets_a_leading_quote(first):
    text = first + "cmd|' /C calc'!A0"
    assert neutralise(text) == "'" + text


@pytest.mark.parametrize(
    "text",
    [
        '=HYPERLINK("http://x")',          # OWASP example family: hyperlink exfiltration
        "=cmd|' /C calc'!A0",              # OWASP example: DDE payload
        "@SUM(1)",
        "-2+3",
        "+1+1",
        "  =1+1",                          # leading spaces before the trigger
        "\t=1",
        "\x00=1",                          # ASVS 5.0 1.2.10 lists NUL
        "\uff1dSUM(1)",                    # full-width equals sign (our defensive extension)
    ],
)
def test_hostile_text_is_neutralised(text):
    out = neutralise(text)
    assert out == "'" + text
    assert not needs_neutralising(out)


@pytest.mark.parametrize("text", ["-3.2", "+1e5", "1020.5", "-0.75", ".5", "7"])
def test_genuine_numbers_stay_numbers(text):
    # a spreadsheet reads these as numbers and runs nothing (common practice, no single source)
    assert is_plain_number(text)
    assert neutralise(text) == text
    assert float(neutralise(text)) == float(text)


@pytest.mark.parametrize("text", ["-inf", "-nan", "-3,2", "-1-1", "- 3", "-1e5+1"])
def test_number_lookalikes_are_neutralised(text):
    assert not is_plain_number(text)
    assert neutralise(text) == "'" + text


@pytest.mark.parametrize("text", ["alpha-pinene", "1,8-cineole", "(E)-beta-ocimene", "", "'quoted", "linalool oxide"])
def test_ordinary_names_are_untouched(text):
    assert neutralise(text) == text


@pytest.mark.parametrize("value", [1020.5, -3.2, 0, -7, None, True])
def test_non_text_values_are_returned_unchanged(value):
    assert neutralise(value) is value


@given(st.text())
def test_neutralised_text_never_starts_with_a_trigger(text):
    out = neutralise(text)
    stripped = out.lstrip()
    if is_plain_number(out):
        assert out == text
    else:
        assert not out or out[0] not in FORMULA_TRIGGERS
        assert not stripped or stripped[0] not in FORMULA_TRIGGERS
    # only ever one quote added, never anything removed
    assert out in (text, "'" + text)


@given(st.floats(allow_nan=False, allow_infinity=False) | st.integers())
def test_numbers_and_their_text_stay_numeric(number):
    assert neutralise(number) == number
    text = repr(number) if isinstance(number, float) else str(number)
    if is_plain_number(text):
        assert neutralise(text) == text


@given(st.text())
def test_spreadsheet_text_holds_only_xml_characters(text):
    out = spreadsheet_text(text)
    assert not any(ord(c) < 32 and c not in "\t\n\r" for c in out)
    # a genuine number such as "-0" stays as it is (a spreadsheet reads it as a number, not a formula)
    assert not out or out[0] not in FORMULA_TRIGGERS or is_plain_number(out)


class _Collect(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags, self.data, self.attrs = [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs.extend(attrs)

    def handle_data(self, data):
        self.data.append(data)


@pytest.mark.parametrize("text", ["<script>alert(1)</script>", '"><img src=x onerror=alert(1)>', "a & b", "it's"])
def test_html_text_escapes_markup_in_text_and_attributes(text):
    import html

    escaped = html_text(text)
    assert html.unescape(escaped) == text  # standard library round trip
    body = _Collect()
    body.feed(f"<p>{escaped}</p>")
    assert body.tags == ["p"] and "".join(body.data) == text
    attr = _Collect()
    attr.feed(f'<span title="{escaped}">x</span>')
    assert attr.tags == ["span"] and attr.attrs == [("title", text)]


@given(st.text())
def test_html_text_never_leaves_markup_characters(text):
    out = html_text(text)
    assert "<" not in out and ">" not in out and '"' not in out and "'" not in out
