"""The shipped workbooks: rebuilt identically, computed headlessly, values that check out."""

import hashlib
import shutil

import numpy as np
import pytest
from openpyxl import load_workbook
from openpyxl.utils import get_column_letter
from support.paths import REPO

from rootvar.addin.engine import compute_workbook
from rootvar.addin.workbooks.build import CONTROL, PARAMETER_CHECK, PRICE_TWICE, build_all
from rootvar.addin.workbooks.demo_desk import demo_models
from rootvar.addin.workbooks.style import FORMATS, LINE_HEIGHT, header_lines
from rootvar.core import euler_max_step, euler_worst_case, feller_ratio, heston_price

SHIPPED = REPO / "workbooks"


def test_build_script_reproduces_the_committed_workbooks(tmp_path):
    for built in build_all(tmp_path):
        committed = SHIPPED / built.name
        assert committed.exists(), f"run `rootvar build-workbooks`: {built.name} is missing"
        assert built.read_bytes() == committed.read_bytes(), (
            f"{built.name} differs from the build script's output; rebuild with "
            "`rootvar build-workbooks` and commit"
        )


@pytest.fixture(scope="module")
def computed(tmp_path_factory):
    folder = tmp_path_factory.mktemp("books")
    out = {}
    for name in (PARAMETER_CHECK, PRICE_TWICE):
        shutil.copy(SHIPPED / name, folder / name)
        before = hashlib.sha256((folder / name).read_bytes()).hexdigest()
        report = compute_workbook(folder / name)
        after = hashlib.sha256((folder / name).read_bytes()).hexdigest()
        out[name] = (report, load_workbook(report.output), before == after)
    return out


@pytest.mark.parametrize("name", [PARAMETER_CHECK, PRICE_TWICE])
def test_every_formula_computes_without_error_and_template_is_untouched(computed, name):
    report, wb, untouched = computed[name]
    assert report.formulas > 5 and report.error_cells == []
    assert untouched
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                assert not (isinstance(cell.value, str) and cell.value.startswith("="))


def test_trader_workbook_values_agree_with_the_core(computed):
    _, wb, _ = computed[PARAMETER_CHECK]
    ws = wb["Desk models"]
    for i, m in enumerate(demo_models()):
        p = m.params
        assert ws[f"H{8 + i}"].value == pytest.approx(feller_ratio(p.kappa, p.theta, p.vol_of_vol))
        assert ws[f"L{8 + i}"].value == pytest.approx(
            euler_max_step(p.v0, p.kappa, p.theta, p.vol_of_vol, 0.001)
        )
        worst, level = euler_worst_case(p.kappa, p.theta, p.vol_of_vol, 1 / 252)
        assert ws[f"J{8 + i}"].value == pytest.approx(worst, rel=1e-12)
        assert ws[f"K{8 + i}"].value == pytest.approx(level, rel=1e-12)
    law = wb["Variance law"]
    assert law["C14"].value == "horizon (years)"


def test_structurer_workbook_values_agree_with_the_core(computed):
    _, wb, _ = computed[PRICE_TWICE]
    ws = wb["Price twice"]
    m = next(m for m in demo_models() if m.model_id == "CRV-SHP")
    ref = heston_price(m.params, m.spot, 40.0, 1.0, m.rate, m.div_yield)
    assert ws["E5"].value == pytest.approx(ref, abs=1e-9)
    assert ws["H5"].value == pytest.approx(ref, abs=1e-9)
    study = wb["Step study"]
    assert study["A7"].value == "scheme"
    biases = [study.cell(row=r, column=7).value for r in range(8, 13)]  # euler_absorb rows
    assert np.all(np.array(biases) > 100)  # absorption is biased by hundreds of bp here
    assert len(study._charts) == 1


