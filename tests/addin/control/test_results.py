"""The Results sheet and the History window read at a glance: formats, widths, shading, chart."""

import datetime as dt

import pytest
from openpyxl import load_workbook
from support.control_books import make_book

import rootvar.addin.control as control
from rootvar.addin.cli.main import main
from rootvar.addin.control.results import FIELDS, RULE_TEXT

_COL = {f.key: j for j, f in enumerate(FIELDS, start=1)}


@pytest.fixture(scope="module")
def refreshed(tmp_path_factory):
    folder = tmp_path_factory.mktemp("results")

    def edit(wb):  # one row that cannot be checked, one input error
        ws = wb["Models"]
        ws.cell(row=3, column=3, value=1e300)
        ws.cell(row=4, column=11, value="1,,2")

    path = make_book(folder, edit=edit, models=3)
    main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    return load_workbook(path)


def _data_rows(ws):
    return [r for r in range(2, ws.max_row + 1) if isinstance(ws.cell(r, 1).value, dt.datetime)]


@pytest.mark.parametrize("sheet", ["Results", "History"])
def test_number_formats_follow_the_quantity(refreshed, sheet):
    ws = refreshed[sheet]
    rows = [r for r in _data_rows(ws) if ws.cell(r, _COL["status"]).value in ("clear", "breach")]
    assert rows
    expect = {
        "as_of": "yyyy-mm-dd",
        "run_time": "yyyy-mm-dd hh:mm",
        "feller_ratio": "0.000",
        "fourier_price": "#,##0.0000",
        "mc_price": "#,##0.0000",
        "diff_vol_bp": "+0.0;-0.0;0.0",
        "maturity": "0.0000",
        "safe_step_days": "0.0",
        "seed": "0",
    }
    for r in rows:
        for key, fmt in expect.items():
            assert ws.cell(r, _COL[key]).number_format == fmt, (key, r)
        prob = ws.cell(r, _COL["negative_probability"])
        assert prob.number_format == ("0.0E+00" if prob.value < 1e-4 else "0.00%")


@pytest.mark.parametrize("sheet", ["Results", "History"])
def test_no_header_word_is_wider_than_its_column_and_the_row_is_tall_enough(refreshed, sheet):
    ws = refreshed[sheet]
    lines = 1
    for f in FIELDS:
        width = ws.column_dimensions[ws.cell(1, _COL[f.key]).column_letter].width
        text = ws.cell(1, _COL[f.key]).value
        # width rule: a column holds its longest header word plus one character
        assert max(len(w) for w in text.split()) + 1 <= width, (text, width)
        assert ws.cell(1, _COL[f.key]).alignment.wrap_text
        # greedy word wrap at (width - 1) characters a line
        n, used = 1, 0
        for word in text.split():
            if used and used + 1 + len(word) > width - 1:
                n, used = n + 1, len(word)
            else:
                used += (1 if used else 0) + len(word)
        lines = max(lines, n)
    assert ws.row_dimensions[1].height >= 15 * lines
    assert ws.freeze_panes == "E2"


@pytest.mark.parametrize("sheet", ["Results", "History"])
def test_print_setup(refreshed, sheet):
    ws = refreshed[sheet]
    assert ws.page_setup.orientation == "landscape"
    assert ws.page_setup.fitToWidth == 1 and ws.page_setup.fitToHeight == 0
    assert ws.sheet_properties.pageSetUpPr.fitToPage
    assert ws.print_title_rows == "$1:$1"


def test_header_states_the_production_step(refreshed):
    header = refreshed["Results"].cell(1, _COL["negative_probability"]).value
    assert "production step (1/8 y)" in header  # the test book runs 8 steps a year


