"""The daily refresh: lock, read, check, record in the store, write the workbook.

Order of work, and what a failure at each point leaves:

1. take the workbook's lock (another run: wait, then exit 2 naming it);
2. read and validate the workbook (a file problem: exit 2, nothing written);
3. open the history store and bring its schema up to date;
4. check every model (Ctrl-C or a kill: nothing written);
5. write the date's rows to the store in one transaction (the record);
6. build the *Results* sheet and the *History* window from the store;
7. compare the workbook with what was read; replace it atomically, or write
   ``NAME.refreshed.xlsx`` when it changed meanwhile.

A run killed between 5 and 7 leaves the store one whole date ahead of the
workbook; the next refresh rewrites the window from the store.
"""

from __future__ import annotations

import datetime as dt
import sys
from dataclasses import dataclass, field
from pathlib import Path

from rootvar.addin.files import SaveError, file_problem, save_atomic
from rootvar.core import __version__

from .book import (
    HISTORY_SHEET,
    MODELS_SHEET,
    SETTINGS_SHEET,
    ControlError,
    foreign_content,
    read_book,
    read_models,
    read_settings,
)
from .checks import Progress, run_checks
from .results import (
    STATUS_BREACH,
    STATUS_FAILED,
    STATUS_INPUT,
    result_rows,
    write_history_window,
    write_results,
)
from .saving import BookLock
from .sheet_import import rows_from_history_sheet
from .store import HistoryStore, book_label, default_store_url

__all__ = ["EXIT_BREACH", "EXIT_CLEAR", "EXIT_FILE", "EXIT_ROWS", "RefreshOutcome", "refresh"]

EXIT_CLEAR, EXIT_BREACH, EXIT_FILE, EXIT_ROWS = 0, 1, 2, 3


@dataclass
class RefreshOutcome:
    """What a refresh did, for the command line and tests."""

    exit_code: int
    output: Path | None = None
    backup: Path | None = None
    rows: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    store: str = ""


def _lock_files(path: Path) -> list[Path]:
    return [
        p
        for p in (path.with_name("~$" + path.name), path.with_name(f".~lock.{path.name}#"))
        if p.exists()
    ]


def _exit_code(rows) -> int:
    statuses = {r["status"] for r in rows}
    verdicts = {r.get("verdict") for r in rows}
    if statuses & {STATUS_INPUT, STATUS_FAILED}:
        return EXIT_ROWS
    if STATUS_BREACH in statuses or verdicts & {"biased", "undecided"}:
        return EXIT_BREACH
    return EXIT_CLEAR


def refresh(
    workbook,
    as_of=None,
    out=None,
    workers=1,
    scheduler=None,
    quiet=True,
    stream=None,
    history=None,
    wait=600.0,
) -> RefreshOutcome:
    """Refresh the control workbook; see the module docstring.  Raises ControlError.

    Parameters
    ----------
    workbook : str or Path
        The control workbook (.xlsx).
    as_of : str, optional
        As-of date ``YYYY-MM-DD`` (default today).
    out : str or Path, optional
        Write the refreshed workbook here instead of in place.
    workers : int
        Local worker processes (>= 1).
    scheduler : str, optional
        Address of a Dask distributed scheduler.
    quiet : bool
        No progress lines.
    stream : file, optional
        Where progress goes (default standard error).
    history : str, optional
        History store URL or SQLite file; default the *Settings* sheet's
        "history store", else ``NAME.history.sqlite`` beside the workbook.
    wait : float
        Seconds to wait for another refresh of the same workbook.
    """
    stream = stream or sys.stderr
    path = Path(workbook)
    as_of = as_of or dt.date.today().isoformat()
    try:
        dt.date.fromisoformat(as_of)
    except ValueError as exc:
        raise ControlError(f"--as-of must be a date like 2026-12-01, got {as_of!r}") from exc
    if int(workers) < 1:
        raise ControlError(f"--workers must be >= 1, got {workers!r}")
    target = Path(out) if out else path
    in_place = target.resolve() == path.resolve()
    if not in_place and not target.parent.is_dir():
        raise ControlError(f"--out folder {target.parent} does not exist")
    problem = file_problem(path)
    if problem:
        raise ControlError(f"{path}: {problem}")
    notes: list[str] = []
    with BookLock(target, wait) as lock:
        if lock.stale_note():
            notes.append(lock.stale_note())
        snap, wb = read_book(path)
        settings, extra = read_settings(wb[SETTINGS_SHEET])
        models = read_models(wb[MODELS_SHEET])
        if in_place:
            locks = _lock_files(path)
            if locks:
                raise ControlError(
                    f"{path} is open in a spreadsheet program ({locks[0].name} exists); "
                    "close it or give --out"
                )
            foreign = foreign_content(snap, wb)
            if foreign:
                target = path.with_name(f"{path.stem}.refreshed{path.suffix}")
                notes.append(
                    f"wrote {target.name} instead of refreshing in place: the workbook holds "
                    f"{', '.join(foreign)}, which would be lost on saving"
                )
        store = HistoryStore(history or extra["history_url"] or default_store_url(path))
        store.ensure_schema()
        book = book_label(path, extra["book_name"])
        imported = []
        if HISTORY_SHEET in wb.sheetnames and store.book_is_new(book):
            imported = rows_from_history_sheet(wb[HISTORY_SHEET])
            if imported:
                dates = sorted({r["as_of"] for r in imported} - {as_of})
                if dates:
                    notes.append(
                        f"imported the History sheet's {len(dates)} earlier date(s) "
                        f"({dates[0]} to {dates[-1]}) into the history store"
                    )

        specs = [m.spec for m in models if m.spec is not None]
        spec_rows = [m.row for m in models if m.spec is not None]
        progress = Progress(len(specs), stream, quiet)
        results = run_checks(specs, settings, workers, scheduler, progress)
        keyed = dict(zip(spec_rows, results, strict=True))
        run_time = dt.datetime.now(dt.UTC).replace(microsecond=0).isoformat()
        rows = result_rows(models, keyed, settings, as_of, run_time)

        store.record(book, as_of, rows, run_time, __version__, imported)
        window = store.read(book, last_dates=extra["history_dates"])
        store.dispose()
        write_results(wb, rows, settings)
        write_history_window(wb, window, settings, extra["history_dates"], store.shown)

        if in_place and target == path:
            why = snap.changed_since()
            if why:
                target = path.with_name(f"{path.stem}.refreshed{path.suffix}")
                notes.append(
                    f"wrote {target.name} instead of {path.name}: {why}; the store holds "
                    f"{as_of} all the same"
                )
        try:
            backup = save_atomic(wb.save, target, keep_backup=True)
        except SaveError as exc:
            raise ControlError(str(exc)) from exc
    return RefreshOutcome(_exit_code(rows), target, backup, rows, notes, store.shown)