def test_smile_fit_sheet_agrees_with_the_core(computed):
    import warnings

    from rootvar.addin.workbooks.calibration import SHEET, invented_smile
    from rootvar.core import calibrate

    _, wb, _ = computed[PARAMETER_CHECK]
    ws = wb[SHEET]
    m = next(m for m in demo_models() if m.model_id == "ALD-EQX")
    quotes = [
        dict(zip(("maturity", "strike", "implied_vol"), q, strict=True)) for q in invented_smile()
    ]
    assert 7 * 9 <= len(quotes) <= 8 * 11
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # the invented smile is free of static arbitrage
        free = calibrate(quotes, m.spot, m.rate, m.div_yield)
    for i, name in enumerate(("v0", "kappa", "theta", "vol_of_vol", "rho")):
        assert ws.cell(row=5 + i, column=5).value == name
        assert ws.cell(row=5 + i, column=6).value == pytest.approx(getattr(free.params, name))
    assert ws["F12"].value == pytest.approx(free.rmse_bp)
    assert ws["I10"].value >= 1 - 1e-12  # the constrained fit keeps Feller
    assert (
        ws["L5"].value == pytest.approx(ws["I12"].value - ws["F12"].value) and ws["L5"].value >= 0
    )
    assert ws["E26"].value == "quantity" and ws["E48"].value == "maturity"
    assert len(ws._charts) == 2


def test_shipped_examples_end_with_an_answer(computed):
    # The verdict and the step-study recommendation hold decisions, not "undecided".
    _, wb, _ = computed[PRICE_TWICE]
    assert wb["Price twice"]["H9"].value == "consistent"
    assert wb["Price twice"]["E26"].value == "consistent"
    study = wb["Step study"]
    last = max(r for r in range(8, 40) if study.cell(row=r, column=1).value == "recommendation")
    text = study.cell(row=last, column=2).value
    assert text.endswith("steps") and not text.startswith("none")
    # every step count finer than the recommended one is consistent for that scheme too
    scheme, steps = text.split(" at ")[0], int(text.split(" at ")[1].split()[0])
    rows = [[study.cell(row=r, column=c).value for c in range(1, 10)] for r in range(8, last)]
    assert all(r[8] == "consistent" for r in rows if r[0] == scheme and r[1] >= steps)


# ------------------------------------------------------------------------------ the look


def _template(name):
    return load_workbook(SHIPPED / name)


@pytest.mark.parametrize(
    "name, sheet, cells, kind",
    [
        (PARAMETER_CHECK, "Desk models", ["H8", "H12"], "ratio"),
        (PARAMETER_CHECK, "Desk models", ["I8", "J10", "B5"], "probability"),
        (PARAMETER_CHECK, "Desk models", ["K8"], "variance_log"),
        (PARAMETER_CHECK, "Desk models", ["L8", "B4"], "step_years"),
        (PARAMETER_CHECK, "Desk models", ["M8"], "days"),
        (PARAMETER_CHECK, "Desk models", ["C8", "E9"], "variance"),
        (PARAMETER_CHECK, "Variance law", ["F15", "M20", "Q15"], "variance_log"),
        (PARAMETER_CHECK, "Variance law", ["N15", "O15", "P15", "R15"], "probability"),
        (PARAMETER_CHECK, "Variance law", ["C15", "A15"], "years"),
        (PRICE_TWICE, "Price twice", ["E5", "E9", "E19", "E20", "H5"], "price"),
        (PRICE_TWICE, "Price twice", ["E6"], "vol"),
        (PRICE_TWICE, "Price twice", ["B15", "B16"], "rate"),
        (PRICE_TWICE, "Price twice", ["E23", "H8", "B22"], "bp"),
        (PRICE_TWICE, "Price twice", ["E16"], "seconds"),
        (PRICE_TWICE, "Price twice", ["E13", "E14"], "probability"),
        (PRICE_TWICE, "Price twice", ["B21"], "seed"),
        (PRICE_TWICE, "Price twice", ["E27", "B20"], "count"),
        (PRICE_TWICE, "Step study", ["D8", "E12", "F20"], "price"),
        (PRICE_TWICE, "Step study", ["G8"], "bp"),
        (PRICE_TWICE, "Step study", ["J8"], "seconds"),
        (PRICE_TWICE, "Step study", ["C8"], "step_years"),
        # Greeks twice: the call's Fourier table (rows 13-24), its check (28-39), the barrier's
        # (44-55); price row first, gamma the third
        (PRICE_TWICE, "Greeks twice", ["F13", "F14", "F16", "F24", "H28", "K29", "L55"], "greek"),
        (PRICE_TWICE, "Greeks twice", ["F15", "F30", "G30", "H46", "L46"], "gamma"),
        (PRICE_TWICE, "Greeks twice", ["G13", "G24", "I28", "I55"], "error_estimate"),
        (PRICE_TWICE, "Greeks twice", ["J28", "J55"], "greek_difference"),
        (PRICE_TWICE, "Greeks twice", ["J30", "J46"], "gamma_difference"),
        (PRICE_TWICE, "Greeks twice", ["B13", "B22"], "price"),
        (CONTROL, "Settings", ["B5"], "probability"),
        (CONTROL, "Settings", ["B7", "B8"], "count"),
        (CONTROL, "Settings", ["B9"], "seed"),
        (CONTROL, "Models", ["D2", "E3"], "rate"),
    ],
)
def test_number_format_fits_the_quantity(name, sheet, cells, kind):
    ws = _template(name)[sheet]
    for ref in cells:
        assert ws[ref].number_format == FORMATS[kind], (sheet, ref)


