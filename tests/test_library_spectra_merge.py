"""Reference spectra in ``matcher library merge`` and ``matcher library check``.

The spectra are CONSTRUCTED for these tests, not measured (tests/spectra_helpers.py: invented fragment
families per formula, varied per compound). Everything else is chosen to be true to the trade:

* retention indices near the published values on a 5 % phenyl column (slightly-polar class) in Adams,
  Identification of Essential Oil Components by GC/MS, 4th ed. (2007), from memory: alpha-pinene 932,
  limonene 1024, linalool 1095, camphor 1141;
* CAS Registry Numbers (from memory; their check digits are verified by the CAS rule on import):
  alpha-pinene 80-56-8, limonene 138-86-3, linalool 78-70-6, camphor 76-22-2; (R)-(+)-limonene 5989-27-5
  is the registry's number for one enantiomer, a different registry entry from the racemate's;
* molecular formulas C10H16 (pinene, limonene), C10H18O (linalool), C10H16O (camphor), nominal masses
  136, 154 and 152 (from the formulas);
* m/z of a positive ion is at least 1 and the stored form is sorted by m/z (common practice, no source);
* the same reference kept as per cent of the base peak with one decimal in one program and on a 0-999 scale
  with whole numbers in another (common practice, no source).

Every store test runs on SQLite and on PostgreSQL (``library_url``); the other library of a merge is on the
same backend.
"""

from __future__ import annotations

import json
import os
import sqlite3

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from matcher.chem.formula import nominal_mass
from matcher.chem.same_peaks import INTENSITY_TOLERANCE, relative_peaks, same_peaks
from matcher.cli.main import app
from matcher.curate import library_edits as cu
from matcher.curate.merge import merge
from matcher.io.jcamp import JcampSpectrum, jcamp_text
from matcher.store.database import init_library, revision
from matcher.store.inspect import check
from matcher.store.library_io import export_library
from matcher.store.spectra import import_spectra, stored_spectra

from spectra_helpers import constructed_spectrum, noisy_unknown

CLS = "slightly-polar"
LIMONENE = {"name": "limonene", "formula": "C10H16", "cas": "138-86-3"}
LINALOOL = {"name": "linalool", "formula": "C10H18O", "cas": "78-70-6"}
CAMPHOR = {"name": "camphor", "formula": "C10H16O", "cas": "76-22-2"}
PINENE = {"name": "alpha-pinene", "formula": "C10H16", "cas": "80-56-8"}
SOURCE = "constructed for the matcher tests (not measured)"

runner = CliRunner()


@pytest.fixture
def other_url(library_url, request, tmp_path):
    """A second, empty library on the same backend as ``library_url`` (the colleague's)."""
    if library_url.startswith("sqlite"):
        url = "sqlite:///" + os.path.join(str(tmp_path), "colleague.sqlite")
        init_library(url)
        yield url
        return
    from conftest import PgDatabase
    from matcher.store.database import dispose_all

    db = PgDatabase(request.getfixturevalue("pg_admin_url"))
    try:
        url = db.url()
        init_library(url)
        yield url
    finally:
        dispose_all()
        db.drop()


def _jdx(tmp_path, name, items) -> str:
    p = tmp_path / name
    p.write_text(jcamp_text(items), encoding="utf-8")
    return str(p)


def _block(c, spectrum, title=None) -> JcampSpectrum:
    return JcampSpectrum(title=title or c["name"], mz=spectrum[0], intensity=spectrum[1], cas=c["cas"],
                         molform=c["formula"], origin=SOURCE, owner="public domain")


def _by_compound(url) -> dict[str, list[tuple]]:
    """Every stored spectrum as (title, m/z list, intensity list, records), grouped by its compound's name."""
    out: dict[str, list[tuple]] = {}
    for name in ("limonene", "linalool", "camphor", "alpha-pinene"):
        try:
            items = stored_spectra(url, name)
        except Exception:  # no such compound in this library
            continue
        out[name] = [(s.title, s.mz.tolist(), s.intensity.tolist(), sorted(map(tuple, s.records))) for s in items]
    return out


