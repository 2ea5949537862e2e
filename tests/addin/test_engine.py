"""The headless workbook engine."""

import hashlib

import numpy as np
import pytest
from openpyxl import Workbook, load_workbook
from openpyxl.worksheet.formula import ArrayFormula

from rootvar.addin.cells import MARK
from rootvar.addin.engine import FormulaError, compute_workbook
from rootvar.core import HestonParams, heston_price


def _book(tmp_path, fill):
    wb = Workbook()
    ws = wb.active
    ws.title = "Main"
    fill(ws, wb)
    path = tmp_path / "book.xlsx"
    wb.save(path)
    return path


def _digest(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_published_price_through_a_workbook(tmp_path):
    # Fang & Oosterlee (2008) Heston case (secondary source): 5.785155450 at T=1.
    def fill(ws, wb):
        for i, (k, v) in enumerate(
            [
                ("v0", 0.0175),
                ("kappa", 1.5768),
                ("theta", 0.0398),
                ("vol of vol", 0.5751),
                ("rho", -0.5711),
            ],
            start=1,
        ):
            ws.cell(row=i, column=1, value=k)
            ws.cell(row=i, column=2, value=v)
        ws["D1"] = "=ROOTVAR_FOURIER_PRICE(A1:B5,100,100,1)"
        ws["D2"] = "=ROUND(D1*1000,0)/1000+0*SUM(B1:B5)"
        ws["D3"] = '="price "&ROUND(D1,4)'

    path = _book(tmp_path, fill)
    before = _digest(path)
    report = compute_workbook(path, tmp_path / "out.xlsx")
    assert report.error_cells == []
    ws = load_workbook(tmp_path / "out.xlsx")["Main"]
    assert ws["D1"].value == pytest.approx(5.785155450, abs=1e-7)
    assert ws["D2"].value == pytest.approx(5.785)
    assert ws["D3"].value == "price 5.7852"
    assert _digest(path) == before  # the template is untouched


def test_spill_fills_cells_and_later_formulas_read_them(tmp_path):
    def fill(ws, wb):
        ws["A1"] = "=ROOTVAR_FOURIER_PRICE(B10:F10,100,H1:H3,1)"
        ws["H1"], ws["H2"], ws["H3"] = 90.0, 100.0, 110.0
        ws["B10"], ws["C10"], ws["D10"], ws["E10"], ws["F10"] = 0.04, 1.5, 0.04, 0.5, -0.6
        ws["C1"] = "=SUM(A1:A3)"  # reads spilled cells A2 and A3
        ws["C2"] = "=INDEX(A1:A3,3)"

    path = _book(tmp_path, fill)
    report = compute_workbook(path, tmp_path / "out.xlsx")
    ws = load_workbook(tmp_path / "out.xlsx")["Main"]
    ref = heston_price(HestonParams(0.04, 1.5, 0.04, 0.5, -0.6), 100, [90, 100, 110], 1.0)
    np.testing.assert_allclose([ws["A1"].value, ws["A2"].value, ws["A3"].value], ref)
    assert ws["C1"].value == pytest.approx(ref.sum())
    assert ws["C2"].value == pytest.approx(ref[2])
    assert report.passes >= 2


def test_blocked_spill_is_reported_in_the_cell(tmp_path):
    def fill(ws, wb):
        ws["A1"] = "=ROOTVAR_FOURIER_PRICE(B10:F10,100,H1:H3,1)"
        ws["A2"] = "in the way"
        ws["H1"], ws["H2"], ws["H3"] = 90.0, 100.0, 110.0
        ws["B10"], ws["C10"], ws["D10"], ws["E10"], ws["F10"] = 0.04, 1.5, 0.04, 0.5, -0.6

    path = _book(tmp_path, fill)
    report = compute_workbook(path, tmp_path / "out.xlsx")
    assert report.error_cells and "cannot spill" in report.error_cells[0][1]
    assert load_workbook(tmp_path / "out.xlsx")["Main"]["A2"].value == "in the way"


def test_array_formula_fills_its_range(tmp_path):
    def fill(ws, wb):
        ws["A1"] = ArrayFormula("A1:B3", "=ROOTVAR_VARIANCE_TABLE(D1:H1,J1:J2,L1)")
        ws["D1"], ws["E1"], ws["F1"], ws["G1"], ws["H1"] = 0.04, 0.5, 0.04, 1.0, -0.9
        ws["J1"], ws["J2"], ws["L1"] = 1.0, 2.0, 0.5

    path = _book(tmp_path, fill)
    compute_workbook(path, tmp_path / "out.xlsx")
    ws = load_workbook(tmp_path / "out.xlsx")["Main"]
    assert ws["A1"].value == "horizon (years)" and ws["B1"].value == "mean"
    assert ws["A3"].value == 2.0 and ws["B3"].value == pytest.approx(0.04)
    assert ws["C1"].value is None  # the array range is two columns wide: no more


def test_bad_cell_input_becomes_marked_text_not_a_crash(tmp_path):
    def fill(ws, wb):
        ws["A1"] = "=ROOTVAR_FELLER(B1:B3)"
        ws["B1"] = 1.0

    path = _book(tmp_path, fill)
    report = compute_workbook(path, tmp_path / "out.xlsx")
    value = load_workbook(tmp_path / "out.xlsx")["Main"]["A1"].value
    assert value.startswith(MARK) and "params" in value
    assert report.error_cells


def test_text_that_looks_like_a_formula_stays_text(tmp_path):
    def fill(ws, wb):
        ws["A1"] = '="=HYPERLINK(1)"'

    path = _book(tmp_path, fill)
    compute_workbook(path, tmp_path / "out.xlsx")
    cell = load_workbook(tmp_path / "out.xlsx")["Main"]["A1"]
    assert cell.value == "=HYPERLINK(1)" and cell.data_type == "s"


@pytest.mark.parametrize(
    "formulas, fragment",
    [
        ({"A1": "=B1+1", "B1": "=A1*2"}, "reference cycle"),
        ({"A1": "=A1+1"}, "refers to itself"),
    ],
)
def test_cycles_stop_the_run_and_write_nothing(tmp_path, formulas, fragment):
    def fill(ws, wb):
        for ref, text in formulas.items():
            ws[ref] = text

    path = _book(tmp_path, fill)
    with pytest.raises(FormulaError, match=fragment):
        compute_workbook(path, tmp_path / "out.xlsx")
    assert not (tmp_path / "out.xlsx").exists()


@pytest.mark.parametrize(
    "formula, fragment",
    [
        ("=VLOOKUP(1,B1:C2,2)", "VLOOKUP is not supported"),
        ("=SUM(B:B)", "whole rows or columns"),
        ("=MyName*2", "not supported"),
        ("=ROOTVAR_FELER(B1:B5)", "ROOTVAR_FELER is unknown"),
    ],
)
def test_a_formula_outside_the_subset_is_one_cell_error(tmp_path, formula, fragment):
    def fill(ws, wb):
        ws["A1"] = formula
        ws["C1"] = "=1+2"

    path = _book(tmp_path, fill)
    report = compute_workbook(path, tmp_path / "out.xlsx")
    ws = load_workbook(tmp_path / "out.xlsx")["Main"]
    assert ws["A1"].value.startswith(MARK) and fragment in ws["A1"].value
    assert ws["C1"].value == 3
    assert [cell for cell, _ in report.unsupported] == ["Main!A1"]


def test_unsupported_and_misspelt_functions_leave_every_other_cell_computed(tmp_path, capsys):
    from rootvar.addin.cli.main import main

    def fill(ws, wb):
        for i, v in enumerate((0.04, 1.5, 0.04, 0.5, -0.7), start=1):
            ws[f"B{i}"] = v
        ws["D1"] = "=ROOTVAR_FELLER(B1:B5)"
        ws["D2"] = "=ROOTVAR_FELER(B1:B5)"  # misspelt
        ws["D3"] = "=XLOOKUP(1,B1:B5,B1:B5)"  # not in the engine's subset
        ws["D4"] = "=D1*2"
        ws["D5"] = "=ROOTVAR_EULER_NEG_PROB(B1:B5,1/252)"

    path = _book(tmp_path, fill)
    before = _digest(path)
    code = main(["compute", str(path), "--out", str(tmp_path / "out.xlsx")])
    out = capsys.readouterr().out
    assert code == 3  # some cells failed
    assert "2 cells use functions" in out
    assert "ROOTVAR_FELER is unknown" in out and "did you mean ROOTVAR_FELLER?" in out
    assert "XLOOKUP is not supported" in out
    ws = load_workbook(tmp_path / "out.xlsx")["Main"]
    # 2 kappa theta / sigma^2 (Feller 1951) written out
    assert ws["D1"].value == pytest.approx(2 * 1.5 * 0.04 / 0.25)
    assert ws["D4"].value == pytest.approx(2 * ws["D1"].value)
    assert 0 < ws["D5"].value < 1
    assert _digest(path) == before


def test_no_python_exception_name_reaches_a_cell(tmp_path):
    def fill(ws, wb):
        ws["A1"] = '="a"*2'
        ws["A2"] = "=Missing!A1"
        ws["A3"] = "=EXP(1000)"
        ws["A4"] = "=LN(0)"

    path = _book(tmp_path, fill)
    compute_workbook(path, tmp_path / "out.xlsx")
    ws = load_workbook(tmp_path / "out.xlsx")["Main"]
    for ref in ("A1", "A2", "A3", "A4"):
        text = ws[ref].value
        assert text.startswith(MARK), (ref, text)
        assert "Error" not in text and "Exception" not in text, (ref, text)


def test_the_per_cell_monte_carlo_cap_is_lifted_headless_unless_asked(tmp_path):
    from rootvar.addin.functions import MAX_PATH_STEPS

    def fill(ws, wb):
        for i, v in enumerate((0.04, 1.5, 0.04, 0.5, -0.7), start=1):
            ws[f"B{i}"] = v
        # 2,000,000 paths x 32 steps = 64,000,000 > the spreadsheet cap of 50,000,000
        ws["D1"] = ArrayFormula("D1:E8", "=ROOTVAR_MC_PRICE(B1:B5,100,100,1,0,0,,,32,2000000)")

    path = _book(tmp_path, fill)
    capped = compute_workbook(path, tmp_path / "capped.xlsx", max_path_steps=MAX_PATH_STEPS)
    text = load_workbook(tmp_path / "capped.xlsx")["Main"]["D1"].value
    assert "exceeds the cap of 50,000,000" in text and capped.error_cells
    # the message in a spreadsheet program says where the run goes instead, and that is true:
    from rootvar.addin.functions import call

    block = [[0.04], [1.5], [0.04], [0.5], [-0.7]]
    in_sheet = call("ROOTVAR_MC_PRICE", block, 100, 100, 1, 0, 0, None, None, 32, 2_000_000)
    assert "rootvar compute runs it headless without this cap" in in_sheet


def test_refuses_to_overwrite_the_template(tmp_path):
    path = _book(tmp_path, lambda ws, wb: None)
    with pytest.raises(FormulaError, match="must not overwrite"):
        compute_workbook(path, path)


def test_finite_difference_barrier_through_a_workbook(tmp_path):
    # the engine's spilled table equals the core call (deterministic solver)
    from rootvar.core import BarrierOption, pde_price

    def fill(ws, wb):
        ws["A1"] = '=ROOTVAR_PDE_PRICE(B20:F20,100,100,1,"call",90,"down","out",,H1:H2)'
        ws["H1"], ws["H2"] = 0.5, 1.0
        ws["B20"], ws["C20"], ws["D20"], ws["E20"], ws["F20"] = 0.04, 1.5, 0.04, 0.5, -0.6

    path = _book(tmp_path, fill)
    report = compute_workbook(path, tmp_path / "out.xlsx")
    assert report.error_cells == []
    ws = load_workbook(tmp_path / "out.xlsx")["Main"]
    direct = pde_price(
        HestonParams(0.04, 1.5, 0.04, 0.5, -0.6),
        100.0,
        BarrierOption("call", 100.0, 1.0, 90.0, "down", "out", 0.0, (0.5, 1.0)),
    )
    assert ws["A1"].value == "price" and ws["B1"].value == direct.price
    assert ws["A3"].value == "status" and ws["B3"].value == direct.status


@pytest.mark.slow
def test_headless_compute_runs_a_cell_over_the_spreadsheet_cap(tmp_path):
    # 1,562,600 paths x 32 steps = 50,003,200 path-steps: just over the spreadsheet cap.
    def fill(ws, wb):
        for i, v in enumerate((0.04, 1.5, 0.04, 0.5, -0.7), start=1):
            ws[f"B{i}"] = v
        ws["D1"] = ArrayFormula("D1:E8", '=ROOTVAR_MC_PRICE(B1:B5,100,100,1,0,0,,"qe",32,1562600)')

    path = _book(tmp_path, fill)
    report = compute_workbook(path, tmp_path / "out.xlsx")
    assert not report.error_cells
    ws = load_workbook(tmp_path / "out.xlsx")["Main"]
    # Fourier (COS, certified) as the yardstick; bound the standard error too
    ref = heston_price(HestonParams(0.04, 1.5, 0.04, 0.5, -0.7), 100, 100, 1.0)
    assert ws["E2"].value < 0.02
    assert abs(ws["E1"].value - ref) < 4 * ws["E2"].value + 0.01  # QE bias at 32 steps is small
