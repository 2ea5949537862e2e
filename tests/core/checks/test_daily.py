"""The daily control refresh: results, history, exit codes, and never losing data."""

import hashlib
import os
import zipfile
from pathlib import Path

import pytest
from openpyxl import load_workbook
from openpyxl.chart import LineChart, Reference
from support.control_books import _col, _digest, _rows, _visible, _without_run_time, make_book

import rootvar.addin.control as control
from rootvar.addin import files
from rootvar.addin.cli.main import main
from rootvar.core import HestonParams, InputError
from rootvar.core.checks.daily import ControlSettings, ModelSpec, check_model, row_seed


def test_row_seed_is_stable_and_distinct():
    assert row_seed(7, "ALD-EQX") == row_seed(7, "ALD-EQX")
    assert row_seed(7, "ALD-EQX") != row_seed(7, "CRV-SHP") != row_seed(8, "CRV-SHP")
    # SHA-256 based (hashlib), so it does not change with PYTHONHASHSEED
    assert (
        row_seed(7, "ALD-EQX")
        == int.from_bytes(hashlib.sha256(b"7:ALD-EQX").digest()[:8], "big") >> 15
    )
    # 15 decimal digits: a spreadsheet keeps 15 significant digits (common practice, no source)
    assert row_seed(7, "ALD-EQX") < 10**15
    assert max(row_seed(s, f"M{i}") for s in range(20) for i in range(50)) < 10**15


def test_settings_are_validated():
    with pytest.raises(InputError, match="scheme"):
        ControlSettings(scheme="milstein")
    with pytest.raises(InputError, match="max_negative_probability"):
        ControlSettings(max_negative_probability=2.0)
    with pytest.raises(InputError, match="paths"):
        ControlSettings(paths=0)


def test_check_model_flags_follow_the_thresholds():
    spec = ModelSpec(
        "T1", "test", 100.0, 0.0, 0.0, HestonParams(0.04, 0.5, 0.04, 1.0, -0.9), (0.5,), (1.0,)
    )
    rows = check_model(spec, ControlSettings(paths=4096, steps_per_year=8, feller_warning=0.3))
    assert len(rows) == 1
    flags = " ".join(rows[0]["flags"])
    assert "Feller ratio 0.040 below 0.3" in flags and "negative-step probability" in flags
    relaxed = check_model(
        spec,
        ControlSettings(
            paths=4096, steps_per_year=8, feller_warning=0.01, max_negative_probability=0.9
        ),
    )
    assert "Feller" not in " ".join(relaxed[0]["flags"])


def test_refresh_writes_results_history_and_a_backup(tmp_path):
    path = make_book(tmp_path)
    before = path.read_bytes()
    code = main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    assert code in (control.EXIT_CLEAR, control.EXIT_BREACH)
    backup = tmp_path / "control.bak.xlsx"
    assert backup.read_bytes() == before  # the previous file is kept
    rows = _rows(path)
    assert len(rows) == 3 * 2  # three models, one maturity, two strikes
    header = control.RESULT_COLUMNS
    first = dict(zip(header, rows[0], strict=True))
    assert first["as-of"] == "2026-12-01" and first["rootvar version"]
    # a seed read back from the cell reproduces the row
    assert isinstance(first["seed"], int)
    assert first["seed"] == row_seed(20240601, first["model id"])
    # the numbers are the core's (same seed, same settings)
    wb = load_workbook(path)
    spec_row = [c.value for c in wb["Models"][2]]
    spec = ModelSpec(
        spec_row[0],
        spec_row[1],
        spec_row[2],
        spec_row[3],
        spec_row[4],
        HestonParams(*spec_row[5:10]),
        (0.5,),
        (0.9, 1.1),
    )
    settings = ControlSettings(paths=4096, steps_per_year=8, quantiles=(0.01, 0.99))
    ref = check_model(spec, settings)[0]
    assert first["Fourier price"] == pytest.approx(ref["fourier_price"])
    # openpyxl writes 16 significant digits ("%.16g"), so the last bit may differ
    assert first["Monte Carlo price"] == pytest.approx(ref["mc_price"], rel=1e-15)
    assert ref["seed"] == first["seed"]
    assert _rows(path, "History") == rows
    assert len(wb["Results"]._charts) == 1


def test_history_is_replaced_per_date_not_duplicated(tmp_path):
    path = make_book(tmp_path, models=2)
    for _ in range(2):
        main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    assert len(_rows(path, "History")) == 4
    main(["refresh", str(path), "--as-of", "2026-12-02", "--workers", "1", "--quiet"])
    history = _rows(path, "History")
    assert len(history) == 8
    assert [r[0] for r in history] == ["2026-12-01"] * 4 + ["2026-12-02"] * 4
    store = control.HistoryStore(str(tmp_path / "control.history.sqlite"))
    assert store.dates() == ["2026-12-01", "2026-12-02"]
    assert len(store.read()) == 8


