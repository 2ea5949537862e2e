"""The history store, on SQLite and on a real PostgreSQL server, and the history command."""

import math
import subprocess
import sys
import textwrap

import pytest
import sqlalchemy as sa
from openpyxl import Workbook, load_workbook
from support.control_books import _rows, make_book

import rootvar.addin.control as control
from rootvar.addin.cli.main import main
from rootvar.addin.control.store import SCHEMA_VERSION, HistoryStore, StoreError


def _row(model, as_of, bp=1.5, **extra):
    return {
        "as_of": as_of,
        "run_time": f"{as_of}T06:00:00+00:00",
        "rootvar_version": "test",
        "model_id": model,
        "status": "clear",
        "maturity": 0.5,
        "strike": 100.0,
        "diff_vol_bp": bp,
        "safe_step_years": math.inf,
        "seed": 562949953421311,  # 2**49 - 1, the largest row seed
        "verdict": "consistent",
    } | extra


def test_a_new_store_gets_the_current_schema(store_url):
    store = HistoryStore(store_url)
    assert store.schema_version() == 0
    assert store.ensure_schema() == SCHEMA_VERSION
    assert store.schema_version() == SCHEMA_VERSION
    assert store.ensure_schema() == SCHEMA_VERSION  # idempotent


def test_a_store_from_a_newer_rootvar_is_refused(store_url):
    store = HistoryStore(store_url)
    store.ensure_schema()
    with store.engine.begin() as conn:
        conn.execute(sa.update(store.info).values(value=str(SCHEMA_VERSION + 1)))
    with pytest.raises(StoreError, match="newer than this rootvar knows"):
        HistoryStore(store_url).ensure_schema()


def test_rerun_of_a_date_replaces_its_rows(store_url):
    store = HistoryStore(store_url)
    store.ensure_schema()
    store.record("book", "2026-12-01", [_row("A", "2026-12-01"), _row("B", "2026-12-01")], "t", "v")
    store.record("book", "2026-12-02", [_row("A", "2026-12-02")], "t", "v")
    store.record("book", "2026-12-01", [_row("C", "2026-12-01", bp=-3.0)], "t", "v")
    rows = store.read("book")
    assert [(r["as_of"], r["model_id"]) for r in rows] == [
        ("2026-12-01", "C"),
        ("2026-12-02", "A"),
    ]
    assert rows[0]["diff_vol_bp"] == -3.0
    assert rows[0]["safe_step_years"] == math.inf  # an unbounded step survives the round trip
    assert rows[0]["seed"] == 562949953421311
    assert store.dates("book") == ["2026-12-01", "2026-12-02"]
    assert store.read("book", last_dates=1) == [rows[1]]
    assert store.read("book", since="2026-12-02") == [rows[1]]
    assert store.read("other") == []


def test_books_share_a_store_without_mixing(store_url):
    store = HistoryStore(store_url)
    store.ensure_schema()
    store.record("north", "2026-12-01", [_row("A", "2026-12-01")], "t", "v")
    store.record("south", "2026-12-01", [_row("A", "2026-12-01", bp=9.0)], "t", "v")
    assert store.books() == ["north", "south"]
    assert [r["diff_vol_bp"] for r in store.read("south")] == [9.0]


_KILLER = textwrap.dedent(
    """
    import math, os, signal, sys
    from rootvar.addin.control.store import HistoryStore

    store = HistoryStore(sys.argv[1])
    original = HistoryStore._insert_rows

    def insert_then_die(self, conn, book, rows):
        original(self, conn, book, rows[:2500])  # more than one batch is in the database
        os.kill(os.getpid(), signal.SIGKILL)

    HistoryStore._insert_rows = insert_then_die
    rows = [{"as_of": "2026-12-02", "model_id": f"M{i}", "safe_step_years": math.inf}
            for i in range(5000)]
    store.record("book", "2026-12-02", rows, "t", "v")
    """
)