def test_formats_show_numbers_as_the_trade_reads_them():
    # Excel's conditional sections (common practice, no source): zero as 0%, tiny scientific
    assert FORMATS["probability"].startswith("[=0]0%;[<0.001]0.00E+00;")
    assert FORMATS["price"] == "0.0000" and FORMATS["bp"] == "0.0" and FORMATS["seconds"] == "0.00"


@pytest.mark.parametrize(
    "name, sheet, header_row, first_col, texts",
    [
        (PARAMETER_CHECK, "Desk models", 7, 1, None),
        (PRICE_TWICE, "Step study", 7, 1, None),
        (PRICE_TWICE, "Greeks twice", 27, 4, None),
        (PRICE_TWICE, "Greeks twice", 43, 4, None),
        (CONTROL, "Models", 1, 1, None),
    ],
)
def test_no_header_is_wider_than_its_column(computed, name, sheet, header_row, first_col, texts):
    # Width rule (workbook_build): each header word fits its column, and the header row is
    # tall enough for every wrapped header.  Read from the computed copy where headers are
    # formulas or come from a function.
    wb = computed[name][1] if name in computed else _template(name)
    ws = wb[sheet]
    height = ws.row_dimensions[header_row].height
    col = first_col
    while ws.cell(row=header_row, column=col).value not in (None, ""):
        text = str(ws.cell(row=header_row, column=col).value)
        width = ws.column_dimensions[get_column_letter(col)].width
        assert all(len(w) <= width - 1 for w in text.split()), (sheet, text, width)
        lines = header_lines(text, width)
        assert height >= LINE_HEIGHT * len(lines), (sheet, text, width, height)
        assert ws.cell(row=header_row, column=col).alignment.wrap_text
        col += 1
    assert col > first_col + 5


def test_the_variance_table_headers_fit(computed):
    ws = computed[PARAMETER_CHECK][1]["Variance law"]
    height = ws.row_dimensions[14].height
    for col in range(3, 20):
        text = ws.cell(row=14, column=col).value
        if text:
            width = ws.column_dimensions[get_column_letter(col)].width
            assert height >= LINE_HEIGHT * len(header_lines(text, width)), (text, width)


