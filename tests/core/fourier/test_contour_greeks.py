"""The contour route's Greeks: against the COS series' Greeks, Black-Scholes, parity, their
own error bounds, the price's own contour, and the options they hand over to COS."""

import math

import numpy as np
import pytest
from support.greek_boxes import greek_box

import rootvar.core.fourier.contour_greeks_kernels as kernels
import rootvar.core.fourier.greeks as fourier_greeks
from rootvar.core import (
    GREEK_NAMES,
    HestonParams,
    bs_greeks,
    bs_price,
    contour_prices,
    fourier_greek_tolerances,
    heston_greeks,
    heston_greeks_strip,
)
from rootvar.core.fourier.contour import MAX_TILT, TOLERANCE
from rootvar.core.fourier.contour_greeks import greek_table
from rootvar.core.fourier.cos import CONTOUR_STRIKES

SPOT = 100.0
P = HestonParams(0.04, 1.5, 0.04, 0.5, -0.7)
HANDED = "handed over to COS by the contour route: "


def _on_contour(g):
    return all("contour" in g.estimators[name] for name in GREEK_NAMES)


# --- against the COS series' Greeks ---


@pytest.mark.parametrize(
    "seed, count, hard",
    [(1, 200, False), (7, 100, True)],
    ids=["box", "hard box"],
)
def test_agree_with_cos_greeks_and_the_estimates_bound_the_gap(seed, count, hard):
    # Identity test: the two certified Fourier routes (tests/core/fourier/test_greeks.py
    # holds both to extended-precision differences of the price).  200 ordinary cases
    # (maturities 0.05-5 years, strikes within 2 sd) and 100 of the hard box (v0 down to
    # 1e-3, vol_of_vol 0.05-2, rho to -0.99, one day to 10 years, strikes to 4 sd): every
    # case certifies on the contour; worst gap 0.011 of a tolerance (gamma) on the box,
    # 0.010 on the hard box.  Each gap is within the two routes' estimates plus
    # 1e-12 x spot, the rounding floor of COS's own sums.  By hand: 1,000 hard-box cases
    # (seed 11) all certify, worst gap 0.0105, 3 gaps past the two estimates, at most
    # 7.3e-13; a wider box (500 cases, 1e-4 to 30 years, vol_of_vol 0.01-5, |rho| <= 1,
    # strikes to 6 sd) all certify, worst gap 0.57 of a tolerance, 8 gaps past the two
    # estimates, all at vol_of_vol <= 0.11, where COS is outside its own estimate: a
    # 40-digit evaluation of the contour integral (mpmath 1.3, by hand) of the worst
    # (d_vol_of_vol, vol_of_vol 0.013, a put 13 x spot) is 1e-14 from the contour's.
    worst = 0.0
    for case in greek_box(seed, count, hard):
        g = heston_greeks(*case)
        c = heston_greeks(*case, method="cos")
        assert _on_contour(g), (case, g.notes)
        tol = fourier_greek_tolerances(case[1])
        assert abs(g.price - c.price) <= g.price_error + TOLERANCE * SPOT, case
        for name in GREEK_NAMES:
            gap = abs(g[name] - c[name])
            assert gap <= tol[name], (name, case, g[name], c[name])
            assert g.errors[name] <= tol[name], (name, case)
            assert gap <= g.errors[name] + c.errors[name] + 1e-12 * SPOT, (name, case, gap)
            worst = max(worst, gap / tol[name])
    assert worst <= 0.05


def test_price_is_the_contour_price_on_the_same_contour_and_levels():
    # The Greeks' kernel on the price's own contour (contour_prices(mode="strike")):
    # the same alpha and angle; with every Greek's tolerance out of the way the same
    # levels, on as many nodes or more (the level-0 walk also waits for every weighted
    # integrand to fall), and the price agrees to rounding
    strikes = np.array([60.0, 95.0, 100.0, 105.0, 160.0])
    loose = dict.fromkeys(GREEK_NAMES, 1e30)
    for t in (0.1, 1.0, 10.0):
        for put in (False, True):
            table = greek_table(P, SPOT, strikes, t, 0.02, 0.01, put, loose)
            kind = "put" if put else "call"
            prices, d = contour_prices(P, SPOT, strikes, t, 0.02, 0.01, kind, mode="strike")
            assert np.all(table[kernels.ROW_STATUS, :-1] == 0)
            assert np.all(table[kernels.ROW_NODES, :-1] >= d.nodes)
            np.testing.assert_array_equal(table[kernels.ROW_ALPHA, :-1], d.alpha)
            np.testing.assert_array_equal(table[kernels.ROW_ANGLE, :-1], d.angle)
            np.testing.assert_allclose(table[0, :-1], prices, rtol=0, atol=1e-13 * SPOT)


