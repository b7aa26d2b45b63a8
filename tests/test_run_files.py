"""Run files (ASTM E2077 netCDF, mzML): reading, refusing, peak detection, ladders found, the whole screen.

Every run here is invented and written by ``run_factory`` with SciPy's netCDF writer in the layout of
ASTM E2077 (variables scan_acquisition_time, total_intensity, scan_index, point_count, mass_values,
intensity_values; times in seconds). Peaks are Gaussian, so the area written is known exactly.
"""

from __future__ import annotations

import base64
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings, strategies as st
from typer.testing import CliRunner

import matcher
from matcher.cli.main import app
from matcher.errors import InputError
from matcher.io.run_files import read_run, sniff_run
from matcher.signal.run_peaks import decimate, detect_run
from matcher.signal.chromatogram import detect_peaks
from matcher.signal.mass_spectra import alkane_evidence, molecular_ion
from run_factory import (Compound, alkane_spectrum, counting_noise, invented_spectrum, ladder_compounds, simulate,
                         write_e2077)

runner = CliRunner()
MATCHER = str(Path(sys.executable).with_name("matcher"))


def refused(*args) -> str:
    """Run the installed command, expect exit code 2 and one line on stderr; return that line."""
    proc = subprocess.run([MATCHER, *map(str, args)], capture_output=True, text=True)
    assert proc.returncode == 2, proc.stderr
    assert proc.stderr.strip().count("\n") == 0 and "Traceback" not in proc.stderr
    return proc.stderr


@pytest.fixture(scope="module")
def ladder_run(tmp_path_factory):
    path = tmp_path_factory.mktemp("ladder") / "alkanes.cdf"
    lad = ladder_compounds(8, 20, start_s=200.0)
    write_e2077(path, simulate(lad, seed=11))
    return path, lad


def _sample(seed=5, n=33):
    """33 invented compounds, every fourth pair 3 s apart (σ 1 s), heights 2e4-3e5."""
    rng = np.random.default_rng(seed)
    comps, t = [], 200.0
    for i in range(n):
        t += 3.0 if i % 4 == 1 else rng.uniform(20, 55)
        mi = int(rng.integers(60, 150)) * 2
        comps.append(Compound(f"invented compound {i + 1}", t, rng.uniform(2e4, 3e5), invented_spectrum(rng, mi),
                              sigma_s=1.0, mol_ion=mi))
    return comps


# ---------------------------------------------------------------------------------------------- reading


def test_netcdf3_is_read_as_written(tmp_path):
    sim = simulate([Compound("a", 100.0, 1e5, {57: 100.0, 71: 50.0})], minutes=5, scans=600, seed=2)
    path = tmp_path / "run.CDF"
    write_e2077(path, sim)
    run = read_run(path)
    assert run.format == "netcdf3" and len(run) == 600
    np.testing.assert_allclose(run.time_s, sim["times"])
    np.testing.assert_allclose(run.tic, sim["matrix"].sum(axis=1))
    k = int(np.argmin(abs(sim["times"] - 100.0)))
    a, b = run.scan_index[k], run.scan_index[k] + run.point_count[k]
    got = dict(zip(run.mz[a:b].tolist(), run.intensity[a:b].tolist()))
    assert got[57.0] == pytest.approx(sim["matrix"][k, list(sim["masses"]).index(57.0)], rel=1e-6)


def test_64bit_offset_netcdf3_and_a_misleading_suffix(tmp_path):
    sim = simulate([Compound("a", 60.0, 1e5, {57: 100.0})], minutes=2, scans=200)
    path = tmp_path / "run.csv"          # the content decides, not the name
    write_e2077(path, sim, version=2)
    assert sniff_run(path) == "netcdf3"
    assert read_run(path).format == "netcdf3"


