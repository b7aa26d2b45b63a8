"""``matcher confirm`` and ``matcher library add|history|retire|merge|backup``: curating the library.

A thin layer over :mod:`matcher.curate.library_edits`: parse, call one function, render.
The ``library`` group itself is created by :mod:`matcher.cli.library_cmds`;
these commands join it (it is found among the app's registered groups).
"""

from __future__ import annotations

import json
from typing import Annotated, Optional

import typer

from matcher.cli.common import CLASS_HELP, DbOption, JsonFlag, is_terminal, note, say, library_group

EX_CONFIRM = (
    "Example: peak 11 of this morning's run was confirmed with an authentic standard of gamma-terpinene\n\n"
    "    matcher confirm shortlist.csv --peak 11 --name \"gamma-terpinene\" --source \"std lot G-221\" --analyst ana --db lab.sqlite\n\n"
    "    matcher confirm batch.json --peak 7 --run lot-0412 --name sabinene --cas 3387-41-5 --formula C10H16 --db lab.sqlite\n\n"
    "    matcher confirm --review shortlist.csv.review.json --source \"std lot T-3\" --db lab.sqlite\n\n"
    "The index, class, calibration and date come from the screening output (a CSV with its .meta.json, or the JSON); "
    "the observation's source names the file, run and peak. With --review, every peak that the review page accepted "
    "and marked as confirmed with an authentic standard (and not yet added) goes in, through the same checks."
)
EX_ADD = (
    "Example: an index measured for a new standard, then a second one written differently\n\n"
    "    matcher library add \"beta-Caryophyllene\" --class nonpolar --ri 1419 --cas 87-44-5 --formula C15H24 --analyst ana --db lab.sqlite\n\n"
    "    matcher library add \"BETA caryophyllene\" --class nonpolar --ri 1421 --source \"std lot C-17\" --db lab.sqlite\n\n"
    "A name close to a library name is refused with the candidates listed: add --as NAME to attach it, or --new. "
    "An index farther from the centre than max(3 spreads, class window) needs --force."
)
EX_HISTORY = "Example:\n\n    matcher library history limonene --db lab.sqlite\n\n    matcher library history 138-86-3 --json"
EX_RETIRE = "Example: observation 812 was a mislabelled vial\n\n    matcher library retire 812 --why \"vial mislabelled, see log 2024-05-14\" --db lab.sqlite"
EX_MERGE = (
    "Example: bring in the second instrument's library (a library file or a CSV export of it)\n\n"
    "    matcher library merge gc2-library.sqlite --db lab.sqlite\n\n"
    "    matcher library merge gc2-export.csv --json --db lab.sqlite\n\n"
    "    matcher library merge gc2-library.sqlite --dry-run --db lab.sqlite\n\n"
    "Observations and reference spectra already present are skipped (merging twice adds nothing); a library's "
    "spectra come with their compounds (a CSV carries none); conflicts are reported, never overwritten."
)
EX_BACKUP = "Example: a consistent copy while others may be adding\n\n    matcher library backup -o /backups/lab-2024-05-14.sqlite --db lab.sqlite"

Force = Annotated[bool, typer.Option("--force", help="Accept an index beyond the outlier guard (or an extrapolated peak).")]
New = Annotated[bool, typer.Option("--new", help="Create a new compound even though a library name is close.")]
As = Annotated[Optional[str], typer.Option("--as", metavar="NAME", help="Attach to this existing compound (the new spelling becomes a synonym).")]
Analyst = Annotated[Optional[str], typer.Option("--analyst", metavar="WHO", help="Who confirmed it (stored with the observation and in the audit log).")]
Editor = Annotated[Optional[str], typer.Option("--analyst", metavar="WHO", help="Who makes the change (stored in the audit log).")]
Source = Annotated[Optional[str], typer.Option("--source", metavar="SOURCE", help="Where the value comes from (standard, lot, notebook page).")]




def _asker():
    """A prompt for ambiguous names on a terminal, else None (refuse with the list)."""
    if not is_terminal():
        return None
    from matcher.curate.library_edits import NEW

    def ask(name, matches):
        note(f"{name!r} is not in the library but may be:")
        for k, m in enumerate(matches, start=1):
            note(f"  {k}. {m.name} ({m.reason})")
        answer = typer.prompt("number to add it to that compound, n for a new compound, Enter to cancel",
                              default="", show_default=False, err=True).strip().lower()
        if answer == "n":
            return NEW
        if answer.isdigit() and 1 <= int(answer) <= len(matches):
            return matches[int(answer) - 1].name
        return None

    return ask


