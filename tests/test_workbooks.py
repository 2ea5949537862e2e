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