def test_netcdf4_is_read_like_netcdf3(tmp_path):
    netCDF4 = pytest.importorskip("netCDF4")
    sim = simulate([Compound("a", 60.0, 1e5, {57: 100.0, 85: 20.0})], minutes=2, scans=200, seed=4)
    classic = tmp_path / "a.cdf"
    write_e2077(classic, sim)
    ref = read_run(classic)
    path = tmp_path / "a4.nc"
    with netCDF4.Dataset(path, "w", format="NETCDF4") as nc:
        nc.createDimension("scan_number", len(ref))
        nc.createDimension("point_number", len(ref.mz))
        for name, dim, arr, kind in (("scan_acquisition_time", "scan_number", ref.time_s, "f8"),
                                     ("total_intensity", "scan_number", ref.tic, "f8"),
                                     ("scan_index", "scan_number", ref.scan_index, "i4"),
                                     ("point_count", "scan_number", ref.point_count, "i4"),
                                     ("mass_values", "point_number", ref.mz, "f8"),
                                     ("intensity_values", "point_number", ref.intensity, "f4")):
            nc.createVariable(name, kind, (dim,))[:] = arr
    run = read_run(path)
    assert run.format == "netcdf4"
    np.testing.assert_allclose(run.time_s, ref.time_s)
    np.testing.assert_allclose(run.intensity, ref.intensity, rtol=1e-6)


def _mzml(times_min, spectra) -> str:
    def arr(a):
        return base64.b64encode(np.asarray(a, dtype="<f8").tobytes()).decode()

    body = []
    for k, (t, (mz, y)) in enumerate(zip(times_min, spectra)):
        bins = "".join(
            f'<binaryDataArray encodedLength="{len(arr(v))}"><cvParam cvRef="MS" accession="MS:1000523" name="64-bit float"/>'
            f'<cvParam cvRef="MS" accession="MS:1000576" name="no compression"/>'
            f'<cvParam cvRef="MS" accession="{acc}" name="{nm}"/><binary>{arr(v)}</binary></binaryDataArray>'
            for v, acc, nm in ((mz, "MS:1000514", "m/z array"), (y, "MS:1000515", "intensity array")))
        body.append(
            f'<spectrum index="{k}" id="scan={k + 1}" defaultArrayLength="{len(mz)}">'
            f'<cvParam cvRef="MS" accession="MS:1000511" name="ms level" value="1"/>'
            f'<scanList count="1"><scan><cvParam cvRef="MS" accession="MS:1000016" name="scan start time" '
            f'value="{float(t)!r}" unitCvRef="UO" unitAccession="UO:0000031" unitName="minute"/></scan></scanList>'
            f'<binaryDataArrayList count="2">{bins}</binaryDataArrayList></spectrum>')
    return ('<?xml version="1.0" encoding="utf-8"?>\n<mzML xmlns="http://psi.hupo.org/ms/mzml" version="1.1.0">'
            '<cvList count="2"><cv id="MS" fullName="PSI-MS" URI="https://example.invalid/psi-ms.obo"/>'
            '<cv id="UO" fullName="Unit Ontology" URI="https://example.invalid/uo.obo"/></cvList>'
            f'<run id="invented"><spectrumList count="{len(body)}">' + "".join(body)
            + "</spectrumList></run></mzML>\n")


def test_mzml_is_read_with_times_in_seconds(tmp_path):
    pytest.importorskip("pyteomics")
    t = np.arange(0, 2.0, 0.01)   # minutes
    y = 5e4 * np.exp(-0.5 * ((t - 1.0) / 0.02) ** 2) + 100
    path = tmp_path / "run.mzML"
    path.write_text(_mzml(t, [(np.array([57.0, 71.0]), np.array([v * 0.7, v * 0.3])) for v in y]), encoding="utf-8")
    run = read_run(path)
    assert run.format == "mzml" and len(run) == len(t)
    np.testing.assert_allclose(run.time_s, t * 60)
    np.testing.assert_allclose(run.tic, y)
    found = detect_run(path)
    assert len(found) == 1 and found.rt[0] == pytest.approx(1.0, abs=0.001)


# ---------------------------------------------------------------------------------------------- refusing