def _colleague(other_url, tmp_path):
    """The colleague's library: indices for limonene and linalool, four constructed spectra, camphor by spectrum only."""
    cu.add_confirmed(other_url, "limonene", CLS, 1025.0, cas=LIMONENE["cas"], formula="C10H16", source="gc2 std L-4")
    cu.add_confirmed(other_url, "linalool", CLS, 1096.0, cas=LINALOOL["cas"], formula="C10H18O", source="gc2 std L-9")
    rng = np.random.default_rng(7)
    lim = constructed_spectrum("limonene", "C10H16")
    replicate = noisy_unknown(lim, "C10H16", rng, noise=0.1, strays=0)  # a second measurement (no M+ this time)
    items = [_block(LIMONENE, lim), _block(LIMONENE, replicate, "limonene, replicate"),
             _block(LINALOOL, constructed_spectrum("linalool", "C10H18O")),
             _block(CAMPHOR, constructed_spectrum("camphor", "C10H16O"))]
    rep = import_spectra(other_url, _jdx(tmp_path, "colleague.jdx", items), source="gc2 own standards", new=True)
    assert rep.added == 4 and rep.new_compounds == ["camphor"]
    return items


def _ours(library_url, tmp_path):
    """Our library: limonene (no spectrum) and alpha-pinene with one constructed spectrum."""
    cu.add_confirmed(library_url, "limonene", CLS, 1024.0, cas=LIMONENE["cas"], formula="C10H16")
    cu.add_confirmed(library_url, "alpha-pinene", CLS, 932.0, cas=PINENE["cas"], formula="C10H16")
    import_spectra(library_url, _jdx(tmp_path, "ours.jdx", [_block(PINENE, constructed_spectrum("alpha-pinene", "C10H16"))]),
                   source="our standards")


# --------------------------------------------------------------------------- merge carries spectra


def test_merge_brings_the_colleagues_spectra_once(library_url, other_url, tmp_path):
    _colleague(other_url, tmp_path)
    _ours(library_url, tmp_path)
    theirs = _by_compound(other_url)
    pinene_before = _by_compound(library_url)["alpha-pinene"]
    assert set(_by_compound(library_url)) == {"limonene", "alpha-pinene"} and _by_compound(library_url)["limonene"] == []

    # a dry run counts everything and writes nothing
    csv_before, rev_before = export_library(library_url), revision(library_url)
    dry = merge(library_url, other_url, dry_run=True)
    assert (dry.spectra_added, dry.spectra_present, dry.spectra_held) == (4, 0, 0)
    assert (dry.observations_added, dry.compounds_created) == (2, 2)  # limonene 1025, linalool; linalool and camphor new
    assert dry.dry_run and dry.revision is None
    assert export_library(library_url) == csv_before and revision(library_url) == rev_before
    assert len(stored_spectra(library_url)) == 1

    rep = merge(library_url, other_url)
    assert (rep.spectra_added, rep.spectra_present, rep.spectra_held) == (4, 0, 0)
    assert (rep.observations_added, rep.compounds_created, rep.conflicts) == (2, 2, [])
    assert "4 reference spectra added (0 already present, 0 held back)" in rep.summary()
    ours = _by_compound(library_url)
    for name in ("limonene", "linalool", "camphor"):
        assert ours[name] == theirs[name], name  # same titles, m/z, intensities and provenance, in order
    assert len(ours["limonene"]) == 2 and ours["limonene"][0][1][-1] == nominal_mass("C10H16")  # M+ 136 kept
    assert ours["alpha-pinene"] == pinene_before
    assert check(library_url) == [] and check(library_url, strict=True) == []

    # merging again adds nothing
    csv_once, rev_once = export_library(library_url), revision(library_url)
    again = merge(library_url, other_url)
    assert (again.spectra_added, again.spectra_present, again.spectra_held) == (0, 4, 0)
    assert again.observations_added == 0 and again.compounds_created == 0 and again.revision is None
    assert export_library(library_url) == csv_once and revision(library_url) == rev_once
    assert _by_compound(library_url) == ours


def test_same_peaks_within_rounding_are_present_and_a_replicate_is_not(library_url, other_url, tmp_path):
    lim = constructed_spectrum("limonene", "C10H16")  # per cent of the base peak, one decimal
    on_999 = (lim[0], np.round(lim[1] * 9.99))        # the same reference on a 0-999 scale, whole numbers
    assert not np.array_equal(relative_peaks(on_999)[1], relative_peaks(lim)[1])  # rounding did change it
    cu.add_confirmed(library_url, "limonene", CLS, 1024.0, cas=LIMONENE["cas"], formula="C10H16")
    import_spectra(library_url, _jdx(tmp_path, "ours.jdx", [_block(LIMONENE, on_999)]), source="licensed collection")
    replicate = noisy_unknown(lim, "C10H16", np.random.default_rng(3), noise=0.05, strays=0)
    cu.add_confirmed(other_url, "Limonene", CLS, 1025.0)
    import_spectra(other_url, _jdx(tmp_path, "theirs.jdx", [_block(LIMONENE, lim), _block(LIMONENE, replicate)]),
                   source="gc2 own standards")
    rep = merge(library_url, other_url)
    assert (rep.spectra_added, rep.spectra_present) == (1, 1)   # another source, the same peaks: present
    held = stored_spectra(library_url, "limonene")
    assert len(held) == 2 and held[0].intensity.max() == 999.0
    assert np.array_equal(held[1].mz, replicate[0]) and np.array_equal(held[1].intensity, replicate[1])


