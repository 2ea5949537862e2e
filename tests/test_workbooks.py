"""The shipped workbooks: rebuilt identically, computed headlessly, values that check out."""

import hashlib
import shutil
from pathlib import Path

import numpy as np
import pytest
from openpyxl import load_workbook

from rootvar.addin.demo_desk import demo_models
from rootvar.addin.engine import compute_workbook
from rootvar.addin.workbook_build import PARAMETER_CHECK, PRICE_TWICE, build_all
from rootvar.core import euler_max_step, feller_ratio, heston_price

SHIPPED = Path(__file__).resolve().parents[1] / "workbooks"


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
        assert ws[f"J{8 + i}"].value == pytest.approx(
            euler_max_step(p.v0, p.kappa, p.theta, p.vol_of_vol, 0.001)
        )
    law = wb["Variance law"]
    assert law["C14"].value == "horizon (years)"
    assert len(law._charts) == 2


def test_structurer_workbook_values_agree_with_the_core(computed):
    _, wb, _ = computed[PRICE_TWICE]
    ws = wb["Price twice"]
    m = next(m for m in demo_models() if m.model_id == "CRV-SHP")
    ref = heston_price(m.params, m.spot, 40.0, 1.0, m.rate, m.div_yield)
    assert ws["E5"].value == pytest.approx(ref, abs=1e-9)
    assert ws["H5"].value == pytest.approx(ref, abs=1e-9)
    assert ws["H9"].value in ("consistent", "biased", "undecided")
    study = wb["Step study"]
    assert study["A7"].value == "scheme"
    biases = [study.cell(row=r, column=7).value for r in range(8, 13)]  # euler_absorb rows
    assert np.all(np.array(biases) > 100)  # absorption is biased by hundreds of bp here
    assert len(study._charts) == 1


def test_smile_fit_sheet_agrees_with_the_core(computed):
    import warnings

    from rootvar.addin.workbook_calibration import SHEET, invented_smile
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
