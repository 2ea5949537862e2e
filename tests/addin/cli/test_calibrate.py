"""Calibration in cells and on the command line."""

import json

import numpy as np
import pandas as pd
import pytest

from rootvar.addin.cells import MARK
from rootvar.addin.cli.main import main
from rootvar.addin.functions import call
from rootvar.core import HestonParams, calibrate, heston_implied_vol

P = HestonParams(0.035, 1.2, 0.05, 0.6, -0.7)


@pytest.fixture(scope="module")
def quotes():
    """A 5 x 7 surface from rootvar.core.heston_implied_vol, vols rounded to 0.1 bp."""
    t = np.array([0.1, 0.25, 0.5, 1.0, 2.0])[:, None]
    k = 100 * np.exp(np.linspace(-2, 2, 7)[None, :] * np.sqrt(0.05 * t))
    vol = heston_implied_vol(P, 100.0, k, t, 0.02, 0.01)
    return pd.DataFrame(
        {
            "maturity": np.broadcast_to(t, k.shape).ravel(),
            "strike": k.ravel().round(2),
            "implied_vol": vol.ravel().round(5),
        }
    )


def _range(frame):
    return [list(frame.columns), *frame.values.tolist()]


def test_calibrate_cell_equals_the_core_and_feeds_other_functions(quotes):
    block = call("ROOTVAR_CALIBRATE", _range(quotes), 100.0, 0.02, 0.01, None, 0)
    core = calibrate(quotes, 100.0, 0.02, 0.01, starts=0)
    labels = [row[0] for row in block]
    assert labels[:5] == ["v0", "kappa", "theta", "vol_of_vol", "rho"]
    for name, value in block[:5]:
        assert value == pytest.approx(getattr(core.params, name), rel=1e-12)
    assert dict(block)["RMSE (bp)"] == pytest.approx(core.rmse_bp, rel=1e-12)
    assert dict(block)["status"] == "converged"
    # the first five rows are a params block for every other function
    assert call("ROOTVAR_FELLER", block[:5]) == pytest.approx(core.params.feller_ratio)


def test_residual_and_tradeoff_tables_spill_with_headers(quotes):
    rows = call("ROOTVAR_CALIBRATION_RESIDUALS", _range(quotes), 100.0, 0.02, 0.01, None, 0)
    assert rows[0] == ["maturity", "strike", "market vol", "model vol", "error bp", "weight"]
    assert len(rows) == 1 + len(quotes)
    table = call("ROOTVAR_FELLER_TRADEOFF", _range(quotes), 100.0, 0.02, 0.01, 0.5, 0)
    assert table[0] == ["quantity", "free", "ratio >= 0.5", "cost"]
    found = {row[0]: row for row in table}
    assert found["Feller ratio"][2] >= 0.5 * (1 - 1e-12)
    assert found["RMSE (bp)"][3] == pytest.approx(found["RMSE (bp)"][2] - found["RMSE (bp)"][1])


@pytest.mark.parametrize(
    "args, text",
    [
        (("x", 100.0), "quotes must be a range with a header row"),
        (([["maturity", "strike", "implied_vol"], [1.0, 100.0, 0.2]], 100.0), "at least 6"),
        ((None, 100.0), "quotes must be a range"),
    ],
)
def test_bad_quotes_in_a_cell_give_one_marked_text(args, text):
    out = call("ROOTVAR_CALIBRATE", *args)
    assert isinstance(out, str) and out.startswith(MARK) and text in out
    assert "Error" not in out and "Traceback" not in out


def test_bad_feller_in_a_cell(quotes):
    out = call("ROOTVAR_CALIBRATE", _range(quotes), 100.0, None, None, "sometimes")
    assert out.startswith(MARK) and "feller must be free, enforce" in out
    out = call("ROOTVAR_FELLER_TRADEOFF", _range(quotes), 100.0, None, None, "free")
    assert out.startswith(MARK) and "constraint must be enforce" in out


def test_command_prints_the_tradeoff_and_writes_params(quotes, tmp_path, capsys):
    csv = tmp_path / "quotes.csv"
    quotes.to_csv(csv, index=False)
    out = tmp_path / "params.json"
    rc = main(
        ["calibrate", str(csv), "--spot", "100", "--rate", "0.02", "--div-yield", "0.01",
         "--feller", "0.5", "--starts", "0", "--out", str(out)]
    )  # fmt: skip
    text = capsys.readouterr().out
    assert rc == 0
    assert "RMSE (bp)" in text and "ratio >= 0.5" in text and "independent model validation" in text
    data = json.loads(out.read_text())
    assert data["feller"] == "ratio >= 0.5" and data["feller_ratio"] >= 0.5 * (1 - 1e-12)
    assert set(data) >= {"v0", "kappa", "theta", "vol_of_vol", "rho", "rmse_bp", "status"}


def test_command_exits_2_on_bad_input(quotes, tmp_path, capsys):
    assert main(["calibrate", str(tmp_path / "missing.csv"), "--spot", "100"]) == 2
    assert "quotes file must exist" in capsys.readouterr().err
    bad = tmp_path / "bad.csv"
    frame = quotes.copy()
    frame.loc[2, "maturity"] = 0.0
    frame.to_csv(bad, index=False)
    assert main(["calibrate", str(bad), "--spot", "100"]) == 2
    assert "maturity must be > 0, got 0.0 (row 3)" in capsys.readouterr().err
    assert main(["calibrate", str(bad), "--spot", "100", "--feller", "maybe"]) == 2