# --- published limits and identities ---


@pytest.mark.parametrize("rho", [0.0, -0.6])
@pytest.mark.parametrize("kind", ["call", "put"])
def test_black_scholes_limit(rho, kind):
    # Black & Scholes (1973) / Merton (1973) Greeks (Hull, Options, Futures, and Other
    # Derivatives, "The Greek letters") at vol sqrt(theta): with vol_of_vol -> 0 and
    # v0 = theta the variance stays at theta.  Extrapolated from vol_of_vol 2e-3, 4e-3
    # and 8e-3: (8 G(s) - 6 G(2s) + G(4s)) / 3 removes the terms in s and s^2.  At 1e-3
    # the contour hands these options over (d_vol_of_vol's rounding bound, some 1e-6,
    # exceeds its tolerance: the two routes' d_vol_of_vol differ by 1e-7 at 2e-3).  The
    # variance sensitivities split dV/dW = vega / (2 vol T) by how v0 and theta move
    # W = theta T + (v0 - theta)(1 - e^{-kappa T}) / kappa (common practice, no
    # source); kappa and rho then move nothing.
    theta, kappa, strike, t, r, q = 0.05, 1.2, 95.0, 0.8, 0.03, 0.01
    runs = []
    for m in (1, 2, 4):
        p = HestonParams(theta, kappa, theta, m * 2e-3, rho)
        g = heston_greeks(p, SPOT, strike, t, r, q, kind)
        assert _on_contour(g), g.notes
        runs.append(g)

    def limit(values):
        return (8 * values[0] - 6 * values[1] + values[2]) / 3

    values = {name: limit([g[name] for g in runs]) for name in GREEK_NAMES}
    args = (SPOT, strike, t, math.sqrt(theta), r, q, kind)
    assert limit([g.price for g in runs]) == pytest.approx(bs_price(*args), rel=1e-8)
    bs = bs_greeks(*args)
    for name, value in bs.items():
        assert values[name] == pytest.approx(value, rel=1e-7), name
    d_total = bs["vega"] / (2 * math.sqrt(theta) * t)
    share = -math.expm1(-kappa * t) / kappa
    assert values["d_v0"] == pytest.approx(d_total * share, rel=1e-7)
    assert values["d_theta"] == pytest.approx(d_total * (t - share), rel=1e-7)
    assert abs(values["d_kappa"]) <= 1e-8 * SPOT
    assert abs(values["d_rho"]) <= 1e-8 * SPOT


def test_calls_and_puts_obey_put_call_parity():
    # derivatives of C - P = S e^{-qT} - K e^{-rT} (identity, common practice, no
    # source); a call and its put share the contour, so their other Greeks are the
    # same numbers
    t, r, q = 2.5, 0.04, 0.015
    strikes = np.array([40.0, 80.0, 100.0, 125.0, 250.0])
    calls = heston_greeks_strip(P, SPOT, strikes, t, r, q, "call")
    puts = heston_greeks_strip(P, SPOT, strikes, t, r, q, "put")
    for k, c, p in zip(strikes, calls, puts, strict=True):
        assert _on_contour(c) and _on_contour(p)
        spot_df, strike_df = SPOT * math.exp(-q * t), k * math.exp(-r * t)
        assert c.price - p.price == pytest.approx(spot_df - strike_df, abs=2e-10 * SPOT)
        assert c["delta"] - p["delta"] == pytest.approx(math.exp(-q * t), abs=1e-13)
        assert c["theta"] - p["theta"] == pytest.approx(q * spot_df - r * strike_df, abs=1e-11)
        assert c["rho_rate"] - p["rho_rate"] == pytest.approx(t * strike_df, abs=1e-11)
        assert c["rho_div"] - p["rho_div"] == pytest.approx(-t * spot_df, abs=1e-11)
        for name in ("gamma", "vega", "d_v0", "d_kappa", "d_theta", "d_vol_of_vol", "d_rho"):
            assert c[name] == p[name], name


