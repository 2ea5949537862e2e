"""The demo desk: the control sheet shows a clean model beside one breach of each kind."""

import pytest
from openpyxl import load_workbook

from rootvar.addin.control.book import MODELS_SHEET, SETTINGS_SHEET, read_models, read_settings
from rootvar.addin.control.checks import check_one
from rootvar.addin.control.results import (
    STATUS_BREACH,
    STATUS_CLEAR,
    STATUS_FAILED,
    result_rows,
)
from rootvar.addin.workbooks.build import build_control
from rootvar.addin.workbooks.demo_desk import demo_models

# The flag texts of rootvar.core.checks.daily.check_model, by reason (model- and option-level).
FELLER = "Feller ratio"
NEGATIVE_STEP = "negative-step probability"
BIASED = "Monte Carlo biased"
UNDECIDED = "Monte Carlo undecided"
UNFORMED = "Monte Carlo check could not be formed"
REASONS = (FELLER, NEGATIVE_STEP, BIASED, UNDECIDED, UNFORMED)

#: The model that shows each reason with the fewest others beside it (see demo_desk).
SHOWN_BY = {
    FELLER: "TMS-BIO",
    NEGATIVE_STEP: "MRD-PWR",
    BIASED: "TMS-BIO",
    UNDECIDED: "QLN-FXB",
    UNFORMED: "OST-FXP",
}
CLEAN = "PLW-GLD"


@pytest.fixture(scope="module")
def demo_rows(tmp_path_factory):
    """The rows a refresh of the shipped control book writes, with its settings and seed.

    The book is built and read as ``rootvar demo`` reads it (settings and models from the
    sheets), and each model is run by the function the refresh runs; only saving is left out.
    """
    path = tmp_path_factory.mktemp("demo") / "control.xlsx"
    build_control(path)
    wb = load_workbook(path)
    settings, _ = read_settings(wb[SETTINGS_SHEET])
    models = read_models(wb[MODELS_SHEET])
    assert [m.model_id for m in models] == [m.model_id for m in demo_models()]
    assert all(m.spec is not None for m in models)
    results = {m.row: check_one(m.spec, settings) for m in models}
    assert not [err for _, err in results.values() if err]
    rows = result_rows(models, results, settings, "2026-12-01", "2026-12-01T00:00:00+00:00")
    by_model = {}
    for r in rows:
        by_model.setdefault(r["model_id"], []).append(r)
    return by_model


def _reasons(rows):
    return {reason for r in rows for reason in REASONS if reason in r["flags"]}


def test_the_demo_desk_keeps_a_modest_count_of_invented_models():
    ids = [m.model_id for m in demo_models()]
    assert 5 <= len(ids) <= 7 and len(set(ids)) == len(ids)
    assert set(SHOWN_BY.values()) | {CLEAN} <= set(ids)


def test_one_model_is_clear_on_every_option(demo_rows):
    rows = demo_rows[CLEAN]
    assert len(rows) == 10  # two maturities x five strikes
    assert all(r["status"] == STATUS_CLEAR and r["flags"] == "" for r in rows)
    assert all(r["verdict"] == "consistent" for r in rows)


@pytest.mark.parametrize("reason", REASONS)
def test_each_flag_reason_shows_on_its_model(demo_rows, reason):
    rows = demo_rows[SHOWN_BY[reason]]
    assert any(reason in r["flags"] for r in rows), (reason, [r["flags"] for r in rows])


def test_the_contrast_reads_clearly(demo_rows):
    # the negative-step model holds Feller; the undecided and unformed ones raise no
    # model-level flag and nothing but their own reason
    assert _reasons(demo_rows["MRD-PWR"]) <= {NEGATIVE_STEP, UNDECIDED}
    assert _reasons(demo_rows["QLN-FXB"]) == {UNDECIDED}
    assert _reasons(demo_rows["OST-FXP"]) == {UNFORMED}
    failed = [r for r in demo_rows["OST-FXP"] if r["status"] == STATUS_FAILED]
    assert failed and all(r["message"].startswith("no vol-bp difference") for r in failed)
    # every other row of the desk that has a flag is a breach, not a failed check
    for model, rows in demo_rows.items():
        if model != "OST-FXP":
            assert all(r["status"] in (STATUS_CLEAR, STATUS_BREACH) for r in rows), model