def test_spectra_of_a_conflicting_compound_are_held_back(library_url, other_url, tmp_path):
    cu.add_confirmed(library_url, "limonene", CLS, 1024.0, cas=LIMONENE["cas"])
    for v in (1094.0, 1095.0, 1096.0):
        cu.add_confirmed(library_url, "linalool", CLS, v)
    # theirs: limonene filed under the (R)-enantiomer's CAS number, linalool 85 units away from ours
    cu.add_confirmed(other_url, "limonene", CLS, 1025.0, cas="5989-27-5")
    cu.add_confirmed(other_url, "linalool", CLS, 1180.0)
    import_spectra(other_url, _jdx(tmp_path, "theirs.jdx", [
        _block({**LIMONENE, "cas": "5989-27-5"}, constructed_spectrum("limonene", "C10H16")),
        _block(LINALOOL | {"cas": ""}, constructed_spectrum("linalool", "C10H18O"))]))
    rep = merge(library_url, other_url)
    assert (rep.spectra_added, rep.spectra_present, rep.spectra_held) == (0, 0, 2)
    assert rep.observations_held == 2 and len(rep.conflicts) == 2
    texts = sorted(c.text() for c in rep.conflicts)
    assert "5989-27-5" in texts[0] and "1 reference spectrum held back" in texts[0]
    assert "linalool [slightly-polar]: centres 1095.0" in texts[1] and "spectrum held back too" in texts[1]
    assert stored_spectra(library_url) == []


def test_a_library_csv_carries_no_spectra_and_the_report_says_so(library_url, tmp_path):
    f = tmp_path / "gc2.csv"
    f.write_text("name,phase_class,ri,cas\nlimonene,slightly-polar,1024,138-86-3\n", encoding="utf-8")
    rep = merge(library_url, str(f))
    assert rep.observations_added == 1 and not rep.spectra_read and rep.spectra_added == 0
    assert "no reference spectra (a library file carries none" in rep.summary()


def test_merge_command_dry_run_and_json(library_url, other_url, tmp_path):
    _colleague(other_url, tmp_path)
    before = export_library(library_url)
    res = runner.invoke(app, ["library", "merge", other_url, "--dry-run", "--db", library_url])
    assert res.exit_code == 0, res.output
    assert res.output.startswith("dry run, nothing written: merged") and "4 reference spectra added" in res.output
    assert export_library(library_url) == before and stored_spectra(library_url) == []
    res = runner.invoke(app, ["library", "merge", other_url, "--json", "--db", library_url])
    doc = json.loads(res.output)
    assert (doc["spectra_added"], doc["spectra_present"], doc["spectra_held"], doc["dry_run"]) == (4, 0, 0, False)
    assert len(stored_spectra(library_url)) == 4


# --------------------------------------------------------------------------- check lists spectrum problems


def _insert(url, compound_id, peaks, n_peaks, *, source=SOURCE, title="broken on purpose", records=None):
    """A spectrum row written straight into the table (the import would refuse it): test only."""
    from sqlalchemy import create_engine, text

    eng = create_engine(url)
    try:
        with eng.begin() as conn:
            conn.execute(text("INSERT INTO spectra (compound_id, title, peaks, n_peaks, source, records, created_at) "
                              "VALUES (:c, :t, :p, :n, :s, :r, '2026-01-01T00:00:00')"),
                         {"c": compound_id, "t": title, "p": peaks, "n": n_peaks, "s": source, "r": records})
            return conn.execute(text("SELECT MAX(id) FROM spectra")).scalar()
    finally:
        eng.dispose()