def test_extreme_rho_certifies_and_agrees_with_differences_of_a_second_contour():
    # rho = -1 and +1 (COS and the check method give up at +1: test_contour.py) certify
    # on the contour.  Reference: five-point central differences, Richardson-combined
    # over steps h and h/2 (h = 5e-3 x spot, 1e-3 years, 1e-3 variance; common
    # practice, no source), of prices on a second, independent contour (the other
    # side's alpha) certified to 1e-12 x spot.  Their rounding (1e-10 x spot over the
    # step, 30/12 of it over the step squared for gamma) sets the bounds.  (At rho = -1
    # ln(S_T/S_0) <= (v0 + kappa theta T) / vol_of_vol here, so the call at 125 and its
    # Greeks are 0; at +1 the put at 80.)
    for rho in (-1.0, 1.0):
        p = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=rho)
        for k in (80.0, 100.0, 125.0):
            g = heston_greeks(p, SPOT, k, 1.0)
            assert _on_contour(g), (rho, k, g.notes)

            def price(spot=SPOT, t=1.0, v0=0.04, k=k, rho=rho):
                q = HestonParams(v0=v0, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=rho)
                side = 1 if k < SPOT else -1
                value, d = contour_prices(q, spot, k, t, mode="strike", side=side, tol=1e-12)
                assert d.certified[0]
                return value

            def first(f, h):
                def quotient(h):
                    return (-f(2 * h) + 8 * f(h) - 8 * f(-h) + f(-2 * h)) / (12 * h)

                return (16 * quotient(h / 2) - quotient(h)) / 15

            def second(f, h):
                def quotient(h):
                    return (-f(2 * h) + 16 * f(h) - 30 * f(0) + 16 * f(-h) - f(-2 * h)) / (
                        12 * h * h
                    )

                return (16 * quotient(h / 2) - quotient(h)) / 15

            def spot(x):
                return price(spot=SPOT + x)

            assert g.price == pytest.approx(price(), abs=2e-10 * SPOT)
            assert g["delta"] == pytest.approx(first(spot, 0.5), abs=1e-8)
            assert g["gamma"] == pytest.approx(second(spot, 0.5), abs=2e-8)
            theta = -first(lambda x: price(t=1.0 + x), 1e-3)
            assert g["theta"] == pytest.approx(theta, abs=1e-6)
            d_v0 = first(lambda x: price(v0=0.04 + x), 1e-3)
            assert g["d_v0"] == pytest.approx(d_v0, abs=1e-6)


# --- the route and its hand-overs ---


#: Options the contour route cannot certify (the price's hand-over cases of
#: tests/core/fourier/test_contour.py, and a deep wing), and whether COS then gives
#: their Greeks.
HAND_OVER = [
    (
        HestonParams(
            v0=0.002688759224188111,
            kappa=4.0952532907912484,
            theta=0.16911276198828967,
            vol_of_vol=0.08379200849288386,
            rho=-0.8345325184684926,
        ),
        1.0182328502388884e-07,
        100.17826352349239,
        "error estimate above tolerance",
        True,
    ),
    (
        HestonParams(
            v0=0.07568553982939691,
            kappa=9.818547043522925,
            theta=0.3200960853245601,
            vol_of_vol=0.06617069094851735,
            rho=-0.29900694084892865,
        ),
        54.75154911151406,
        1070.4194931373872,
        "rounding in the sum",
        True,
    ),
    (
        HestonParams(
            v0=0.00032797932526987446,
            kappa=2.6061826304171736,
            theta=0.14172128909899578,
            vol_of_vol=1.9848795615689732,
            rho=0.5437197991901837,
        ),
        11.762956891879174,
        785098.9068533845,
        "rounding in the sum",
        False,
    ),
    (
        HestonParams(
            v0=1.71144e-05, kappa=0.00193511, theta=2.94780e-4, vol_of_vol=3.27978, rho=-0.0718770
        ),
        1.84637,
        1728.64,
        "error estimate above tolerance",
        False,
    ),
]


