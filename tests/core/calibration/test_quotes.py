"""Reading and checking calibration quotes."""

import warnings

import numpy as np
import pandas as pd
import pytest

from rootvar.core import InputError, bs_price
from rootvar.core.calibration.quotes import StaticArbitrageWarning, read_quotes


def _smile(maturities=(0.25, 1.0), strikes=(80, 90, 100, 110, 120)):
    rows = []
    for t in maturities:
        for k in strikes:
            rows.append(
                {"maturity": t, "strike": k, "implied_vol": 0.2 + 0.1 * (k - 100) ** 2 / 400}
            )
    return rows


def test_records_and_frames_give_the_same_quotes():
    a = read_quotes(_smile(), 100.0)
    b = read_quotes(pd.DataFrame(_smile()), 100.0)
    np.testing.assert_array_equal(a.implied_vol, b.implied_vol)
    assert len(a) == 10 and a.skipped == 0 and a.warnings == ()
    assert np.all(np.diff(a.maturity) >= 0)
    assert a.weight.mean() == pytest.approx(1.0)


def test_empty_and_nan_quotes_are_skipped_and_counted():
    rows = _smile()
    rows[3]["implied_vol"] = float("nan")
    rows[5]["strike"] = None
    rows.append({"maturity": "", "strike": 100.0, "implied_vol": 0.2})
    q = read_quotes(rows, 100.0)
    assert q.skipped == 3 and len(q) == 8


def test_prices_become_volatilities():
    # round trip through rootvar.core.bs_price (Black & Scholes 1973)
    rows = []
    for t in (0.5, 1.0):
        for k in (80.0, 100.0, 120.0):
            kind = "put" if k < 100 else "call"
            rows.append(
                {
                    "maturity": t,
                    "strike": k,
                    "kind": kind,
                    "price": bs_price(100, k, t, 0.25, 0.03, 0.01, kind),
                }
            )
    q = read_quotes(rows, 100.0, 0.03, 0.01)
    np.testing.assert_allclose(q.implied_vol, 0.25, rtol=1e-12)


def test_weights_from_spreads_and_overrides():
    rows = _smile()
    for i, r in enumerate(rows):
        r["spread"] = 0.01 if i % 2 else 0.02
    q = read_quotes(rows, 100.0)
    assert q.weight.max() / q.weight.min() == pytest.approx(2.0)
    q = read_quotes(rows, 100.0, weights=np.arange(1.0, 11.0))
    assert q.weight.max() / q.weight.min() == pytest.approx(10.0)


@pytest.mark.parametrize(
    "change, message",
    [
        ({"implied_vol": -0.2}, r"quotes implied_vol must be > 0, got -0.2 \(row 2\)"),
        ({"maturity": 0.0}, r"quotes maturity must be > 0, got 0.0 \(row 2\)"),
        ({"strike": "ninety"}, r"quotes strike must be a number, got 'ninety' \(row 2\)"),
    ],
)
def test_bad_values_name_the_row(change, message):
    rows = _smile()
    rows[1].update(change)
    with pytest.raises(InputError, match=message):
        read_quotes(rows, 100.0)


def test_duplicates_one_quote_and_one_maturity_are_errors():
    rows = _smile()
    rows[4] = dict(rows[1])
    with pytest.raises(
        InputError, match=r"quotes row 5 repeats maturity 0\.25, strike 90 of row 2"
    ):
        read_quotes(rows, 100.0)
    with pytest.raises(InputError, match=r"at least 6 usable quotes .* got 1"):
        read_quotes(_smile()[:1], 100.0)
    with pytest.raises(InputError, match="at least two maturities"):
        read_quotes(_smile(maturities=(0.5,), strikes=range(80, 130, 5)), 100.0)
    with pytest.raises(InputError, match="column 'volatility' is not known"):
        read_quotes(pd.DataFrame({"maturity": [1.0], "strike": [1.0], "volatility": [0.2]}), 100.0)
    with pytest.raises(InputError, match="quotes must be a pandas DataFrame"):
        read_quotes("quotes.csv", 100.0)


def test_calendar_arbitrage_is_a_warning():
    # total variance sigma^2 T must not fall with maturity (Gatheral 2006, ch. 7)
    rows = _smile()
    for r in rows:
        if r["maturity"] == 1.0:
            r["implied_vol"] = 0.05
    with pytest.warns(StaticArbitrageWarning, match="calendar arbitrage"):
        q = read_quotes(rows, 100.0)
    assert any("calendar" in w for w in q.warnings)


def test_butterfly_arbitrage_is_a_warning():
    # a kinked smile gives call prices that are not convex in strike (Gatheral 2006, ch. 7)
    rows = _smile(maturities=(0.25, 1.0))
    for r in rows:
        if r["strike"] == 100:
            r["implied_vol"] = 0.6
    with pytest.warns(StaticArbitrageWarning, match="butterfly arbitrage"):
        q = read_quotes(rows, 100.0)
    assert any("butterfly" in w for w in q.warnings)


def test_clean_quotes_raise_no_warning():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        read_quotes(_smile(), 100.0)
