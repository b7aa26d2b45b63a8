"""Calibration objects and files: fitting, conversion, schema, atomic save."""

from __future__ import annotations

import json
import os

import jsonschema
import numpy as np
import pytest

from matcher.retention.calibration import Calibration, calibrate, load_schema
from matcher.errors import InputError
from matcher.retention.ladder import read_ladder


def write(tmp_path, text, name="ladder.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return str(p)


def iso_ladder(tmp_path, tm=0.95, a=0.35, b=1.65, carbons=range(8, 15)):
    rows = "".join(f"{tm + a * b ** (c - 8):.10f},{c}\n" for c in carbons)
    return write(tmp_path, "rt,carbons\n" + rows, "iso.csv")


def test_programmed_calibration_converts_and_flags(tmp_path):
    L = read_ladder(write(tmp_path, "rt,carbons\n3,8\n5,9\n8,11\n"))
    cal = calibrate(L)
    # van den Dool & Kratz (1963) with a gap (C10 missing): 6.5 min lies halfway from 5 to 8 -> 1000
    ri, ext = cal.convert(np.array([2.0, 6.5, 8.0, 9.5]))
    assert ri.tolist() == [750.0, 1000.0, 1100.0, 1200.0]  # 2 min: from C8-C9, 50 units/min
    assert ext.tolist() == [True, False, False, True]
    assert cal.holdup is None


def test_isothermal_default_fit_holdup_reproduces_indices(tmp_path):
    # Kovats (1958) on exact data; least-squares tM (issue acceptance: 0.05 index units)
    cal = calibrate(read_ladder(iso_ladder(tmp_path)), mode="isothermal")
    assert cal.holdup.method == "fit" and cal.holdup.value == pytest.approx(0.95, abs=1e-5)
    x = np.array([815.0, 1042.7, 1399.9])
    ri, ext = cal.convert(0.95 + 0.35 * 1.65 ** (x / 100 - 8))
    assert np.max(np.abs(ri - x)) < 0.05 and not ext.any()


def test_isothermal_given_holdup(tmp_path):
    cal = calibrate(read_ladder(iso_ladder(tmp_path)), mode="isothermal", dead_time=0.95)
    assert cal.holdup.method == "given" and cal.holdup_used


def test_isothermal_two_standards_needs_given_holdup(tmp_path):
    L = read_ladder(write(tmp_path, "rt,carbons\n3,8\n5,9\n"))
    with pytest.raises(InputError, match="three standards"):
        calibrate(L, mode="isothermal")
    cal = calibrate(L, mode="isothermal", dead_time=1.0)
    # Kovats: log(3-1)=log 2, log(5-1)=log 4; t=3.828... -> t'=2*sqrt2 -> I = 850
    assert cal.convert(np.array([1.0 + 2 * 2 ** 0.5]))[0][0] == pytest.approx(850.0)


def test_file_round_trip_and_schema(tmp_path):
    cal = calibrate(read_ladder(iso_ladder(tmp_path)), mode="isothermal")
    out = tmp_path / "cal.json"
    cal.save(out)
    doc = json.loads(out.read_text())
    jsonschema.Draft202012Validator.check_schema(load_schema())
    jsonschema.validate(doc, load_schema())
    assert doc["tool"]["version"] and doc["mode"] == "isothermal" and doc["holdup"]["method"] == "fit"
    back = Calibration.load(out)
    t = np.linspace(1.5, 12, 50)  # after the hold-up time (0.95 min): earlier times are refused
    a, ea = cal.convert(t)
    b, eb = back.convert(t)
    assert np.allclose(a, b, equal_nan=True) and np.array_equal(ea, eb)
    assert not [f for f in os.listdir(tmp_path) if f.endswith(".tmp")]


def test_programmed_file_with_warnings_validates(tmp_path):
    L = read_ladder(write(tmp_path, "rt,carbons\n2,8\n4,9\n6,10\n10,11\n12,12\n14,13\n"))
    cal = calibrate(L, dead_time=0.8)
    doc = cal.to_dict()
    jsonschema.validate(doc, load_schema())
    assert any("missing standard" in w for w in doc["warnings"])
    assert doc["holdup"] == {"value": 0.8, "method": "given", "detail": "given by the analyst", "used": False}


@pytest.mark.parametrize("content,match", [
    (b"", "invalid JSON"),
    (b"{not json", "invalid JSON"),
    (b'{"format": "matcher.calibration"}', "not a valid calibration file"),
    (b"\xff\xfe\x00\x01", "not UTF-8"),
])
def test_bad_calibration_files(tmp_path, content, match):
    p = tmp_path / "bad.json"
    p.write_bytes(content)
    with pytest.raises(InputError, match=match):
        Calibration.load(p)


def test_tampered_standards_refused(tmp_path):
    cal = calibrate(read_ladder(write(tmp_path, "rt,carbons\n3,8\n5,9\n")))
    d = cal.to_dict()
    d["standards"][1]["rt"] = 2.0
    with pytest.raises(InputError, match="rise strictly"):
        Calibration.from_dict(d)