def test_a_run_killed_mid_write_leaves_whole_dates_only(store_url, tmp_path):
    store = HistoryStore(store_url)
    store.ensure_schema()
    store.record("book", "2026-12-01", [_row(f"M{i}", "2026-12-01") for i in range(50)], "t", "v")
    # rerunning a date that exists: the kill must leave the old rows of that date whole too
    store.record("book", "2026-12-02", [_row("OLD", "2026-12-02")], "t", "v")
    done = subprocess.run([sys.executable, "-c", _KILLER, store_url], cwd=".", timeout=120)
    assert done.returncode == -9
    rows = HistoryStore(store_url).read("book")
    assert len([r for r in rows if r["as_of"] == "2026-12-01"]) == 50
    assert [r["model_id"] for r in rows if r["as_of"] == "2026-12-02"] == ["OLD"]


def test_refresh_records_to_a_postgresql_store(tmp_path, postgres_url):
    path = make_book(tmp_path, models=2)
    code = main(
        ["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"]
        + ["--history", postgres_url]
    )
    assert code in (0, 1)
    store = HistoryStore(postgres_url)
    assert store.dates("control") == ["2026-12-01"]
    assert len(store.read("control")) == len(_rows(path)) == 4
    assert not (tmp_path / "control.history.sqlite").exists()


def test_store_url_from_the_settings_sheet_and_book_name(tmp_path):
    url = f"sqlite:///{tmp_path / 'desk.sqlite'}"

    def edit(wb):
        ws = wb["Settings"]
        ws.append(["history store", url])
        ws.append(["book name", "Harbourline EQ"])
        ws.append(["history dates shown", 1])

    path = make_book(tmp_path, edit=edit, models=1)
    for day in ("2026-12-01", "2026-12-02"):
        main(["refresh", str(path), "--as-of", day, "--workers", "1", "--quiet"])
    store = HistoryStore(url)
    assert store.books() == ["Harbourline EQ"]
    assert store.dates() == ["2026-12-01", "2026-12-02"]
    window = _rows(path, "History")
    assert {r[0] for r in window} == {"2026-12-02"}  # the window shows the last date only


def test_unreachable_store_writes_nothing(tmp_path, capsys):
    path = make_book(tmp_path, models=1)
    before = path.read_bytes()
    bad = "postgresql+psycopg://nobody@127.0.0.1:1/none"
    code = main(["refresh", str(path), "--workers", "1", "--quiet", "--history", bad])
    assert code == control.EXIT_FILE
    err = capsys.readouterr().err
    assert "history store postgresql+psycopg://nobody@127.0.0.1:1/none" in err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert path.read_bytes() == before


def _old_history_book(tmp_path):
    """A book refreshed by a rootvar without a store: History in the sheet only."""
    path = make_book(tmp_path, models=1)
    wb = load_workbook(path)
    del wb["History"]
    ws = wb.create_sheet("History")
    old_header = [
        "as-of", "run time (UTC)", "rootvar version", "model id", "underlying", "status",
        "Feller ratio", "regime", "negative-step prob.", "largest safe step (years)", "maturity",
        "strike", "Fourier price", "Monte Carlo price", "std error", "difference",
        "difference (vol bp)", "z-score", "verdict", "variance quantiles", "recommendation",
        "flags", "seed", "message",
    ]  # fmt: skip
    for j, text in enumerate(old_header, start=1):
        ws.cell(row=1, column=j, value=text)
    for i, day in enumerate(("2026-11-27", "2026-11-30"), start=2):
        values = [day, "x", "0.1.0", "ALD-EQX", "u", "clear", 0.5, "mild breach", 1e-4]
        values += ["unbounded", 0.5, 90.0, 11.0, 11.1, 0.01, 0.1, 2.5, 1.0, "consistent"]
        values += ["q1%=0.01", "", "", 123456789012345, ""]
        for j, v in enumerate(values, start=1):
            ws.cell(row=i, column=j, value=v)
    wb.save(path)
    return path


def test_old_history_sheet_is_imported_once(tmp_path, capsys):
    path = _old_history_book(tmp_path)
    main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    assert "imported the History sheet's 2 earlier date(s)" in capsys.readouterr().err
    store = HistoryStore(str(tmp_path / "control.history.sqlite"))
    assert store.dates() == ["2026-11-27", "2026-11-30", "2026-12-01"]
    old = store.read(since="2026-11-27")[0]
    assert old["diff_vol_bp"] == 2.5 and old["safe_step_years"] == math.inf
    assert old["seed"] == 123456789012345
    main(["refresh", str(path), "--as-of", "2026-12-02", "--workers", "1", "--quiet"])
    assert "imported" not in capsys.readouterr().err
    assert store.dates() == ["2026-11-27", "2026-11-30", "2026-12-01", "2026-12-02"]
    assert [r[0] for r in _rows(path, "History")][:2] == ["2026-11-27", "2026-11-30"]