@pytest.mark.parametrize(
    "name, sheet, titles",
    [
        (PARAMETER_CHECK, "Desk models", "$7:$7"),
        (PARAMETER_CHECK, "Variance law", "$14:$14"),
        (PRICE_TWICE, "Price twice", None),
        (PRICE_TWICE, "Step study", "$7:$7"),
        (PRICE_TWICE, "Greeks twice", "$1:$2"),
        (CONTROL, "Settings", None),
        (CONTROL, "Models", "$1:$1"),
    ],
)
def test_print_setup_landscape_fit_to_width_repeated_titles(name, sheet, titles):
    ws = _template(name)[sheet]
    assert ws.page_setup.orientation == "landscape"
    assert ws.sheet_properties.pageSetUpPr.fitToPage
    assert int(ws.page_setup.fitToWidth) == 1 and int(ws.page_setup.fitToHeight) == 0
    if titles:
        assert ws.print_title_rows == titles


def test_long_tables_freeze_their_header_rows():
    assert _template(PARAMETER_CHECK)["Desk models"].freeze_panes == "C8"
    assert _template(PRICE_TWICE)["Step study"].freeze_panes == "A8"
    assert _template(CONTROL)["Models"].freeze_panes == "C2"


def test_charts_have_explicit_axes_log_scale_and_markers():
    law = _template(PARAMETER_CHECK)["Variance law"]
    study = _template(PRICE_TWICE)["Step study"]
    charts = law._charts + study._charts
    assert len(law._charts) == 2 and len(study._charts) == 1
    for chart in charts:
        assert chart.x_axis.delete is False and chart.y_axis.delete is False
        assert chart.x_axis.title is not None and chart.y_axis.title is not None
    quantiles = law._charts[1]
    assert quantiles.y_axis.scaling.logBase == 10
    for chart in (quantiles, study._charts[0]):
        symbols = [s.marker.symbol for s in chart.series]
        dashes = [s.graphicalProperties.line.dashStyle for s in chart.series]
        assert len(set(symbols)) == len(symbols) and len(set(dashes)) == len(dashes)


def test_breach_shading_marks_the_cell_and_its_threshold():
    ws = _template(PARAMETER_CHECK)["Desk models"]
    rules = {str(rng.sqref): [r.formula[0] for r in rng.rules] for rng in ws.conditional_formatting}
    last = 7 + len(demo_models())  # one row per demo model from row 8
    assert rules[f"I8:I{last}"] == ["I8>$B$5"]
    assert rules["B5"] == [f"MAX(I8:I{last})>B5"]
    assert "Shaded rose" in ws["A6"].value  # the rule is stated on the sheet


def test_every_step_dependent_header_states_the_step(computed):
    ws = computed[PARAMETER_CHECK][1]["Desk models"]
    for col in "IJK":
        assert "step 1 trading day" in ws[f"{col}7"].value
    law = computed[PARAMETER_CHECK][1]["Variance law"]
    euler = [law.cell(row=14, column=c).value for c in range(3, 20)]
    euler = [h for h in euler if h and ("Euler" in h or "v*" in h)]
    assert len(euler) == 4 and all("1 trading day" in h for h in euler)
    pt = computed[PRICE_TWICE][1]["Price twice"]
    assert "step 7.88 trading days" in pt["D8"].value and "7.88" in pt["D18"].value


# ------------------------------------------------------------------------------ exotics sheet


def _by_label(ws, col=4, first=5, last=40):
    """Row number of each label in column D of the exotics sheet."""
    return {ws.cell(row=r, column=col).value: r for r in range(first, last)}


