"""The shared table reader: encodings, delimiters, preambles and hostile files."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings, HealthCheck
from hypothesis import strategies as st

from matcher.errors import InputError
from matcher.io.delimited import load_table, map_headers, numbers, texts


def write(tmp_path, name, content, mode="w", encoding="utf-8"):
    p = tmp_path / name
    if isinstance(content, bytes):
        p.write_bytes(content)
    else:
        p.write_text(content, encoding=encoding, newline="")
    return str(p)


def test_plain_csv_cells_are_text_and_lines_are_physical(tmp_path):
    p = write(tmp_path, "a.csv", "# invented demo data\n\npeak,rt\n1,5.2\n\n2,7\n")
    raw = load_table(p)
    assert raw.header == ["peak", "rt"]
    assert raw.first_line == 3
    assert raw.frame.values.tolist() == [["1", "5.2"], ["2", "7"]]
    assert [raw.line_of(1), raw.line_of(2)] == [4, 6]
    assert numbers(raw, "rt").tolist() == [5.2, 7.0]


def test_utf8_bom_is_read(tmp_path):
    p = write(tmp_path, "bom.csv", b"\xef\xbb\xbfpeak,rt\n1,5.5\n")
    raw = load_table(p)
    assert raw.header == ["peak", "rt"]  # the BOM is not part of the first header name
    assert raw.encoding == "utf-8-sig"


@pytest.mark.parametrize("enc,bom", [("utf-16-le", b"\xff\xfe"), ("utf-16-be", b"\xfe\xff")])
def test_utf16_with_bom_is_read(tmp_path, enc, bom):
    p = write(tmp_path, "u16.csv", bom + "peak\trt\r\nα-pinene\t5,5\r\n".encode(enc))
    raw = load_table(p)
    assert raw.encoding == enc
    assert raw.delimiter == "\t"
    assert texts(raw, "peak") == ["α-pinene"]


def test_latin1_fallback_only_when_not_utf8(tmp_path):
    p = write(tmp_path, "l1.csv", "name,rt\nm\xe9thyl,5\n".encode("latin-1"))
    raw = load_table(p)
    assert raw.encoding == "latin-1"
    assert texts(raw, "name") == ["méthyl"]
    q = write(tmp_path, "u8.csv", "name,rt\nméthyl,5\n")
    assert load_table(q).encoding == "utf-8"


def test_semicolon_with_decimal_commas(tmp_path):
    p = write(tmp_path, "eu.csv", "peak;rt;area\n1;5,25;1200\n2;12,5;3,5e2\n")
    raw = load_table(p)
    assert raw.delimiter == ";" and raw.decimal_comma
    assert numbers(raw, "rt").tolist() == [5.25, 12.5]
    assert numbers(raw, "area").tolist() == [1200.0, 350.0]


def test_decimal_comma_not_accepted_with_comma_delimiter(tmp_path):
    p = write(tmp_path, "q.csv", 'peak,rt\n1,"5,25"\n')
    raw = load_table(p)
    with pytest.raises(InputError, match="not a number: '5,25'") as ei:
        numbers(raw, "rt")
    assert (ei.value.row, ei.value.line, ei.value.column) == (1, 2, "rt")


def test_thousands_and_decimal_mixed_is_refused(tmp_path):
    p = write(tmp_path, "q.csv", "peak;rt\n1;1.234,5\n")
    with pytest.raises(InputError, match="not a number"):
        numbers(load_table(p), "rt")


def test_empty_and_comment_only_files(tmp_path):
    with pytest.raises(InputError, match="empty file"):
        load_table(write(tmp_path, "e.csv", ""))
    with pytest.raises(InputError, match="empty file"):
        load_table(write(tmp_path, "w.csv", "\n \n\t\n"))
    with pytest.raises(InputError, match="empty file"):
        load_table(write(tmp_path, "c.csv", "# only a comment\n"))


def test_header_only_is_an_empty_table(tmp_path):
    raw = load_table(write(tmp_path, "h.csv", "peak,rt\n"))
    assert raw.header == ["peak", "rt"] and len(raw.frame) == 0
    assert numbers(raw, "rt").shape == (0,)


def test_binary_garbage_is_refused(tmp_path):
    rng = np.random.default_rng(7)
    blob = rng.integers(0, 256, 4000, dtype=np.uint8).tobytes()
    with pytest.raises(InputError, match="binary"):
        load_table(write(tmp_path, "b.csv", blob))
    # no NUL bytes but mostly control characters
    ctrl = bytes(rng.integers(1, 31, 4000, dtype=np.uint8).tolist())
    with pytest.raises(InputError, match="binary"):
        load_table(write(tmp_path, "c.csv", ctrl))


def test_ragged_row_names_the_line(tmp_path):
    p = write(tmp_path, "r.csv", "peak,rt\n1,5.0\n2,6.0,oops\n")
    with pytest.raises(InputError) as ei:
        load_table(p)
    assert ei.value.line == 3 and ei.value.row == 2
    assert "3 fields but the header has 2" in str(ei.value)


def test_trailing_empty_fields_tolerated_short_rows_refused(tmp_path):
    raw = load_table(write(tmp_path, "t.csv", "peak,rt,area\n1,5.0,10,,\n2,6.0,\n"))
    assert raw.frame.values.tolist() == [["1", "5.0", "10"], ["2", "6.0", ""]]
    # a row that lacks a field: is '6.0' the time or a shifted area? refused, naming the missing column
    with pytest.raises(InputError, match="2 fields but the header has 3") as ei:
        load_table(write(tmp_path, "s.csv", "peak,rt,area\n1,5.0,10\n2,6.0\n"))
    assert (ei.value.row, ei.value.line, ei.value.column) == (2, 3, "area")


def test_duplicate_header_refused(tmp_path):
    with pytest.raises(InputError, match="twice"):
        load_table(write(tmp_path, "d.csv", "rt,peak,rt\n1,2,3\n"))


def test_long_field_is_refused_and_echo_is_capped(tmp_path):
    from matcher.io.delimited import MAX_CELL

    ok = "x" * MAX_CELL
    raw = load_table(write(tmp_path, "ok.csv", f"peak,rt\n{ok},5\n"))
    assert len(texts(raw, "peak")[0]) == MAX_CELL
    big = "x" * 200_000
    with pytest.raises(InputError, match="200000 characters") as ei:
        load_table(write(tmp_path, "l.csv", f"peak,rt\n1,5\n2,{big}\n"))
    assert (ei.value.row, ei.value.column) == (2, "rt")
    assert len(str(ei.value)) < 300


def test_quoted_field_with_newline_keeps_line_numbers(tmp_path):
    raw = load_table(write(tmp_path, "n.csv", 'peak,note\n1,"two\nlines"\n2,x\n'))
    assert raw.line_of(1) == 2 and raw.line_of(2) == 4


def test_preamble_lines_above_table_are_skipped(tmp_path):
    raw = load_table(write(tmp_path, "p.csv", "Sample: oil 7\nOperator AB\n\npeak\tRT [s]\n1\t300\n"))
    assert raw.header == ["peak", "RT [s]"] and raw.first_line == 4 and raw.line_of(1) == 5


def test_numbers_checks_and_messages(tmp_path):
    raw = load_table(write(tmp_path, "n.csv", "a,b,c,d\n1,nan,-2,1.5\n2,inf,3,2\n"))
    with pytest.raises(InputError, match="must be a finite number, got 'nan'"):
        numbers(raw, "b")
    with pytest.raises(InputError, match="must be positive, got '-2'") as ei:
        numbers(raw, "c", positive=True)
    assert ei.value.row == 1 and ei.value.line == 2
    with pytest.raises(InputError, match="whole number"):
        numbers(raw, "d", integer=True)
    with pytest.raises(InputError, match="at most 1"):
        numbers(raw, "a", maximum=1)
    assert math.isinf(numbers(raw, "b", finite=False)[1])
    with pytest.raises(InputError, match="no column 'zz'"):
        numbers(raw, "zz")


def test_map_headers_spellings_overrides_and_ambiguity(tmp_path):
    aliases = {"rt": ["retention time", "ret time", "r.t."], "peak": ["peak #", "no."]}
    raw = load_table(write(tmp_path, "m.csv", "Peak #,Ret. Time (min),Area\n1,2,3\n"))
    assert map_headers(raw, aliases) == {"peak": "Peak #", "rt": "Ret. Time (min)"}
    assert map_headers(raw, aliases, {"rt": "Area"}) == {"rt": "Area", "peak": "Peak #"}
    with pytest.raises(InputError, match="no column 'Height'"):
        map_headers(raw, aliases, {"rt": "Height"})
    amb = load_table(write(tmp_path, "a.csv", "RT,Retention time\n1,2\n"))
    assert map_headers(amb, aliases) == {"rt": "RT"}  # the canonical spelling wins a tie
    amb2 = load_table(write(tmp_path, "b.csv", "Ret time,Retention time\n1,2\n"))
    with pytest.raises(InputError, match="could all be 'rt'"):
        map_headers(amb2, aliases)


def test_xlsx_first_sheet_as_text(tmp_path):
    import pandas as pd

    p = tmp_path / "run.xlsx"
    pd.DataFrame({"peak": ["p1", "p2"], "rt": [5.25, 7.0]}).to_excel(p, index=False)
    raw = load_table(str(p))
    assert raw.header == ["peak", "rt"]
    assert numbers(raw, "rt").tolist() == [5.25, 7.0]
    assert raw.line_of(2) == 3


def test_zip_that_is_not_xlsx_refused(tmp_path):
    with pytest.raises(InputError, match="ZIP"):
        load_table(write(tmp_path, "x.csv", b"PK\x03\x04rest"))


def test_missing_file(tmp_path):
    with pytest.raises(InputError, match="not found"):
        load_table(str(tmp_path / "nope.csv"))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.binary(max_size=400))
def test_arbitrary_bytes_only_ever_raise_input_error(tmp_path, blob):
    p = write(tmp_path, "f.csv", blob)
    try:
        raw = load_table(p)
        for col in raw.header:
            numbers(raw, col, required=False)
            texts(raw, col)
    except InputError:
        pass


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.text(max_size=300))
def test_arbitrary_text_only_ever_raises_input_error(tmp_path, text):
    p = write(tmp_path, "t.csv", text)
    try:
        raw = load_table(p)
        map_headers(raw, {"rt": ["retention time"], "peak": ["no"]})
        for col in raw.header:
            numbers(raw, col, required=False, positive=True)
    except InputError:
        pass


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.floats(allow_nan=False, allow_infinity=False, width=32), min_size=1, max_size=20),
       st.sampled_from([",", ";", "\t"]))
def test_numbers_round_trip(tmp_path, values, delim):
    dec = (lambda s: s.replace(".", ",")) if delim == ";" else (lambda s: s)
    body = "".join(f"{i}{delim}{dec(repr(float(v)))}\n" for i, v in enumerate(values))
    raw = load_table(write(tmp_path, "r.csv", f"peak{delim}rt\n" + body))
    assert numbers(raw, "rt").tolist() == [float(v) for v in values]