def test_shading_follows_the_stated_rule(refreshed):
    ws = refreshed["Results"]
    assert any(ws.cell(r, 1).value == RULE_TEXT for r in range(1, ws.max_row + 1))
    settings = {
        row[0].value: row[1].value for row in refreshed["Settings"].iter_rows() if row[0].value
    }
    feller_warning = settings["feller ratio warning below"]
    max_prob = settings["max negative-step probability"]
    seen = set()
    for r in _data_rows(ws):
        status = ws.cell(r, _COL["status"]).value
        fills = {f.key: ws.cell(r, _COL[f.key]).fill.fgColor.rgb for f in FIELDS}
        shaded = {k for k, v in fills.items() if v not in ("00000000", None)}
        if status in ("input error", "check failed"):
            assert shaded == set(_COL), status  # the whole row, rose
            seen.add("row")
            continue
        expected = set()
        ratio = ws.cell(r, _COL["feller_ratio"]).value
        if ratio < feller_warning:
            expected.add("feller_ratio")
        if ws.cell(r, _COL["negative_probability"]).value > max_prob:
            expected.add("negative_probability")
        if ws.cell(r, _COL["verdict"]).value != "consistent":
            expected |= {"verdict", "diff_vol_bp"}
        assert shaded == expected, (r, status, shaded, expected)
        assert (status == "breach") == bool(expected)  # shaded exactly when flagged
        seen.add("cells" if expected else "none")
    assert {"row", "cells"} <= seen


def test_rows_that_cannot_be_checked_say_so(refreshed):
    ws = refreshed["Results"]
    by_status = {}
    for r in _data_rows(ws):
        by_status.setdefault(ws.cell(r, _COL["status"]).value, []).append(r)
    failed = by_status["check failed"]
    for r in failed:
        assert ws.cell(r, _COL["diff_vol_bp"]).value is None
        assert "no vol-bp difference" in ws.cell(r, _COL["message"]).value
    errors = by_status["input error"]
    assert "cell K4" in ws.cell(errors[0], _COL["message"]).value


def test_chart_has_axes_labels_and_the_tolerance_band(refreshed):
    ws = refreshed["Results"]
    (chart,) = ws._charts
    assert chart.x_axis.delete is False and chart.y_axis.delete is False
    # a loaded combined chart lists its parts (itself included) in _charts
    titles = {s.tx.strRef.f for part in chart._charts for s in part.series}
    assert len(titles) == 3  # the differences and the two band lines
    # the chart sits under the table, not far to its right
    anchor_row = chart.anchor._from.row + 1
    last_data = max(_data_rows(ws))
    assert anchor_row > last_data
    labels = [
        ws.cell(r, _COL["underlying"]).value
        for r in range(last_data + 1, ws.max_row + 1)
        if isinstance(ws.cell(r, _COL["underlying"]).value, str)
    ]
    assert any(" K" in x and "y " in x for x in labels)  # model, maturity and strike


def test_seed_cells_hold_15_digits_and_reproduce_the_row(refreshed):
    from rootvar.core.checks.daily import row_seed

    ws = refreshed["Results"]
    for r in _data_rows(ws):
        seed = ws.cell(r, _COL["seed"]).value
        if seed is None:
            continue
        assert isinstance(seed, int) and len(str(seed)) <= 15
        assert float(seed) == seed  # a double holds it exactly
        assert seed == row_seed(20240601, ws.cell(r, _COL["model_id"]).value)


def test_exit_code_says_rows_failed(tmp_path):
    def edit(wb):
        wb["Models"].cell(row=3, column=3, value=1e300)

    path = make_book(tmp_path, edit=edit, models=2)
    code = main(["refresh", str(path), "--as-of", "2026-12-01", "--workers", "1", "--quiet"])
    assert code == control.EXIT_ROWS


def test_one_far_wing_does_not_flatten_the_chart():
    # 20 rows near the band and one at 300 bp: the axis stops at 3 tolerances (30 bp), the
    # note says one bar is cut; without the outlier the axis is left to the program
    from openpyxl import Workbook

    from rootvar.addin.control.results import chart_block
    from rootvar.core.checks.daily import ControlSettings

    settings = ControlSettings()
    rows = [
        {"model_id": "M", "maturity": 1.0, "strike": 90.0 + i, "diff_vol_bp": 0.5 * i - 4.0}
        for i in range(20)
    ]
    for extra, cut in (([], False), ([300.0], True)):
        ws = Workbook().active
        wing = [{"model_id": "W", "maturity": 0.5, "strike": 9.0, "diff_vol_bp": x} for x in extra]
        chart_block(ws, rows + wing, settings, 1)
        (chart,) = ws._charts
        texts = [c.value for row in ws.iter_rows(min_row=2, max_row=2) for c in row if c.value]
        assert any(("cut" in t) is cut for t in texts), texts
        if cut:
            limit = 3 * settings.tolerance_bp
            assert (chart.y_axis.scaling.min, chart.y_axis.scaling.max) == (-limit, limit)
        else:
            assert chart.y_axis.scaling.max is None