def test_truncated_file_is_refused_in_one_line(tmp_path, ladder_run):
    data = ladder_run[0].read_bytes()
    cut = tmp_path / "cut.cdf"
    cut.write_bytes(data[: len(data) // 2])
    with pytest.raises(InputError) as exc:
        read_run(cut)
    msg = str(exc.value)
    assert "cut.cdf" in msg and "truncated" in msg and "\n" not in msg
    assert "truncated" in refused("peaks", cut, "-o", tmp_path / "p.csv")
    assert not (tmp_path / "p.csv").exists()


def test_header_only_file_is_refused(tmp_path, ladder_run):
    cut = tmp_path / "head.cdf"
    cut.write_bytes(ladder_run[0].read_bytes()[:200])
    with pytest.raises(InputError, match="damaged or truncated"):
        read_run(cut)


def test_mislabelled_file_is_refused(tmp_path):
    fake = tmp_path / "run-042.cdf"
    fake.write_text("rt,area\n5.2,100\n", encoding="utf-8")
    msg = refused("peaks", fake, "-o", tmp_path / "p.csv")
    assert "not a GC-MS run file" in msg and "the name says run file" in msg
    lib = tmp_path / "lab.sqlite"
    msg = refused("screen", fake, "--class", "nonpolar", "-o", tmp_path / "o.csv", "--db", lib)
    assert "not a GC-MS run file" in msg and not (tmp_path / "o.csv").exists()
    png = tmp_path / "picture.mzML"
    png.write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(200))
    with pytest.raises(InputError, match="binary data of another kind"):
        read_run(png)


def test_netcdf_that_is_not_mass_spectrometry_is_refused(tmp_path):
    from scipy.io import netcdf_file

    path = tmp_path / "chromatogram.cdf"   # a netCDF file of another kind (only a detector trace)
    with netcdf_file(str(path), "w") as nc:
        nc.createDimension("point_number", 10)
        nc.createVariable("ordinate_values", "f", ("point_number",))[:] = np.arange(10.0)
    with pytest.raises(InputError, match="not an ASTM E2077 mass-spectrometry run"):
        read_run(path)


def test_scan_index_past_the_points_is_refused(tmp_path):
    sim = simulate([Compound("a", 60.0, 1e5, {57: 100.0})], minutes=2, scans=50)
    path = tmp_path / "bad.cdf"
    write_e2077(path, sim)
    from scipy.io import netcdf_file

    with netcdf_file(str(path), "a") as nc:   # damage: the last scan claims more points than stored
        nc.variables["point_count"][-1] = 10_000
    with pytest.raises(InputError, match="point past the"):
        read_run(path)


# ---------------------------------------------------------------------------------------------- detection


def test_isolated_peaks_apex_and_area_against_the_peaks_written():
    comps = [Compound(f"p{k}", 120.0 + 97.3 * k, h, {57: 100.0, 71: 40.0}, sigma_s=s)
             for k, (h, s) in enumerate([(5e4, 1.0), (2e5, 1.5), (1e4, 0.8), (8e5, 2.0), (3e3, 1.2)])]
    sim = simulate(comps, minutes=10, scans=3000, noise=20.0, seed=9)
    tic = sim["matrix"].sum(axis=1)
    found = detect_peaks(sim["times"], tic)
    assert len(found) == len(comps)
    for c, t, a, sn in zip(comps, found.rt_s, found.area, found.snr):
        assert t == pytest.approx(c.apex_s, abs=0.05)       # seconds; scans are 0.2 s apart
        assert a == pytest.approx(c.area, rel=0.02)         # area of a Gaussian: h·σ·√(2π)
        assert sn > 5
    # the smallest peak: height 3e3 on noise of SD ~20 gives S/N ~ 150
    assert found.snr[-1] == pytest.approx(3e3 / found.noise, rel=0.1)


def test_noise_only_run_gives_few_peaks():
    for seed in (1, 2, 3):
        sim = simulate([], minutes=30, scans=10_000, noise=40.0, drift=400.0, seed=seed)
        found = detect_peaks(sim["times"], sim["matrix"].sum(axis=1))
        assert len(found) <= 2


def test_single_scan_spikes_are_not_peaks():
    sim = simulate([], minutes=30, scans=10_000, noise=40.0, seed=4)
    tic = sim["matrix"].sum(axis=1)
    rng = np.random.default_rng(4)
    tic[rng.choice(10_000, 40, replace=False)] += rng.uniform(500, 3000, 40)   # 40 spikes of 12-75 noise SDs
    assert len(detect_peaks(sim["times"], tic)) <= 2


def test_coeluting_compounds_are_resolved_on_extracted_ions():
    # 3 s apart, σ 1.5 s: the TIC shows one maximum; unique ions 91 and 105 peak 3 s apart
    a = Compound("a", 300.0, 2e5, {41: 30.0, 43: 60.0, 91: 100.0, 134: 25.0}, sigma_s=1.5)
    b = Compound("b", 303.0, 8e4, {41: 40.0, 43: 50.0, 105: 100.0, 150: 20.0}, sigma_s=1.5)
    sim = simulate([a, b], minutes=10, scans=3000, seed=4)
    masses = sim["masses"]
    run_tic = sim["matrix"].sum(axis=1)
    from scipy.signal import find_peaks

    assert len(find_peaks(run_tic, prominence=1000)[0]) == 1     # one TIC maximum
    keep = sim["matrix"] > 0
    counts = keep.sum(axis=1)
    found = detect_peaks(sim["times"], run_tic, np.r_[0, np.cumsum(counts)[:-1]], counts,
                         np.broadcast_to(masses, keep.shape)[keep], sim["matrix"][keep])
    assert len(found) == 2 and found.split.all()
    assert found.rt_s == pytest.approx([300.0, 303.0], abs=0.3)
    assert sorted(found.model_ion.tolist()) == [91.0, 105.0]
    spec_a = dict(zip(*[v.tolist() for v in found.spectra[0]]))
    assert 91.0 in spec_a and 105.0 not in spec_a
    assert found.area[0] / found.area[1] == pytest.approx(a.area / b.area, rel=0.15)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=1, max_size=3000), st.integers(4, 400))