def test_exotics_sheet_agrees_with_the_core(computed):
    # the sheet's numbers are the core's for the same inputs (deterministic seeds); the
    # second methods are the PDE, the reference run and the certified Fourier price
    from rootvar.addin.workbooks.exotics import BARRIER_LEVELS, SHEET
    from rootvar.core import (
        AsianOption,
        BarrierOption,
        ForwardStartOption,
        compare_exotic,
        forward_start_price,
        pde_price,
    )

    ws = computed[PRICE_TWICE][1][SHEET]
    m = next(m for m in demo_models() if m.model_id == "CRV-SHP")
    rows = _by_label(ws)
    monthly = tuple((j + 1) / 12 for j in range(12))
    products = (
        BarrierOption("call", 40.0, 1.0, 34.0, "down", "out"),
        AsianOption("call", 40.0, monthly),
        ForwardStartOption("call", 0.5, 1.0, 1.0),
    )
    for col, product, method in zip(
        "EFG", products, ("PDE", "reference Monte Carlo", "Fourier"), strict=True
    ):
        c = compare_exotic(m.params, m.spot, product, m.rate, m.div_yield, seed=20240601)
        # a saved workbook keeps 15 significant digits
        same = {"rel": 1e-14}
        value = ws[f"{col}{rows['Monte Carlo price, with control variate']}"].value
        assert value == pytest.approx(c.mc.price, **same)
        value = ws[f"{col}{rows['Monte Carlo price, without control']}"].value
        assert value == pytest.approx(c.mc.uncontrolled_price, **same)
        assert ws[f"{col}{rows['variance reduction (x)']}"].value > 1.0
        assert ws[f"{col}{rows['second method']}"].value == method
        assert ws[f"{col}{rows['second price']}"].value == pytest.approx(c.second_price, **same)
        # the shipped example ends with an answer, as the vanilla's does
        assert ws[f"{col}{rows['verdict']}"].value == "consistent"
        assert ws[f"{col}{rows['reason']}"].value == c.reason
    fwd = forward_start_price(m.params, m.spot, products[2], m.rate, m.div_yield)
    assert ws[f"G{rows['second price']}"].value == pytest.approx(fwd, rel=1e-14)
    # the barrier table: one row per level, the PDE column is pde_price's
    table = next(r for r in range(30, 60) if ws.cell(row=r, column=4).value == "barrier") + 1
    levels = [ws.cell(row=table + i, column=4).value for i in range(len(BARRIER_LEVELS))]
    assert levels == list(BARRIER_LEVELS)
    at = BARRIER_LEVELS.index(34.0)
    direct = pde_price(m.params, m.spot, products[0], m.rate, m.div_yield)
    assert ws.cell(row=table + at, column=7).value == pytest.approx(direct.price, rel=1e-14)
    assert ws.cell(row=table + at, column=9).value == direct.status
    assert len(ws._charts) == 2


def test_exotics_sheet_looks_right():
    from rootvar.addin.workbooks.exotics import SHEET

    ws = _template(PRICE_TWICE)[SHEET]
    rows = _by_label(ws)
    for col in "EFG":
        assert (
            ws[f"{col}{rows['Monte Carlo price, with control variate']}"].number_format
            == (FORMATS["price"])
        )
        assert ws[f"{col}{rows['reason']}"].alignment.wrap_text
        assert ws[f"{col}4"].alignment.wrap_text  # contract titles wrap in their column
    assert ws.page_setup.orientation == "landscape" and int(ws.page_setup.fitToWidth) == 1
    # the barrier table's headers fit their columns (the width rule of workbook_build)
    header = next(r for r in range(30, 60) if ws.cell(row=r, column=4).value == "barrier")
    height = ws.row_dimensions[header].height
    for col in range(4, 13):
        text = ws.cell(row=header, column=col).value
        width = ws.column_dimensions[get_column_letter(col)].width
        assert all(len(w) <= width - 1 for w in text.split()), (text, width)
        assert height >= LINE_HEIGHT * len(header_lines(text, width)), (text, width)
    for chart in ws._charts:
        assert chart.x_axis.delete is False and chart.y_axis.delete is False
        assert chart.x_axis.title is not None and chart.y_axis.title is not None


# ------------------------------------------------------------------------------ Greeks sheet


def _greeks_inputs():
    m = next(m for m in demo_models() if m.model_id == "CRV-SHP")
    return m, (m.params, m.spot)