def test_one_and_two_workers_and_a_dask_cluster_agree(tmp_path):
    one = make_book(tmp_path, name="one.xlsx")
    two = make_book(tmp_path, name="two.xlsx")
    main(["refresh", str(one), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    main(["refresh", str(two), "--as-of", "2026-12-01", "--workers", "2", "--quiet"])
    assert _without_run_time(_rows(one)) == _without_run_time(_rows(two))
    from dask.distributed import Client, LocalCluster

    with (
        LocalCluster(
            n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None
        ) as cluster,
        Client(cluster),
    ):
        dask = make_book(tmp_path, name="dask.xlsx")
        outcome = control.refresh(dask, "2026-12-01", scheduler=cluster.scheduler_address)
    assert outcome.exit_code in (0, 1)
    assert _without_run_time(_rows(dask)) == _without_run_time(_rows(one))


def _set_model(row, col, value):
    def edit(wb):
        wb["Models"].cell(row=row, column=col, value=value)

    return edit


@pytest.mark.parametrize(
    "edit, bad_ids, fragment",
    [
        (_set_model(2, 7, "fast"), ["ALD-EQX"], "cell G2: kappa must be a number, got 'fast'"),
        (_set_model(3, 7, -1.0), ["CRV-SHP"], "kappa must be > 0, got -1.0"),
        (_set_model(3, 10, 1.5), ["CRV-SHP"], "rho must lie in [-1, 1]"),
        (_set_model(3, 1, "ALD-EQX"), ["ALD-EQX", "ALD-EQX"], "duplicate model id"),
        (_set_model(2, 11, "soon"), ["ALD-EQX"], "cell K2: maturities must be positive numbers"),
        (_set_model(2, 11, "1,,2"), ["ALD-EQX"], "cell K2: maturities must be positive numbers"),
        (_set_model(3, 12, "0.9, "), ["CRV-SHP"], "no empty entries"),
    ],
)
def test_row_problems_mark_the_row_and_the_rest_is_computed(tmp_path, edit, bad_ids, fragment):
    path = make_book(tmp_path, edit)
    code = main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    assert code == control.EXIT_ROWS
    rows = _rows(path)
    errors = [r for r in rows if r[_col("status")] == "input error"]
    assert [r[_col("model id")] for r in errors] == bad_ids
    assert all(fragment in r[_col("message")] for r in errors)
    assert any(r[_col("status")] in ("clear", "breach") for r in rows)


def test_empty_rows_are_skipped(tmp_path):
    def edit(wb):
        wb["Models"].insert_rows(3, amount=2)

    path = make_book(tmp_path, edit)
    assert main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"]) in (
        0,
        1,
    )
    assert len(_rows(path)) == 6


def _delete_sheet(name):
    def edit(wb):
        del wb[name]

    return edit


def _rename_header(col, text):
    def edit(wb):
        wb["Models"].cell(row=1, column=col, value=text)

    return edit


def _drop_setting(label):
    def edit(wb):
        for row in wb["Settings"].iter_rows():
            if row[0].value == label:
                row[0].value = None

    return edit


@pytest.mark.parametrize(
    "edit, fragment",
    [
        (_delete_sheet("Models"), "missing sheet 'Models'"),
        (_delete_sheet("Settings"), "missing sheet 'Settings'"),
        (_rename_header(9, "sigma squared"), "missing column(s): vol_of_vol"),
        (_drop_setting("paths"), "missing setting(s): paths"),
    ],
)
def test_file_problems_stop_before_writing(tmp_path, capsys, edit, fragment):
    path = make_book(tmp_path, edit)
    before = _digest(path)
    code = main(["refresh", str(path), "--workers", "1", "--quiet"])
    assert code == control.EXIT_FILE
    err = capsys.readouterr().err
    assert fragment in err and "nothing was written" in err
    assert _digest(path) == before
    assert _visible(tmp_path) == ["control.xlsx"]


def test_not_a_workbook_and_a_corrupted_archive(tmp_path, capsys):
    text = tmp_path / "notes.xlsx"
    text.write_text("model id,spot\n")
    assert main(["refresh", str(text), "--quiet"]) == control.EXIT_FILE
    assert "not a workbook" in capsys.readouterr().err
    broken = make_book(tmp_path)
    data = broken.read_bytes()
    broken.write_bytes(data[: len(data) // 2])
    before = _digest(broken)
    assert main(["refresh", str(broken), "--quiet"]) == control.EXIT_FILE
    assert "workbook" in capsys.readouterr().err
    assert _digest(broken) == before


def test_absurdly_large_archive_is_refused(tmp_path, monkeypatch, capsys):
    path = make_book(tmp_path)
    monkeypatch.setattr(control.book, "MAX_UNPACKED", 1000)
    assert main(["refresh", str(path), "--quiet"]) == control.EXIT_FILE
    assert "refusing an archive" in capsys.readouterr().err


def test_locked_workbook_is_not_written_in_place(tmp_path, capsys):
    path = make_book(tmp_path)
    (tmp_path / "~$control.xlsx").write_text("lock")
    before = _digest(path)
    assert main(["refresh", str(path), "--quiet"]) == control.EXIT_FILE
    assert "open in a spreadsheet program" in capsys.readouterr().err
    assert _digest(path) == before


def test_read_only_folder_leaves_everything_unchanged(tmp_path, monkeypatch, capsys):
    path = make_book(tmp_path)
    before = _digest(path)
    if os.geteuid() == 0:  # root ignores folder permissions: refuse the temp file instead

        def refuse(*args, **kwargs):
            raise PermissionError(13, "Permission denied", str(tmp_path))

        monkeypatch.setattr(files.tempfile, "mkstemp", refuse)
    else:
        tmp_path.chmod(0o555)
    try:
        code = main(["refresh", str(path), "--workers", "1", "--quiet"])
    finally:
        tmp_path.chmod(0o755)
    assert code == control.EXIT_FILE
    assert "cannot write" in capsys.readouterr().err
    assert _digest(path) == before


def test_failure_during_save_leaves_the_original_intact(tmp_path, monkeypatch, capsys):
    path = make_book(tmp_path)
    before = _digest(path)

    def broken_save(self, filename):
        Path(filename).write_bytes(b"half a workbook")
        raise OSError("disk full")

    monkeypatch.setattr(__import__("openpyxl").Workbook, "save", broken_save)
    code = main(["refresh", str(path), "--workers", "1", "--quiet"])
    assert code == control.EXIT_FILE
    assert "disk full" in capsys.readouterr().err
    assert _digest(path) == before
    # the store was written before the workbook: the date is recorded, the workbook untouched
    assert _visible(tmp_path) == ["control.history.sqlite", "control.xlsx"]


def test_foreign_chart_sends_results_to_a_new_file(tmp_path, capsys):
    def edit(wb):
        ws = wb["Models"]
        chart = LineChart()
        chart.add_data(Reference(ws, min_col=3, min_row=1, max_row=4), titles_from_data=True)
        ws.add_chart(chart, "N2")

    path = make_book(tmp_path, edit)
    before = _digest(path)
    code = main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    assert code in (0, 1)
    assert "charts on sheet 'Models'" in capsys.readouterr().err
    assert _digest(path) == before
    assert len(_rows(tmp_path / "control.refreshed.xlsx")) == 6


def test_text_from_input_cells_is_written_as_text(tmp_path):
    path = make_book(tmp_path, _set_model(2, 2, '=HYPERLINK("http://example.invalid","x")'))
    main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    cell = load_workbook(path)["Results"].cell(row=2, column=_col("underlying") + 1)
    assert cell.data_type == "s" and cell.value.startswith("=HYPERLINK")
    with zipfile.ZipFile(path) as z:
        sheet = z.read("xl/worksheets/sheet3.xml").decode()
    assert "<f>" not in sheet


def test_bad_as_of_date(tmp_path, capsys):
    path = make_book(tmp_path)
    assert main(["refresh", str(path), "--as-of", "yesterday", "--quiet"]) == control.EXIT_FILE
    assert "--as-of must be a date" in capsys.readouterr().err


def test_rows_carry_the_worst_case_of_one_euler_step_and_how_often_it_is_visited():
    from rootvar.core import cir_transition, euler_worst_case

    params = HestonParams(0.04, 0.5, 0.04, 1.0, -0.9)
    spec = ModelSpec("T1", "test", 100.0, 0.0, 0.0, params, (0.5, 2.0), (1.0,))
    rows = check_model(spec, ControlSettings(paths=4096, steps_per_year=8))
    worst, level = euler_worst_case(0.5, 0.04, 1.0, 1 / 8)
    for r in rows:
        assert r["worst_probability"] == worst and r["worst_level"] == level
        # exact law of the variance at the maturity (scipy ncx2 behind cir_transition)
        law = cir_transition(0.04, 0.5, 0.04, 1.0, r["maturity"])
        assert r["prob_below_worst_level"] == pytest.approx(law.cdf(level), rel=1e-12)
    # the worst case is the risk that matters: far above the risk at v0 here
    assert rows[0]["worst_probability"] > rows[0]["negative_probability"]