def test_decimation_keeps_every_extreme(values, max_points):
    y = np.asarray(values)
    x = np.arange(len(y), dtype=float)
    xs, ys = decimate(x, y, max_points)
    assert ys.max() == y.max() and ys.min() == y.min()
    assert np.all(np.diff(xs) > 0) and len(xs) <= max(len(y) if len(y) <= max_points else max_points + 2, 1)


# ---------------------------------------------------------------------------------------------- spectra


def test_alkane_molecular_ions_follow_14n_plus_2():
    # CnH2n+2: 12n + 2n + 2 = 14n + 2 (hexadecane C16H34, nominal mass 226; fact of the trade)
    from matcher.chem.formula import nominal_mass

    for n in (8, 16, 20):
        spec = alkane_spectrum(n)
        mz = np.array(sorted(spec), dtype=float)
        like, carbons = alkane_evidence(mz, np.array([spec[int(m)] for m in mz]))
        assert like and carbons == n and nominal_mass(f"C{n}H{2 * n + 2}") == 14 * n + 2
    # no molecular ion: alkane-like, carbon number unknown
    spec = alkane_spectrum(12)
    spec.pop(170)
    mz = np.array(sorted(spec), dtype=float)
    assert alkane_evidence(mz, np.array([spec[int(m)] for m in mz])) == (True, None)


def test_an_octane_shaped_spectrum_is_alkane_like():
    # n-octane's EI spectrum as recalled from memory of published reference spectra (base 43; 57 ~ 1/3;
    # 85 above 71; M+ 114 a few per cent): alkane-like, C8 from 14n + 2 = 114
    mz = np.array([27., 29, 41, 42, 43, 56, 57, 70, 71, 84, 85, 114])
    y = np.array([15., 25, 30, 12, 100, 10, 33, 8, 19, 4, 28, 7])
    assert alkane_evidence(mz, y) == (True, 8)
    # a monoterpene-like pattern (68, 93, 136) is not
    assert alkane_evidence(np.array([41., 57, 68, 71, 85, 93, 136]), np.array([30., 10, 100, 5, 3, 60, 20]))[0] is False


def test_molecular_ion_hint_rules():
    # a limonene-like pattern (68 base, M 136 about 20 %; invented values in the published shape)
    assert molecular_ion(np.array([53., 67, 68, 79, 93, 107, 121, 136, 137]),
                         np.array([20., 40, 100, 20, 60, 20, 20, 20, 2.2])) == 136
    # the highest ion 12 u above another strong one: a loss of 12 is implausible, no hint
    assert molecular_ion(np.array([41., 69, 81, 93]), np.array([100., 50, 20, 10])) is None