def test_greeks_sheet_agrees_with_the_core(computed):
    # the tables are the core's for the sheet's inputs (deterministic seed): the call's
    # certified Fourier Greeks, its Monte Carlo check against them, the barrier's against
    # the PDE; a saved workbook keeps 15 significant digits
    from rootvar.addin.functions import GREEK_LABELS
    from rootvar.addin.workbooks.greeks import CHECK_HEADERS, GREEKS_HEADERS, ROWS, SHEET, TABLES
    from rootvar.core import BarrierOption, EuropeanOption, compare_greeks, heston_greeks

    ws = computed[PRICE_TWICE][1][SHEET]
    m, (p, spot) = _greeks_inputs()
    same = {"rel": 1e-14, "abs": 1e-300}
    (_, top, _), (_, vanilla, _), (_, barrier, _) = TABLES
    assert [ws.cell(row=top, column=4 + j).value for j in range(5)] == list(GREEKS_HEADERS)
    g = heston_greeks(p, spot, 40.0, 1.0, m.rate, m.div_yield, "call")
    for i, name in enumerate(ROWS, start=1):
        assert ws.cell(row=top + i, column=4).value == GREEK_LABELS[name]
        value, error = (g.price, g.price_error) if name == "price" else (
            g.values[name], g.errors[name])  # fmt: skip
        assert ws.cell(row=top + i, column=6).value == pytest.approx(value, **same)
        assert ws.cell(row=top + i, column=7).value == pytest.approx(error, **same)
    assert ws.cell(row=top + len(ROWS) + 1, column=4).value is None  # no notes row here
    products = (EuropeanOption("call", 40.0, 1.0),
                BarrierOption("call", 40.0, 1.0, 34.0, "down", "out"))  # fmt: skip
    for header, product in zip((vanilla, barrier), products, strict=True):
        row = [ws.cell(row=header, column=4 + j).value for j in range(len(CHECK_HEADERS))]
        assert row == list(CHECK_HEADERS)
        c = compare_greeks(p, spot, product, m.rate, m.div_yield, seed=20240601)
        for i, name in enumerate(ROWS, start=1):
            if name not in c.table.index:
                assert ws.cell(row=header + i, column=13).value == "not compared"
                continue
            t = c.table.loc[name]
            keys = ("monte_carlo", "mc_std_error", "reference", "reference_error", "difference",
                    "band", "tolerance")  # fmt: skip
            for j, key in enumerate(keys):
                got = ws.cell(row=header + i, column=6 + j).value
                assert got == pytest.approx(float(t[key]), **same), (name, key)
            assert ws.cell(row=header + i, column=13).value == t["verdict"]
        overall = header + len(ROWS) + 1
        assert ws.cell(row=overall, column=4).value == "overall"
        assert ws.cell(row=overall, column=13).value == c.verdict
        method = {"fourier": "Fourier (contour)", "pde": "PDE (finite differences)"}
        assert ws.cell(row=overall, column=8).value == method[c.reference_method]
    # the shipped call decides its delta, gamma and rhos at 100,000 paths
    verdicts = {ws.cell(row=vanilla + i, column=4).value: ws.cell(row=vanilla + i, column=13).value
                for i in range(1, len(ROWS) + 1)}  # fmt: skip
    for label in ("delta", "gamma", "rho (rate)", "rho (dividend yield)"):
        assert verdicts[label] == "consistent", verdicts


def test_greeks_sheet_shows_no_raw_number_and_no_nan(computed):
    from rootvar.addin.workbooks.greeks import SHEET

    ws = computed[PRICE_TWICE][1][SHEET]
    numbers = 0
    for row in ws.iter_rows():
        for cell in row:
            if isinstance(cell.value, float):
                numbers += 1
                assert cell.number_format != "General", cell.coordinate
            assert not (isinstance(cell.value, str) and cell.value.lower() == "nan")
    assert numbers > 100