def test_history_command_prints_and_exports(tmp_path, capsys):
    path = make_book(tmp_path, models=2)
    for day in ("2026-12-01", "2026-12-02"):
        main(["refresh", str(path), "--as-of", day, "--workers", "1", "--quiet"])
    capsys.readouterr()
    assert main(["history", str(path)]) == 0
    printed = capsys.readouterr().out
    assert "2026-12-02" in printed and "ALD-EQX" in printed
    csv = tmp_path / "h.csv"
    assert main(["history", str(path), "--since", "2026-12-02", "--out", str(csv)]) == 0
    lines = csv.read_text().splitlines()
    assert len(lines) == 1 + 4 and "MC minus Fourier (vol bp)" in lines[0]
    xlsx = tmp_path / "h.xlsx"
    assert main(["history", str(tmp_path / "control.history.sqlite"), "--out", str(xlsx)]) == 0
    wb = load_workbook(xlsx)
    trend = wb["Trend"]
    assert [c.value for c in trend[1]][:3] == ["as-of", "ALD-EQX", "CRV-SHP"]
    assert trend.max_row == 3 and len(trend._charts) == 1
    chart = trend._charts[0]
    assert chart.x_axis.delete is False and chart.y_axis.delete is False
    one = tmp_path / "one.xlsx"
    assert main(["history", str(path), "--model", "ALD-EQX", "--out", str(one)]) == 0
    assert load_workbook(one)["Trend"].max_column == 1 + 2  # one line per test option


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["missing.xlsx"], "no such file"),
        (["missing.sqlite"], "no such workbook or store file"),
        (["{book}", "--since", "monday"], "--since must be a date"),
        (["{book}", "--out", "{tmp}/h.txt"], "--out must end in .csv or .xlsx"),
        (["{book}", "--out", "{tmp}/no/h.csv"], "does not exist"),
    ],
)
def test_history_command_bad_input(tmp_path, capsys, args, fragment):
    path = make_book(tmp_path, models=1)
    main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    capsys.readouterr()
    argv = [a.format(book=path, tmp=tmp_path) for a in args]
    if argv[0] in ("missing.xlsx", "missing.sqlite"):
        argv[0] = str(tmp_path / argv[0])
    assert main(["history", *argv]) == 2
    err = capsys.readouterr().err
    assert fragment in err and len(err.strip().splitlines()) == 1


def test_history_of_a_book_never_refreshed(tmp_path, capsys):
    path = make_book(tmp_path, models=1)
    assert main(["history", str(path)]) == 2
    assert "holds no history yet" in capsys.readouterr().err
    Workbook().save(tmp_path / "plain.xlsx")
    assert main(["history", str(tmp_path / "plain.xlsx")]) == 2


def test_a_version_1_store_is_migrated_and_keeps_its_rows(store_url):
    """Schema 1 (before the worst-case columns) opens under schema 2 with its rows intact."""
    from rootvar.addin.control import store as store_module

    old = HistoryStore(store_url)
    with old.engine.begin() as conn:
        store_module.migrate_0_to_1(conn)
        old.set_version(conn, 1)
        meta = sa.MetaData()
        store_module.define_tables(meta, version=1)
        conn.execute(
            sa.insert(meta.tables["control_rows"]),
            [{"book": "b", "position": 0, "as_of": "2026-11-30", "model_id": "OLD", "seed": 7}],
        )
    assert HistoryStore(store_url).schema_version() == 1
    store = HistoryStore(store_url)
    assert store.ensure_schema() == SCHEMA_VERSION == 2
    assert store.schema_version() == 2
    store.record("b", "2026-12-01", [_row("NEW", "2026-12-01", worst_probability=0.3)], "t", "v")
    rows = store.read(since="2026-11-30")
    assert [(r["model_id"], r["worst_probability"]) for r in rows] == [
        ("OLD", None),
        ("NEW", 0.3),
    ]