# ---------------------------------------------------------------------------------------------- ladders


def test_ladder_run_calibrates_with_every_carbon_and_apex(tmp_path, ladder_run):
    path, lad = ladder_run
    out = tmp_path / "cal.json"
    res = runner.invoke(app, ["calibrate", str(path), "-o", str(out)])
    assert res.exit_code == 0, res.output
    assert "13 taken" in res.output and "molecular ion" in res.output
    doc = json.loads(out.read_text())
    std = doc["standards"]
    assert [s.get("carbons") for s in std] == list(range(8, 21))
    for s, c in zip(std, lad):
        assert abs(s["rt"] - c.apex_s / 60) < 0.01 / 60 * 6   # within 0.1 s (the goal is 0.01 min)
        assert s["index"] == 100 * int(c.name[1:])
    run = doc["source"]["run"]
    assert run["format"] == "netcdf3" and len(run["taken"]) == 13
    assert {t["carbons_from"] for t in run["taken"]} == {"molecular ion"}
    matcher.retention.calibration.Calibration.load(out)       # valid against the schema


def test_ladder_under_counting_noise_on_every_mass(tmp_path):
    # Poisson noise on m/z 35-300 in every scan, molecular ions at 1 % of the base peak
    lad = ladder_compounds(8, 20, start_s=200.0, height=1e5)
    for c in lad:
        c.spectrum[14 * int(c.name[1:]) + 2] = 1.0
    path = tmp_path / "noisy.cdf"
    write_e2077(path, counting_noise(lad, seed=2))
    cal = matcher.calibrate(path)
    assert cal.carbons == list(range(8, 21))
    assert np.max(np.abs(cal.rt - [c.apex_s / 60 for c in lad])) < 0.01      # minutes
    noise_only = tmp_path / "blank.cdf"
    write_e2077(noise_only, counting_noise([], seed=2))
    assert len(detect_run(noise_only)) <= 4


def test_close_pairs_of_wider_peaks_under_counting_noise():
    # 33 invented compounds, every third one 3 s after the previous, sigma 2 s (3 s = 1.5 sigma)
    rng = np.random.default_rng(5)
    comps, t = [], 200.0
    for i in range(33):
        t += 3.0 if i % 3 == 1 else rng.uniform(15, 50)
        mi = int(rng.integers(60, 150)) * 2
        comps.append(Compound(f"x{i}", t, rng.uniform(2e4, 3e5), invented_spectrum(rng, mi), sigma_s=2.0, mol_ion=mi))
    sim = counting_noise(comps, seed=5)
    keep = sim["matrix"] > 0
    counts = keep.sum(axis=1)
    found = detect_peaks(sim["times"], sim["matrix"].sum(axis=1), np.r_[0, np.cumsum(counts)[:-1]], counts,
                         np.broadcast_to(sim["masses"], keep.shape)[keep], sim["matrix"][keep])
    hits = sum(bool(np.min(np.abs(found.rt_s - c.apex_s)) < 0.5) for c in comps)
    assert hits >= 31 and len(found) <= 35


def test_ladder_without_molecular_ions_needs_carbons(tmp_path):
    lad = ladder_compounds(9, 14)
    for c in lad:
        c.spectrum.pop(14 * int(c.name[1:]) + 2)
    path = tmp_path / "ladder.cdf"
    write_e2077(path, simulate(lad, minutes=20, scans=6000, seed=3))
    assert "--carbons FIRST-LAST" in refused("calibrate", path, "-o", tmp_path / "cal.json")
    assert not (tmp_path / "cal.json").exists()
    cal = matcher.calibrate(path, carbons="9-14")
    assert cal.carbons == list(range(9, 15))
    with pytest.raises(matcher.MatcherError, match="names 7 alkanes"):
        matcher.calibrate(path, carbons="9-15")


def test_an_intruder_between_alkanes_is_left_out(tmp_path):
    lad = ladder_compounds(10, 16)
    branched = Compound("branched", lad[2].apex_s + 25.0, 5e4, alkane_spectrum(12), sigma_s=1.0)
    branched.spectrum.pop(170)
    path = tmp_path / "ladder.cdf"
    write_e2077(path, simulate(lad + [branched], minutes=20, scans=6000, seed=8))
    cal = matcher.calibrate(path)
    assert cal.carbons == list(range(10, 17))
    assert any("regular spacing" in w for w in cal.warnings)