def _shown(value: float, number_format: str) -> str:
    """The text a spreadsheet shows for ``value`` in one of the sheet's formats."""
    section = number_format.split(";")[0 if value >= 0 or ";" not in number_format else 1]
    sign = "+" if section.startswith("+") else ""
    body = section.lstrip("+-")
    if "E+" in body:
        digits = len(body.split(".")[1].split("E")[0]) if "." in body else 0
        return sign + f"{value:.{digits}E}"
    digits = len(body.split(".")[1]) if "." in body else 0
    return sign + (f"{value:,.{digits}f}" if "," in body else f"{value:.{digits}f}")


def test_greeks_sheet_numbers_fit_their_columns(computed):
    # a number wider than its column shows as ### (a count of billions of paths once did)
    from rootvar.addin.workbooks.greeks import SHEET

    ws = computed[PRICE_TWICE][1][SHEET]
    checked = 0
    for row in ws.iter_rows():
        for cell in row:
            if isinstance(cell.value, (int, float)) and not isinstance(cell.value, bool):
                if cell.number_format == "General":
                    continue  # held by test_greeks_sheet_shows_no_raw_number_and_no_nan
                width = ws.column_dimensions[cell.column_letter].width
                text = _shown(float(cell.value), cell.number_format)
                assert len(text) <= width - 1, (cell.coordinate, text, width)
                checked += 1
    assert checked > 100


def test_greeks_sheet_wrapped_texts_fit_their_rows(computed):
    # the Monte Carlo estimators and the notes come from the core; the builder sized the
    # rows for them (ESTIMATOR_LINES), so a longer text shows here rather than clipped
    from rootvar.addin.workbooks.greeks import CHECK_HEADERS, ROWS, SHEET, TABLES
    from rootvar.addin.workbooks.style import text_lines

    ws = computed[PRICE_TWICE][1][SHEET]
    col = 4 + len(CHECK_HEADERS) - 1
    width = ws.column_dimensions[get_column_letter(col)].width
    for _, header, what in TABLES:
        if what != "check":
            continue
        for r in range(header + 1, header + len(ROWS) + 2):
            cell = ws.cell(row=r, column=col)
            assert cell.alignment.wrap_text
            height = ws.row_dimensions[r].height or LINE_HEIGHT
            lines = text_lines(cell.value, width)
            assert lines * LINE_HEIGHT <= height, (r, cell.value, lines, height)


def test_greeks_sheet_looks_right():
    from rootvar.addin.cli.text import CAUTION
    from rootvar.addin.workbooks.greeks import SHEET, TABLES
    from rootvar.addin.workbooks.style import BREACH

    ws = _template(PRICE_TWICE)[SHEET]
    assert ws["A2"].value == CAUTION
    assert [s.title for s in _template(PRICE_TWICE).worksheets][-2:] == ["Exotics", SHEET]
    # rose only where it means something: a biased verdict, in the verdict columns
    rules = {str(rng.sqref): rng.rules for rng in ws.conditional_formatting}
    expected = {f"M{h + 1}:M{h + 13}": f'M{h + 1}="biased"' for _, h, w in TABLES if w == "check"}
    assert set(rules) == set(expected)
    for ref, formula in expected.items():
        (rule,) = rules[ref]
        assert rule.formula == [formula] and rule.dxf.fill.fgColor.rgb.endswith(
            BREACH.fgColor.rgb[-6:]
        )
    assert "Shaded rose: a verdict of biased" in " ".join(
        str(ws.cell(row=r, column=7).value) for r in range(4, 9)
    )
    # every table's formula fills exactly its table: header, price, Greeks (and overall)
    assert {str(f.ref) for f in (ws[f"D{h}"].value for _, h, _ in TABLES)} == {
        "D12:H24", "D27:O40", "D43:O56"}  # fmt: skip
    assert [b.id for b in ws.row_breaks.brk] == [TABLES[2][1] - 2]