def test_check_lists_broken_and_copied_spectra(library_url, tmp_path):
    lim = cu.add_confirmed(library_url, "limonene", CLS, 1024.0, cas=LIMONENE["cas"], formula="C10H16").compound_id
    lin = cu.add_confirmed(library_url, "linalool", CLS, 1095.0).compound_id
    spec = constructed_spectrum("limonene", "C10H16")
    import_spectra(library_url, _jdx(tmp_path, "ours.jdx", [_block(LIMONENE, spec)]), source=SOURCE)
    assert check(library_url) == [] and check(library_url, strict=True) == []
    first = stored_spectra(library_url)[0].block  # the imported spectrum's id
    good = " ".join(f"{m:g}:{v:g}" for m, v in zip(*spec))
    empty = _insert(library_url, lim, " ", 1)                                # n_peaks >= 1 is a table constraint
    zero_mz = _insert(library_url, lim, "0:5 68:100", 2)                    # m/z 0: no positive ion has it
    unsorted = _insert(library_url, lin, "93:45 68:100 41:12", 3)
    wrong_n = _insert(library_url, lin, "41:12 68:100", 5)
    silent = _insert(library_url, lin, "41:0 68:0", 2)
    bad_records = _insert(library_url, lin, "41:30 68:100", 2, records='[["ORIGIN"]]')  # a label without its value
    copy = _insert(library_url, lim, good, len(spec[0]))                     # same peaks, same source
    other_src = _insert(library_url, lim, good, len(spec[0]), source="licensed collection")
    found = check(library_url)
    assert found == [
        f"spectrum {empty} 'broken on purpose' of compound {lim}: holds no peaks",
        f"spectrum {zero_mz} 'broken on purpose' of compound {lim}: spectrum pair '0:5': m/z must be between 1 and 5000",
        f"spectrum {copy} 'broken on purpose' of compound {lim}: same peaks and source as spectrum {first} (a copy)",
        f"spectrum {unsorted} 'broken on purpose' of compound {lin}: m/z not in ascending order (the stored form is sorted by m/z)",
        f"spectrum {wrong_n} 'broken on purpose' of compound {lin}: n_peaks is 5 but 2 m/z:intensity pairs are stored",
        f"spectrum {silent} 'broken on purpose' of compound {lin}: every intensity is 0 (no base peak)",
        f"spectrum {bad_records} 'broken on purpose' of compound {lin}: its kept records are not a JSON list of "
        f"[label, value] pairs (export-spectra would fail on it)",
    ]
    strict = check(library_url, strict=True)
    extra = [p for p in strict if p not in found]
    assert extra == [f"spectrum {other_src} 'broken on purpose' of compound {lim}: same peaks as spectrum {first} under "
                     f"another source (licensed collection / {SOURCE})"]
    # a compound whose every observation is retired: listed with --strict only
    obs = cu.add_confirmed(library_url, "camphor", CLS, 1141.0, cas=CAMPHOR["cas"], formula="C10H16O")
    import_spectra(library_url, _jdx(tmp_path, "camphor.jdx", [_block(CAMPHOR, constructed_spectrum("camphor", "C10H16O"))]))
    cu.retire(library_url, obs.observation_id, "vial mislabelled (test)")
    assert check(library_url) == found
    assert any(f"of compound {obs.compound_id}: every observation of its compound is retired" in p
               for p in check(library_url, strict=True))
    # the command: exit 1 and one line per problem
    res = runner.invoke(app, ["library", "check", "--db", library_url])
    assert res.exit_code == 1 and res.output.count("problem: spectrum") == 7


def test_check_lists_a_spectrum_whose_compound_is_missing(tmp_path):
    """SQLite only: a server enforces the foreign key, so the orphan cannot be made there."""
    url = "sqlite:///" + str(tmp_path / "lib.sqlite")
    init_library(url)
    cu.add_confirmed(url, "limonene", CLS, 1024.0)
    con = sqlite3.connect(tmp_path / "lib.sqlite")
    con.execute("INSERT INTO spectra (compound_id, title, peaks, n_peaks, created_at) "
                "VALUES (999, 'orphan on purpose', '41:12 68:100', 2, '2026-01-01T00:00:00')")
    con.commit()
    con.close()
    found = check(url)
    assert "orphan spectrum 1: points to a missing row" in found
    assert any(p.startswith("foreign key: table spectra row 1") for p in found)


# --------------------------------------------------------------------------- the rule


pos = st.floats(0.5, 1e6, allow_nan=False, allow_infinity=False)


@settings(max_examples=60, deadline=None)
@given(st.dictionaries(st.integers(1, 600), pos, min_size=1, max_size=30), st.floats(1e-3, 1e4))
def test_a_spectrum_rescaled_is_the_same_and_one_peak_moved_is_not(peaks, factor):
    mz = np.array(sorted(peaks), float)
    y = np.array([peaks[m] for m in sorted(peaks)])
    assert same_peaks((mz, y), (mz, y * factor))
    rel = 100.0 * y / y.max()
    k = int(np.argmin(rel))  # the smallest peak, raised by twice the tolerance in per cent of the base peak
    if rel[k] + 2 * INTENSITY_TOLERANCE < 100.0:
        moved = y.copy()
        moved[k] += 2 * INTENSITY_TOLERANCE * y.max() / 100.0
        assert not same_peaks((mz, y), (mz, moved))
    assert not same_peaks((mz, y), (mz[:-1], y[:-1]))  # one peak fewer