@pytest.mark.parametrize(
    ("params", "maturity", "strike", "why", "cos_certifies"),
    HAND_OVER,
    ids=["1e-7y", "55y", "7850x-spot", "narrow-strip"],
)
def test_what_the_contour_cannot_certify_goes_to_cos_and_says_why(
    params, maturity, strike, why, cos_certifies
):
    g = heston_greeks(params, SPOT, strike, maturity)
    cos = heston_greeks(params, SPOT, strike, maturity, method="cos")
    assert not _on_contour(g)
    handed = [n for n in g.notes if n.startswith(HANDED)]
    assert len(handed) == 1 and why in handed[0] and "past" in handed[0]
    assert g.notes[:-1] == cos.notes and g.price == cos.price
    for name in GREEK_NAMES:  # COS's Greeks, or NaN where COS cannot certify them either
        assert g[name] == cos[name] or (math.isnan(g[name]) and math.isnan(cos[name]))
        assert math.isfinite(g[name]) == cos_certifies
    # never a plausible uncertified number from the contour
    loose = dict.fromkeys(GREEK_NAMES, 1.0)
    table = greek_table(params, SPOT, np.array([strike]), maturity, 0.0, 0.0, False, loose)
    assert table[kernels.ROW_STATUS, 0] != 0
    assert np.all(np.isnan(table[: len(kernels.OUTPUTS), 0]))


def test_a_strip_keeps_the_contour_where_it_mixes_good_and_handed_over():
    params, maturity, strike, _, _ = HAND_OVER[3]
    good, bad = heston_greeks_strip(params, SPOT, [100.0, strike], maturity)
    assert _on_contour(good) and not _on_contour(bad)
    assert not any(n.startswith(HANDED) for n in good.notes)
    assert good.values == heston_greeks(params, SPOT, 100.0, maturity).values


def test_greeks_past_a_tolerance_hand_the_option_over(monkeypatch):
    # the certification rule: tolerances no estimate meets send the option to COS,
    # whose Greeks are then NaN with their own notes; the hand-over names the Greeks
    monkeypatch.setattr(fourier_greeks, "GREEK_TOL", 1e-30)
    fourier_greeks.clear_cache()
    g = heston_greeks(P, SPOT, 100.0, 1.0)
    fourier_greeks.clear_cache()
    assert not _on_contour(g)
    (handed,) = [n for n in g.notes if n.startswith(HANDED)]
    assert all(name in handed for name in GREEK_NAMES)
    assert all(math.isnan(g[name]) for name in GREEK_NAMES)


def test_each_method_takes_its_route():
    # "auto" as heston_price chooses: the contour for at most CONTOUR_STRIKES strikes
    short = np.linspace(80.0, 120.0, 3)
    wide = np.linspace(80.0, 120.0, CONTOUR_STRIKES + 1)
    assert all(_on_contour(g) for g in heston_greeks_strip(P, SPOT, short, 1.0))
    assert not any(_on_contour(g) for g in heston_greeks_strip(P, SPOT, short, 1.0, method="cos"))
    assert not any(_on_contour(g) for g in heston_greeks_strip(P, SPOT, wide, 1.0))
    forced = heston_greeks_strip(P, SPOT, wide, 1.0, method="contour")
    assert all(_on_contour(g) for g in forced)
    g = heston_greeks(P, SPOT, 100.0, 1.0)
    assert g.notes[0].startswith("contour: ") and g.method == "fourier"
    assert set(g.values) == set(g.errors) == set(g.estimators) == set(GREEK_NAMES)


def test_plain_numbers_and_the_general_checks_give_the_same_bits():
    # the plain-number path skips the general validation only
    g = heston_greeks(P, 100.0, 105.0, 0.75, 0.02, 0.01, "put")
    h = heston_greeks(P, np.float32(100.0), [105.0][0], np.array(0.75), 0.02, 0.01, "put")
    assert g.values == h.values and g.price == h.price and g.errors == h.errors


def test_kernel_table_layout():
    # one column per strike plus the strip's ends and the evaluations; MAX_TILT as the price's
    table = greek_table(P, SPOT, np.array([90.0, 110.0]), 1.0, 0.0, 0.0, False, {
        name: 1e-8 for name in GREEK_NAMES
    })  # fmt: skip
    assert table.shape == (kernels.ROWS, 3)
    assert np.all(np.abs(table[kernels.ROW_ANGLE, :-1]) <= MAX_TILT)
    assert table[2, -1] == table[kernels.ROW_NODES, :-1].sum()
    assert table[0, -1] < 0.0 < 1.0 < table[1, -1]
