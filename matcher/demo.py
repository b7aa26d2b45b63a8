"""The demo scenario end to end, on the packaged demo library and example files.

A small distillery's QC lab checks an incoming lot of juniper-berry oil on its
5 % phenyl column (slightly-polar class). Every number in the demo files is
invented for the demo and says so. :func:`run_demo` builds a fresh demo
library in the output folder, calibrates the example ladder, screens the
example run with the adaptive correction, and writes the shortlist, the
calibration and an HTML report there. The same injection was also run on a
polyethylene-glycol column (polar class, flame-ionisation detector: areas only);
the demo screens both columns together too (two-column confirmation) and writes
``two-columns.csv`` and ``two-columns.html``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from importlib.resources import as_file, files

DEMO_CLASS = "slightly-polar"


@dataclass
class DemoOutcome:
    folder: str
    library: str
    calibration: str
    shortlist: str
    report: str
    result: object  # ScreenResult
    two_columns: str = ""  # the two-column shortlist (CSV)
    two_columns_report: str = ""
    two_columns_result: object = None  # ScreenResult of the two-column screen


#: The demo's QC-record facts (invented, like every number of the demo).
DEMO_RECORD = {"sample": "juniper-berry oil, incoming lot JB-0412 (demo, invented)", "analyst": "demo analyst",
               "instrument": "GC-MS 2 (demo)", "column": "5 % phenyl / 95 % dimethylpolysiloxane, 30 m × 0.25 mm × 0.25 µm"}


def run_demo(out_dir: str = "matcher-demo") -> DemoOutcome:
    """Run the demo into ``out_dir`` (created if needed; earlier demo files there are replaced)."""
    from matcher.retention.calibration import calibrate
    from matcher.errors import MatcherError
    from matcher.retention.ladder import read_ladder
    from matcher.report.html import write_report
    from matcher.identify.screening import screen
    from matcher.store.database import init_library
    from matcher.store.library_io import import_library
    from matcher.report.files import write_results

    folder = os.path.abspath(out_dir)
    try:
        os.makedirs(folder, exist_ok=True)
    except OSError as exc:
        raise MatcherError(f"cannot create the demo folder {folder}: {exc.strerror}") from None
    db_path = os.path.join(folder, "demo-library.sqlite")
    for suffix in ("", "-wal", "-shm"):
        if os.path.exists(db_path + suffix):
            os.remove(db_path + suffix)
    cal_path = os.path.join(folder, "calibration.json")
    csv_path = os.path.join(folder, "shortlist.csv")
    html_path = os.path.join(folder, "report.html")
    two_csv = os.path.join(folder, "two-columns.csv")
    two_html = os.path.join(folder, "two-columns.html")
    examples = files("matcher.examples")
    with as_file(files("matcher.shipped").joinpath("demo_library.csv")) as lib_csv, \
            as_file(examples.joinpath("ladder.csv")) as ladder_csv, \
            as_file(examples.joinpath("run.csv")) as run_csv, \
            as_file(examples.joinpath("ladder_polar.csv")) as polar_ladder_csv, \
            as_file(examples.joinpath("run_polar.csv")) as polar_run_csv:
        init_library(db_path)
        import_library(db_path, str(lib_csv), who="matcher demo")
        cal = calibrate(read_ladder(str(ladder_csv)))
        cal.save(cal_path)
        result = screen([str(run_csv)], DEMO_CLASS, db=db_path, calibration=cal_path, adaptive=True, top=3,
                        record=DEMO_RECORD)
        two = screen([str(run_csv)], DEMO_CLASS, db=db_path, calibration=cal_path, top=3, record=DEMO_RECORD,
                     second=str(polar_run_csv), second_class="polar", second_ladder=str(polar_ladder_csv))
    for res in (result, two):
        for run in res.runs:
            run.source = "examples/run.csv"
            if run.second:
                run.second["source"] = "examples/run_polar.csv"
    write_results(result, csv_path)
    write_report(result, html_path)
    write_results(two, two_csv)
    write_report(two, two_html)
    return DemoOutcome(folder, db_path, cal_path, csv_path, html_path, result, two_csv, two_html, two)
