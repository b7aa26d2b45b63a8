"""``matcher library ...``: create, fill, search and check the house library."""

from __future__ import annotations

import json
from typing import Annotated, Optional

import typer

from matcher.cli.common import DbOption, JsonFlag, emit_data, note, say

HELP = "Manage the house library: retention indices measured on your own columns, per polarity class."

EX_GROUP = """Example: start a library from the bundled demo file, then look around

    matcher library init --db lab.sqlite

    matcher library import library/demo_library.csv --db lab.sqlite

    matcher library find "a-pinen" --db lab.sqlite
"""

EX_INIT = "Example:\n\n    matcher library init --db lab.sqlite\n\n    MATCHER_DB=postgresql+psycopg://ana@db.lab/ri matcher library init"
EX_IMPORT = (
    "Example: add this month's confirmed compounds (columns name, phase_class, ri; optional cas, formula, "
    "ri_sd, n, mode, phase, source, synonyms, inchikey, smiles, notes, series, key_ions, analyst, date, retired)\n\n"
    "    matcher library import confirmed-2024-05.csv --db lab.sqlite\n\n"
    "    matcher library import house.xlsx --replace --db lab.sqlite"
)
EX_EXPORT = "Example:\n\n    matcher library export -o house-library.csv --db lab.sqlite\n\n    matcher library export --db lab.sqlite > copy.csv"
EX_SPECTRA = (
    "Example: reference spectra of the lab's own standards (JCAMP-DX, blocks titled by compound name)\n\n"
    "    matcher library import-spectra standards-2024.jdx --source \"own standards, instrument 2, 2024\" --db lab.sqlite\n\n"
    "    matcher library import-spectra collection.jdx --new --db lab.sqlite"
)
EX_EXPORT_SPECTRA = ("Example:\n\n    matcher library export-spectra -o spectra.jdx --db lab.sqlite\n\n"
                     "    matcher library export-spectra --name limonene --db lab.sqlite > limonene.jdx")
EX_FIND = "Example: a typo and a spelling variant still find the compound\n\n    matcher library find linalol --db lab.sqlite\n\n    matcher library find \"1,8 cineol\" --limit 3 --json"
EX_SHOW = "Example:\n\n    matcher library show \"alpha-pinene\" --db lab.sqlite\n\n    matcher library show 80-56-8 --json"
EX_STATS = "Example:\n\n    matcher library stats --db lab.sqlite"
EX_CHECK = "Example: exit code 0 when healthy, 1 when a problem is listed\n\n    matcher library check --db lab.sqlite"