# ---------------------------------------------------------------------------------------------- the whole job


def _formula(mass: int) -> str:
    c = max(1, (mass - 2 + 13) // 14)
    while mass - 12 * c > 2 * c + 2:
        c += 1
    return f"C{c}H{mass - 12 * c}"


def test_screening_a_sample_run_end_to_end(tmp_path, ladder_run):
    cal_path = tmp_path / "cal.json"
    assert runner.invoke(app, ["calibrate", str(ladder_run[0]), "-o", str(cal_path)]).exit_code == 0
    cal = matcher.retention.calibration.Calibration.load(cal_path)
    comps = _sample()
    for c in comps:   # the index each invented compound should get (van den Dool & Kratz through the ladder)
        c.ri = float(cal.convert([c.apex_s / 60])[0][0])
    lib = pd.DataFrame({"name": [c.name for c in comps], "phase_class": "nonpolar",
                        "ri": [round(c.ri, 1) for c in comps], "formula": [_formula(c.mol_ion) for c in comps]})
    lib.to_csv(tmp_path / "lib.csv", index=False)
    db = str(tmp_path / "lab.sqlite")
    assert runner.invoke(app, ["library", "init", "--db", db]).exit_code == 0
    assert runner.invoke(app, ["library", "import", str(tmp_path / "lib.csv"), "--db", db]).exit_code == 0
    run = tmp_path / "sample.cdf"
    write_e2077(run, simulate(comps, seed=7))
    # a batch mixing a peak table and a run file
    pd.DataFrame({"peak": ["a"], "rt": [comps[0].apex_s / 60]}).to_csv(tmp_path / "table.csv", index=False)
    out, rep = tmp_path / "out.csv", tmp_path / "rep.html"
    res = runner.invoke(app, ["screen", str(run), str(tmp_path / "table.csv"), "--calibration", str(cal_path),
                              "--class", "nonpolar", "-o", str(out), "--report", str(rep), "--db", db])
    assert res.exit_code == 0, res.output
    table = pd.read_csv(out)
    mine = table[table["run"] == "sample"]
    peaks = mine.drop_duplicates("peak")
    right_index = sum(bool((abs(peaks["ri"] - c.ri) <= 1).any()) for c in comps)
    top = mine[mine["rank"] == 1]
    named = sum(bool(((top["name"] == c.name) & (abs(top["ri"] - c.ri) <= 1)).any()) for c in comps)
    assert right_index >= 32 and named >= 30 and len(peaks) <= 35
    assert (table["run"] == "table").sum() >= 1
    assert set(peaks["mol_ion"].dropna().astype(int)) <= {c.mol_ion for c in comps}
    html = rep.read_text(encoding="utf-8")
    assert "Total-ion chromatogram: 33 peaks detected" in html and "Ladder run: 13 n-alkanes found" in html
    assert matcher.CAUTION.split(".")[0] in html


def test_peak_table_from_a_run_reads_back_with_spectra(tmp_path):
    comps = _sample(n=6)
    run = tmp_path / "s.cdf"
    write_e2077(run, simulate(comps, minutes=8, scans=2600, seed=1))
    csv, jdx = tmp_path / "p.csv", tmp_path / "p.jdx"
    res = runner.invoke(app, ["peaks", str(run), "-o", str(csv), "--spectra-out", str(jdx)])
    assert res.exit_code == 0, res.output
    table = matcher.read_peaks(csv)
    assert len(table) == 6 and len(table.spectra) == 6
    for c, t, sp in zip(comps, table.rt, table.spectra):
        assert t == pytest.approx(c.apex_s / 60, abs=0.002)
        mz, y = sp
        written = max(c.spectrum, key=c.spectrum.get)
        assert int(mz[np.argmax(y)]) == written            # the base peak comes back
    text = jdx.read_text()
    assert text.count("##DATA TYPE=MASS SPECTRUM") == 6 and text.count("##END=") == 7