def _render_add(result, as_json: bool) -> None:
    if as_json:
        say(json.dumps(result.as_dict(), indent=2, ensure_ascii=False))
        return
    say(result.summary())
    for n in result.notes:
        note(f"note: {n}")


def _short(d: dict | None) -> str:
    if not d:
        return ""
    keys = ("name", "phase_class", "ri", "source", "analyst", "active", "retired_reason", "cas", "synonyms")
    parts = [f"{k}={d[k]}" for k in keys if k in d and d[k] not in (None, "", [])]
    return ", ".join(parts) if parts else json.dumps(d, ensure_ascii=False, sort_keys=True)


def register(app: typer.Typer) -> None:
    lib = library_group(app)

    @app.command("confirm", help="Add a peak confirmed with an authentic standard to the library, from a screening output.",
                 epilog=EX_CONFIRM)
    def confirm_cmd(
        results: Annotated[Optional[str], typer.Argument(metavar="RESULTS", help="Screening output: OUT.csv (with OUT.csv.meta.json) or OUT.json.")] = None,
        peak: Annotated[Optional[str], typer.Option("--peak", metavar="PEAK", help="The peak id, as in the 'peak' column.")] = None,
        name: Annotated[Optional[str], typer.Option("--name", metavar="NAME", help="The compound the standard confirmed.")] = None,
        review: Annotated[Optional[str], typer.Option("--review", metavar="RESULT.review.json", help="A review record: add every peak it accepted and marked as confirmed with a standard (--peak picks one).")] = None,
        run: Annotated[Optional[str], typer.Option("--run", metavar="RUN", help="The run label, when the output holds several runs.")] = None,
        source: Source = None,
        analyst: Analyst = None,
        force: Force = False,
        new: New = False,
        as_existing: As = None,
        measured: Annotated[bool, typer.Option("--measured", help="Use ri_measured (before the run's adaptive correction).")] = False,
        cas: Annotated[Optional[str], typer.Option("--cas", metavar="CAS", help="CAS Registry Number of the compound (check digit verified).")] = None,
        formula: Annotated[Optional[str], typer.Option("--formula", metavar="FORMULA", help="Molecular formula, e.g. C10H16 (gives the nominal mass the molecular-ion evidence needs).")] = None,
        phase: Annotated[Optional[str], typer.Option("--phase", metavar="PHASE", help="Stationary phase of the column (generic composition).")] = None,
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import open_library
        from matcher.errors import MatcherError

        if review is not None:
            if results is not None or name is not None or measured:
                raise MatcherError("--review takes the peaks, names and result from the review record; "
                                   "leave out RESULTS, --name and --measured")
            outcomes = open_library(db).confirm_review(review, source=source, analyst=analyst, peak=peak, run=run,
                                                       force=force, new=new, as_existing=as_existing)
            if as_json:
                say(json.dumps([o.as_dict() for o in outcomes], indent=2, ensure_ascii=False))
            else:
                for o in outcomes:
                    say(f"peak {o.peak} (run {o.run}), {o.name}: " + (o.message if o.added else f"refused: {o.message}"))
            refused = sum(1 for o in outcomes if not o.added)
            if refused:
                note(f"{refused} of {len(outcomes)} refused; nothing written for them")
                raise typer.Exit(1)
            return
        missing = [what for what, v in (("RESULTS", results), ("--peak", peak), ("--name", name)) if v is None]
        if missing:
            raise MatcherError(f"confirm needs {', '.join(missing)} (or --review RESULT.review.json)")
        result = open_library(db).confirm(results, peak, name, run=run, source=source, analyst=analyst, force=force,
                                      new=new, as_existing=as_existing, measured=measured, ask=_asker(),
                                      cas=cas, formula=formula, phase=phase)
        _render_add(result, as_json)

    @lib.command("add", help="Add one confirmed retention index; the name finds its compound, an outlier is refused.",
                 epilog=EX_ADD)
    def add_cmd(
        name: Annotated[str, typer.Argument(metavar="NAME", help="Compound name (case, spacing and usual spelling variants are folded).")],
        phase_class: Annotated[str, typer.Option("--class", metavar="CLASS", help=CLASS_HELP)],
        ri: Annotated[float, typer.Option("--ri", metavar="RI", help="The retention index measured.")],
        formula: Annotated[Optional[str], typer.Option("--formula", metavar="FORMULA", help="Molecular formula, e.g. C10H16.")] = None,
        cas: Annotated[Optional[str], typer.Option("--cas", metavar="CAS", help="CAS Registry Number (check digit verified).")] = None,
        inchikey: Annotated[Optional[str], typer.Option("--inchikey", metavar="INCHIKEY", help="InChIKey.")] = None,
        phase: Annotated[Optional[str], typer.Option("--phase", metavar="PHASE", help="Stationary phase (generic composition).")] = None,
        mode: Annotated[str, typer.Option("--mode", metavar="MODE", help="programmed or isothermal.")] = "programmed",
        date: Annotated[Optional[str], typer.Option("--date", metavar="YYYY-MM-DD", help="Date measured, YYYY-MM-DD (default: today).")] = None,
        source: Source = None,
        analyst: Analyst = None,
        force: Force = False,
        new: New = False,
        as_existing: As = None,
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import open_library

        result = open_library(db).add(name, phase_class, ri, formula=formula, cas=cas, inchikey=inchikey, phase=phase,
                               mode=mode, date=date, source=source, analyst=analyst, force=force, new=new,
                               as_existing=as_existing, ask=_asker())
        _render_add(result, as_json)

    @lib.command("history", help="The audit trail of one compound: when, who, what, before and after.", epilog=EX_HISTORY)
    def history_cmd(
        name: Annotated[str, typer.Argument(metavar="NAME", help="Name, synonym or CAS number.")],
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import open_library
        from matcher.report.terminal import format_table

        rows = open_library(db).history(name)
        if as_json:
            say(json.dumps(rows, indent=2, ensure_ascii=False))
            return
        say(format_table(["when", "who", "action", "before", "after"],
                         [[r["when"], r["who"], r["action"], _short(r["before"]), _short(r["after"])] for r in rows]))

    @lib.command("retire", help="Stop using an observation; the row stays, with the reason, and history shows it.",
                 epilog=EX_RETIRE)
    def retire_cmd(
        observation: Annotated[int, typer.Argument(metavar="ID", help="Observation id (see: matcher library show NAME).")],
        why: Annotated[str, typer.Option("--why", metavar="REASON", help="Why it is retired.")],
        analyst: Editor = None,
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import open_library

        doc = open_library(db).retire(observation, why, analyst=analyst)
        if as_json:
            say(json.dumps(doc, indent=2, ensure_ascii=False))
            return
        after = doc["after"]
        rest = "no active observation left in that class" if after is None else (
            f"centre now {after['centre']:.1f} (spread {after['spread']:.1f}, {after['count']} observation{'' if after['count'] == 1 else 's'})")
        say(f"retired observation {doc['observation']} of {doc['compound']!r} ({doc['phase_class']} {doc['ri']:g}); {rest}")

    @lib.command("merge", help="Merge another library into this one (observations and reference spectra); "
                 "conflicts are reported, nothing is overwritten.", epilog=EX_MERGE)
    def merge_cmd(
        other: Annotated[str, typer.Argument(metavar="OTHER", help="The other library: a path or URL, or a library CSV/XLSX.")],
        dry_run: Annotated[bool, typer.Option("--dry-run", help="Check everything and report what would change; write nothing.")] = False,
        analyst: Editor = None,
        db: DbOption = None,
        as_json: JsonFlag = False,
    ) -> None:
        from matcher.api import open_library

        report = open_library(db).merge(other, analyst=analyst, dry_run=dry_run)
        if as_json:
            say(json.dumps(report.as_dict(), indent=2, ensure_ascii=False))
            return
        say(("dry run, nothing written: " if dry_run else "") + report.summary())
        for c in report.conflicts:
            say(f"conflict: {c.text()}")

    @lib.command("backup", help="A consistent copy of a SQLite library (online backup), safe while others write.",
                 epilog=EX_BACKUP)
    def backup_cmd(
        path: Annotated[Optional[str], typer.Argument(metavar="COPY.sqlite", help="The copy to write (or give -o).", show_default=False)] = None,
        output: Annotated[Optional[str], typer.Option("-o", "--output", metavar="COPY.sqlite", help="The copy to write.")] = None,
        overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace an existing file.")] = False,
        db: DbOption = None,
    ) -> None:
        from matcher.api import open_library
        from matcher.errors import MatcherError

        if path is not None and output is not None and path != output:
            raise MatcherError("give the copy's path once: as the argument or as -o/--output")
        path = path if path is not None else output
        if path is None:
            raise MatcherError("where should the copy go? give -o COPY.sqlite")

        say(open_library(db).backup(path, overwrite=overwrite).summary())