def register(app: typer.Typer) -> None:
    lib = typer.Typer(help=HELP, epilog=EX_GROUP, no_args_is_help=True, rich_markup_mode=None)
    app.add_typer(lib, name="library")

    @lib.command("init", help="Create an empty house library (or migrate an older one); seeds the phase catalog.", epilog=EX_INIT)
    def init_cmd(db: DbOption = None) -> None:
        from matcher.api import open_library

        lib = open_library(db)
        rev = lib.init()
        say(f"house library ready at {lib.location} (revision {rev})")

    @lib.command("import", help="Import a library CSV or XLSX: every row is checked first; a refused file changes nothing.", epilog=EX_IMPORT)
    def import_cmd(
        file: Annotated[str, typer.Argument(metavar="LIBRARY.csv", help="Library file (.csv, .txt or .xlsx).")],
        replace: Annotated[bool, typer.Option("--replace", help="Replace the library's compounds and observations by the file's (one transaction).")] = False,
        dry_run: Annotated[bool, typer.Option("--dry-run", help="Check the file and report what would change; write nothing.")] = False,
        analyst: Annotated[Optional[str], typer.Option("--analyst", metavar="WHO", help="Who is importing (for the audit log; default: your login).")] = None,
        db: DbOption = None,
    ) -> None:
        from matcher.api import open_library

        report = open_library(db).import_file(file, replace=replace, dry_run=dry_run, analyst=analyst)
        if report.ignored_columns:
            note(f"note: columns not used: {', '.join(report.ignored_columns)}")
        say(("dry run, nothing written: " if dry_run else "") + report.summary())

    @lib.command("export", help="Export the whole library as a library CSV (or .xlsx); re-importing it is lossless.", epilog=EX_EXPORT)
    def export_cmd(
        output: Annotated[Optional[str], typer.Option("-o", "--output", metavar="OUT", help="File to write (.csv or .xlsx); default: standard output.")] = None,
        db: DbOption = None,
    ) -> None:
        from matcher.api import open_library

        text = open_library(db).export(None if output == "-" else output)
        if output is None or output == "-":
            emit_data(text)
        else:
            note(f"wrote {output}")

    @lib.command("import-spectra", help="Import reference mass spectra from a JCAMP-DX file (PEAK TABLE or XYDATA (XY..XY) blocks); "
                 "compounds are found by title, names, then CAS. A damaged block refuses the whole file; nothing is written.",
                 epilog=EX_SPECTRA)
    def import_spectra_cmd(
        file: Annotated[str, typer.Argument(metavar="FILE.jdx", help="JCAMP-DX file, one block per spectrum (concatenated or linked).")],
        source: Annotated[Optional[str], typer.Option("--source", metavar="SOURCE", help="Where the spectra come from (own standards, a collection the lab is licensed to use); kept with each spectrum.")] = None,
        new: Annotated[bool, typer.Option("--new", help="Create a new compound for a name that is not in the library even when a library name is close to it.")] = False,
        analyst: Annotated[Optional[str], typer.Option("--analyst", metavar="WHO", help="Who is importing (for the audit log; default: your login).")] = None,
        db: DbOption = None,
    ) -> None:
        from matcher.api import open_library

        say(open_library(db).import_spectra(file, source=source, new=new, analyst=analyst).summary())

    @lib.command("export-spectra", help="Export the reference spectra as JCAMP-DX (one block each, with their provenance); "
                 "re-importing the file is lossless.", epilog=EX_EXPORT_SPECTRA)
    def export_spectra_cmd(
        output: Annotated[Optional[str], typer.Option("-o", "--output", metavar="OUT.jdx", help="File to write (.jdx); default: standard output.")] = None,
        name: Annotated[Optional[str], typer.Option("--name", metavar="NAME", help="Only this compound's spectra (name, synonym or CAS).")] = None,
        db: DbOption = None,
    ) -> None:
        from matcher.api import open_library

        if output not in (None, "-"):
            from matcher.io.atomic import guard_output

            guard_output(output, db=db)
        text = open_library(db).export_spectra(None if output in (None, "-") else output, name=name)
        if output is None or output == "-":
            emit_data(text)
        else:
            note(f"wrote {output}")

    @lib.command("find", help="Search names, synonyms, CAS numbers and formulas, tolerant of typos and spelling variants.", epilog=EX_FIND)
    def find_cmd(
        text: Annotated[str, typer.Argument(metavar="SEARCH", help="Name, part of a name, CAS number or formula.")],
        limit: Annotated[int, typer.Option("--limit", metavar="N", min=1, help="At most this many compounds.")] = 10,
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import open_library
        from matcher.report.terminal import format_table

        hits = open_library(db).find(text, limit=limit)
        if as_json:
            say(json.dumps([h.as_dict() for h in hits], indent=2, ensure_ascii=False))
            return
        if not hits:
            say(f"nothing in the library resembles {text!r}")
            return
        say(format_table(["name similarity", "name", "cas", "formula", "matched"],
                         [[h.name_similarity, h.name, h.cas, h.formula, f"{h.field}: {h.matched}"] for h in hits], align="rllll"))

    @lib.command("show", help="One compound: identity, per-class centre/spread/count and every observation with its provenance.", epilog=EX_SHOW)
    def show_cmd(
        name: Annotated[str, typer.Argument(metavar="NAME", help="Name, synonym or CAS number.")],
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import open_library

        doc = open_library(db).show(name)
        if as_json:
            say(json.dumps(doc, indent=2, ensure_ascii=False))
            return
        say(render_show(doc))

    @lib.command("stats", help="Entries per class and how densely they cover the index range.", epilog=EX_STATS)
    def stats_cmd(db: DbOption = None, as_json: JsonFlag = False) -> None:
        from matcher.api import open_library
        from matcher.report.terminal import format_table

        doc = open_library(db).stats()
        if as_json:
            say(json.dumps(doc, indent=2, ensure_ascii=False))
            return
        say(f"{doc['source']} (revision {doc['revision']}): {doc['compounds']} compounds, {doc['entries']} class entries")
        rows = [[cls, v["compounds"], v["observations"], v["ri_min"], v["ri_max"], v["per_100_units"],
                 "" if v["widest_gap"] is None else f"{v['widest_gap']['from']:g}-{v['widest_gap']['to']:g}"]
                for cls, v in doc["classes"].items()]
        if rows:
            say(format_table(["class", "compounds", "observations", "lowest", "highest", "per 100 units", "widest gap"], rows))

    @lib.command("check", help="Check integrity: database, foreign keys, orphans, duplicate names, invalid CAS/formula/InChIKey, "
                 "damaged or duplicated reference spectra.", epilog=EX_CHECK)
    def check_cmd(
        strict: Annotated[bool, typer.Option("--strict", help="Also list what may be deliberate: CAS numbers shared by two compounds, "
                                             "one spectrum held under two sources, spectra of a compound whose observations are all retired.")] = False,
        db: DbOption = None,
    ) -> None:
        from matcher.api import open_library

        lib = open_library(db)
        problems = lib.check(strict=strict)
        where = lib.location
        if problems:
            for p in problems:
                say(f"problem: {p}")
            note(f"{where}: {len(problems)} problem(s) found")
            raise typer.Exit(1)
        say(f"{where}: no problems found")


def render_show(doc: dict) -> str:
    from matcher.report.terminal import format_table

    lines = [doc["name"]]
    for label, key in (("CAS", "cas"), ("formula", "formula"), ("nominal mass", "nominal_mass"), ("series", "series"),
                       ("InChIKey", "inchikey"), ("SMILES", "smiles"), ("notes", "notes")):
        if doc.get(key) not in (None, ""):
            lines.append(f"  {label}: {doc[key]}")
    if doc["key_ions"]:
        lines.append("  key ions: " + " ".join(str(i) for i in doc["key_ions"]))
    if doc["synonyms"]:
        lines.append("  synonyms: " + "; ".join(doc["synonyms"]))
    if doc["classes"]:
        lines.append("")
        lines.append(format_table(["class", "index", "spread", "observations"],
                                  [[c, round(v["ri"], 1), round(v["sd"], 1), v["n"]] for c, v in doc["classes"].items()]))
    lines.append("")
    rows = [[o["id"], o["phase_class"], o["ri"], o["ri_sd"], o["n"], o["mode"], o["phase"], o["source"],
             o["analyst"], o["date"], "active" if o["active"] else f"retired: {o['retired_reason']}"]
            for o in doc["observations"]]
    lines.append(format_table(["id", "class", "index", "sd", "n", "mode", "phase", "source", "analyst", "date", "status"], rows,
                              align="rlrrrllllll"))
    if doc.get("spectra"):
        lines.append("")
        lines.append("reference spectra:")
        lines.append(format_table(["id", "title", "peaks", "base peak", "source", "origin", "file", "added"],
                                  [[s["id"], s["title"], s["peaks"], "" if s["base_peak"] is None else f"{s['base_peak']:g}",
                                    s["source"], s["origin"], s["file"], s["added"]] for s in doc["spectra"]],
                                  align="rlrrllll"))
    return "\n".join(lines)
