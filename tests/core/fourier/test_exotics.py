"""Fourier prices of the geometric Asian and the forward-start option, and their joint cf."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats

import rootvar.core.fourier.exotics as fourier_exotics
from rootvar.core import (
    AsianOption,
    ForwardStartOption,
    FourierConvergenceError,
    HestonParams,
    InputError,
    cir_transition,
    forward_start_price,
    geometric_asian_price,
    heston_price,
)
from rootvar.core.fourier.characteristic import heston_log_cf
from rootvar.core.fourier.joint_cf import affine_step, joint_log_mgf

FO = HestonParams(v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)
# Andersen (2008) case I: Feller broken (ratio 0.04); issue 15's trap set
ANDERSEN_I = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
MONTHLY = tuple(np.arange(1, 13) / 12.0)


# --- an independent Monte Carlo ------------------------------------------------------------


def _log_prices(params, dates, rate, div_yield, paths, seed, substeps):
    """``ln(S_t / S_0)`` at ``dates`` (columns), exact variance, Broadie-Kaya log-price.

    The variance is drawn from its exact law on a fine grid (scaled noncentral
    chi-square, numpy ``noncentral_chisquare``; Glasserman 2003, sec. 3.4); the
    log-price step is Broadie & Kaya (2006), Operations Research 54(2), eq. (11),
    given the two end variances, with the integrated variance by the trapezoid
    rule (its bias falls with the step; ``substeps`` per date gap).
    """
    p = params
    rng = np.random.default_rng(seed)
    x = np.zeros(paths)
    v = np.full(paths, p.v0)
    out = np.empty((paths, len(dates)))
    df = 4.0 * p.kappa * p.theta / p.vol_of_vol**2
    prev = 0.0
    for j, date in enumerate(dates):
        h = (date - prev) / substeps
        c = p.vol_of_vol**2 * -np.expm1(-p.kappa * h) / (4.0 * p.kappa)
        for _ in range(substeps):
            v_new = c * rng.noncentral_chisquare(df, v * np.exp(-p.kappa * h) / c)
            iv = 0.5 * h * (v + v_new)
            z = rng.standard_normal(paths)
            x += (
                (rate - div_yield) * h
                - 0.5 * iv
                + p.rho / p.vol_of_vol * (v_new - v - p.kappa * p.theta * h + p.kappa * iv)
                + np.sqrt((1.0 - p.rho**2) * iv) * z
            )
            v = v_new
        out[:, j] = x
        prev = date
    return out


def _mc(payoff_values, discount):
    values = discount * payoff_values
    return values.mean(), values.std(ddof=1) / np.sqrt(values.size)


# --- the joint characteristic function -------------------------------------------------------


def _riccati_by_ode(params, s, w, tau, drift):
    """``(A, B)`` of one affine step by integrating the Riccati ODEs (scipy solve_ivp)."""
    p = params
    beta = p.kappa - p.rho * p.vol_of_vol * s

    def rhs(_, y):
        b = y[2] + 1j * y[3]
        db = 0.5 * p.vol_of_vol**2 * b * b - beta * b + 0.5 * (s * s - s)
        da = s * drift + p.kappa * p.theta * b
        return [da.real, da.imag, db.real, db.imag]

    sol = integrate.solve_ivp(
        rhs, [0.0, tau], [0.0, 0.0, w.real, w.imag], method="DOP853", rtol=1e-11, atol=1e-12
    )
    y = sol.y[:, -1]
    return y[0] + 1j * y[1], y[2] + 1j * y[3]


def test_affine_step_matches_the_riccati_equations_integrated_numerically():
    # Reference: scipy.integrate.solve_ivp (DOP853), scipy 1.17, on the Riccati
    # equations of the affine exponent (Heston 1993); random sets, including
    # Feller-breaking ones and a nonzero variance weight, where the branch of
    # the logarithm must be followed along the interval.
    rng = np.random.default_rng(2026)
    for i in range(60):
        params = HestonParams(
            rng.uniform(0.0, 0.3),
            rng.uniform(0.1, 5.0),
            rng.uniform(0.01, 0.3),
            rng.uniform(0.05, 2.0),
            rng.uniform(-0.99, 0.99),
        )
        if i % 2:
            s = complex(rng.uniform(0.0, 1.0), rng.uniform(-40, 40))
        else:
            s = 1j * rng.uniform(-80, 80)
        w = complex(-abs(rng.normal()) * 5.0, rng.normal() * 5.0)
        tau = rng.uniform(0.01, 2.0)
        a, b = affine_step(params, s, w, tau, 0.02)
        a_ref, b_ref = _riccati_by_ode(params, s, w, tau, 0.02)
        assert abs(a - a_ref) < 1e-7 and abs(b - b_ref) < 1e-7, (params, s, w, tau)


def test_joint_cf_at_one_date_is_the_heston_cf():
    # Reference: rootvar.core.fourier.characteristic.heston_log_cf, the form of Albrecher et
    # al. (2007), written separately.
    u = np.array([0.1, 3.0, 40.0, 700.0, 9000.0])
    lcf = joint_log_mgf((1j * u)[:, None], [1.5], ANDERSEN_I, 0.02)
    np.testing.assert_allclose(lcf, heston_log_cf(u, ANDERSEN_I, 1.5, 0.02), atol=1e-12)


def test_joint_cf_of_two_dates_is_the_product_when_the_weights_telescope():
    # Weights (z, -z) on (t1, t2) with rho = 0: ln S_t2 - ln S_t1 depends on
    # the variance path after t1 only, whose law given v_t1 is the Heston cf
    # with v0 = v_t1; and E[exp(B v_t1)] is the moment generating function of
    # the scaled noncentral chi-square (Johnson, Kotz & Balakrishnan 1995, eq.
    # 29.6), here checked by quadrature against scipy.stats.ncx2, scipy 1.17.
    p = HestonParams(0.03, 1.2, 0.05, 0.4, 0.0)
    u, t1, t2 = 2.5, 0.5, 1.25
    lcf = joint_log_mgf(np.array([[-1j * u, 1j * u]]), [t1, t2], p)[0]
    tau = t2 - t1
    a2, b2 = affine_step(p, 1j * u, 0.0, tau)
    law = cir_transition(p.v0, p.kappa, p.theta, p.vol_of_vol, t1)
    re = integrate.quad(lambda v: np.exp(b2.real * v) * np.cos(b2.imag * v) * law.pdf(v), 0, 5)[0]
    im = integrate.quad(lambda v: np.exp(b2.real * v) * np.sin(b2.imag * v) * law.pdf(v), 0, 5)[0]
    assert np.exp(lcf) == pytest.approx(np.exp(a2) * (re + 1j * im), abs=1e-9)


# --- geometric Asian -------------------------------------------------------------------------


@pytest.mark.parametrize("params", [FO, ANDERSEN_I])
@pytest.mark.parametrize("kind", ["call", "put"])
def test_one_fixing_geometric_asian_is_the_european(params, kind):
    # Reference: rootvar.core.heston_price (certified COS, other code path):
    # with one fixing the geometric average is the spot at that date.
    for strike in (70.0, 100.0, 130.0):
        asian = AsianOption(kind, strike, [0.75], "geometric")
        price = geometric_asian_price(params, 100.0, asian, 0.03, 0.01)
        ref = heston_price(params, 100.0, strike, 0.75, 0.03, 0.01, kind)
        assert price == pytest.approx(ref, abs=1e-9)


def _kemna_vorst_discrete(kind, spot, strike, dates, vol, rate, div_yield):
    """Black-Scholes price of the discrete geometric average-price option.

    Kemna & Vorst (1990), J. Banking & Finance 14, 113-129: under Black-Scholes
    the geometric average is lognormal.  For fixings t_1..t_N,
    ``ln G ~ N(m, s^2)`` with ``m = ln S + (r - q - vol^2/2) mean(t_j)`` and
    ``s^2 = vol^2 / N^2 sum_ij min(t_i, t_j)``; paid at t_N:
    ``C = e^{-r t_N} (e^{m + s^2/2} N(d1) - K N(d2))``,
    ``d1 = (m - ln K + s^2) / s``, ``d2 = d1 - s``; puts by parity.
    """
    t = np.asarray(dates)
    n = t.size
    m = np.log(spot) + (rate - div_yield - 0.5 * vol**2) * t.mean()
    s = vol * np.sqrt(np.minimum.outer(t, t).sum()) / n
    d1 = (m - np.log(strike) + s * s) / s
    d2 = d1 - s
    df = np.exp(-rate * t[-1])
    call = df * (np.exp(m + 0.5 * s * s) * stats.norm.cdf(d1) - strike * stats.norm.cdf(d2))
    return call if kind == "call" else call - df * (np.exp(m + 0.5 * s * s) - strike)


@pytest.mark.parametrize("kind", ["call", "put"])
def test_vanishing_vol_of_vol_gives_the_black_scholes_geometric_asian(kind):
    # Reference: Kemna & Vorst (1990) lognormal geometric average (formula in
    # _kemna_vorst_discrete).  With v0 = theta the variance stays at theta up to
    # O(vol_of_vol) (measured: the gap is about 0.1 x vol_of_vol here); the gap
    # must shrink in proportion.
    dates = [0.1, 0.35, 0.5, 0.8, 1.0, 1.3]
    gaps = []
    for vv in (1e-3, 1e-4, 1e-5):
        p = HestonParams(0.09, 2.0, 0.09, vv, -0.6)
        for strike in (80.0, 100.0, 125.0):
            asian = AsianOption(kind, strike, dates, "geometric")
            price = geometric_asian_price(p, 100.0, asian, 0.04, 0.015)
            ref = _kemna_vorst_discrete(kind, 100.0, strike, dates, 0.3, 0.04, 0.015)
            gaps.append(abs(price - ref))
    gaps = np.array(gaps).reshape(3, 3)
    assert gaps[-1].max() < 2e-5
    assert gaps[-1].max() < 0.02 * gaps[0].max()


@pytest.mark.slow
@pytest.mark.parametrize(
    "params, strike", [(FO, 100.0), (ANDERSEN_I, 95.0)], ids=["fang-oosterlee", "andersen-I"]
)
def test_geometric_asian_agrees_with_monte_carlo_over_seeds(params, strike):
    # Reference: the exact-variance Monte Carlo above (independent of the
    # characteristic function); |mc - fourier| <= 4 se per seed and kind
    # (two-sided level about 6e-5 each), se bounded so noise cannot pass it.
    rate, div_yield = 0.02, 0.0
    call = AsianOption("call", strike, MONTHLY, "geometric")
    put = AsianOption("put", strike, MONTHLY, "geometric")
    ref_call = geometric_asian_price(params, 100.0, call, rate, div_yield)
    ref_put = geometric_asian_price(params, 100.0, put, rate, div_yield)
    for seed in (11, 12, 13):
        x = _log_prices(params, MONTHLY, rate, div_yield, 80_000, seed, 6)
        spots = 100.0 * np.exp(x)
        df = np.exp(-rate * 1.0)
        for product, ref in ((call, ref_call), (put, ref_put)):
            mc, se = _mc(product.payoff(spots), df)
            assert se < 0.035
            assert abs(mc - ref) <= 4.0 * se, (product.kind, seed, mc, ref, se)


def _gil_pelaez_call(params, spot, strike, dates, upper):
    """The geometric Asian call by Gil-Pelaez inversion cut at ``upper`` (zero rates).

    ``C = S E[e^Y] P1 - K P2`` with ``P2 = 1/2 + (1/pi) int_0^U Re[e^{-iux} phi(u) / (iu)] du``,
    ``P1`` the same with ``phi(u - i) / phi(-i)``, ``x = ln(K / S)`` (Gil-Pelaez
    1951, Biometrika 38; the form of Heston 1993, eq. 18), integrated by
    scipy.integrate.quad, scipy 1.17.
    """
    n = len(dates)

    def cf(z):
        return np.exp(joint_log_mgf(np.full((1, n), z / n), dates, params)[0])

    m1 = cf(1.0).real
    x = np.log(strike / spot)
    opts = {"limit": 4000, "epsabs": 1e-13, "epsrel": 1e-12}

    def part(shift, scale):
        def f(u):
            return (np.exp(-1j * u * x) * cf(1j * u + shift) / (1j * u * scale)).real

        return 0.5 + integrate.quad(f, 1e-14, upper, **opts)[0] / np.pi

    p1, p2 = part(1.0, m1), part(0.0, 1.0)
    return spot * m1 * p1 - strike * p2


@pytest.mark.slow
def test_feller_breaking_trap_of_issue_15_is_avoided():
    # Issue 15: v0 0.04, kappa 0.5, theta 0.04, vol_of_vol 1, rho -0.9, no
    # rates, 12 monthly fixings, strike 110.  A fixed upper limit of 100 in the
    # Fourier integral is about 25% low; the certified price must not be.
    asian = AsianOption("call", 110.0, MONTHLY, "geometric")
    price = geometric_asian_price(ANDERSEN_I, 100.0, asian)
    cut_at_100 = _gil_pelaez_call(ANDERSEN_I, 100.0, 110.0, MONTHLY, 100.0)
    far = _gil_pelaez_call(ANDERSEN_I, 100.0, 110.0, MONTHLY, 2e4)
    # the trap is real: the cut integral is 20-30% below (issue 15 says about 25%)
    assert 0.20 < 1.0 - cut_at_100 / price < 0.30
    # an independent inversion (adaptive quadrature, limit 2e4) agrees
    assert price == pytest.approx(far, abs=1e-8)
    # and so does the Monte Carlo: |mc - price| <= 4 se with se bounded below the trap's gap
    x = _log_prices(ANDERSEN_I, MONTHLY, 0.0, 0.0, 200_000, 7, 8)
    mc, se = _mc(asian.payoff(100.0 * np.exp(x)), 1.0)
    assert se < 0.1 * (price - cut_at_100)
    assert abs(mc - price) <= 4.0 * se


# --- forward start ---------------------------------------------------------------------------


@pytest.mark.parametrize("params", [FO, ANDERSEN_I])
@pytest.mark.parametrize("kind", ["call", "put"])
def test_forward_start_at_time_zero_is_the_european(params, kind):
    # Reference: rootvar.core.heston_price with strike = share x spot.
    for share in (0.8, 1.0, 1.25):
        for start in (0.0, 1e-9):
            fwd = ForwardStartOption(kind, start, 1.5, share)
            price = forward_start_price(params, 80.0, fwd, 0.03, 0.01)
            ref = heston_price(params, 80.0, share * 80.0, 1.5, 0.03, 0.01, kind)
            assert price == pytest.approx(ref, abs=1e-7)


def test_forward_start_is_the_european_price_mixed_over_the_start_variance():
    # Reference: Kruse & Nögel (2005), Math. Meth. Oper. Res. 62: the price is
    # S0 e^{-q t0} E*[c(v_t0)], c the European on a unit spot (here
    # rootvar.core.heston_price, COS) and E* under the share measure, where
    # the variance is CIR with speed kappa - rho vol_of_vol and the same
    # kappa theta (Girsanov, common practice); that law from
    # rootvar.core.cir_transition (scipy.stats.ncx2, scipy 1.17), the
    # expectation by scipy.integrate.quad over its quantiles.
    p = FO
    t0, big_t, share, rate, div_yield = 0.5, 1.5, 1.05, 0.03, 0.01
    kappa_s = p.kappa - p.rho * p.vol_of_vol
    law = cir_transition(p.v0, kappa_s, p.kappa * p.theta / kappa_s, p.vol_of_vol, t0)

    def european(q):
        v = float(law.ppf(q))
        pv = HestonParams(v, p.kappa, p.theta, p.vol_of_vol, p.rho)
        return heston_price(pv, 1.0, share, big_t - t0, rate, div_yield)

    mixed = integrate.quad(european, 0.0, 1.0, epsabs=1e-10, limit=200)[0]
    ref = 100.0 * np.exp(-div_yield * t0) * mixed
    fwd = ForwardStartOption("call", t0, big_t, share)
    assert forward_start_price(p, 100.0, fwd, rate, div_yield) == pytest.approx(ref, abs=1e-7)


@pytest.mark.slow
@pytest.mark.parametrize("params", [FO, ANDERSEN_I], ids=["fang-oosterlee", "andersen-I"])
def test_forward_start_agrees_with_monte_carlo(params):
    # Reference: the exact-variance Monte Carlo above; |mc - fourier| <= 4 se
    # per seed and kind, se bounded.
    t0, big_t, rate, div_yield = 0.5, 1.5, 0.03, 0.01
    df = np.exp(-rate * big_t)
    for seed in (21, 22):
        x = _log_prices(params, [t0, big_t], rate, div_yield, 60_000, seed, 24)
        s0, s_t = 100.0 * np.exp(x[:, 0]), 100.0 * np.exp(x[:, 1])
        for kind, share in (("call", 1.0), ("put", 0.9)):
            fwd = ForwardStartOption(kind, t0, big_t, share)
            ref = forward_start_price(params, 100.0, fwd, rate, div_yield)
            mc, se = _mc(fwd.payoff(s0, s_t), df)
            assert se < 0.05
            assert abs(mc - ref) <= 4.0 * se, (kind, seed, mc, ref, se)


def test_forward_start_put_call_parity_and_homogeneity():
    # Parity (common practice, no source): the call minus the put pays
    # S_T - k S_t0, worth S e^{-qT} - k S e^{-q t0} e^{-r (T - t0)} today.
    # Homogeneity in spot (common practice, no source): the payoff scales with S.
    t0, big_t, k, rate, div_yield = 0.25, 1.0, 1.1, 0.05, 0.02
    call_fwd = ForwardStartOption("call", t0, big_t, k)
    call = forward_start_price(ANDERSEN_I, 100.0, call_fwd, rate, div_yield)
    put_fwd = ForwardStartOption("put", t0, big_t, k)
    put = forward_start_price(ANDERSEN_I, 100.0, put_fwd, rate, div_yield)
    strike_pv = k * 100.0 * np.exp(-div_yield * t0 - rate * (big_t - t0))
    gap = 100.0 * np.exp(-div_yield * big_t) - strike_pv
    assert call - put == pytest.approx(gap, abs=1e-9)
    for spot in (0.01, 7.0, 2500.0):
        scaled = forward_start_price(ANDERSEN_I, spot, call_fwd, rate, div_yield)
        assert scaled == pytest.approx(call * spot / 100.0, rel=1e-9, abs=1e-12 * spot)


# --- bad input and uncertified cases ---------------------------------------------------------


def test_bad_input_is_named():
    asian = AsianOption("call", 100.0, MONTHLY, "geometric")
    fwd = ForwardStartOption("call", 0.5, 1.0)
    with pytest.raises(InputError, match=r"spot must be > 0, got -1\.0"):
        geometric_asian_price(FO, -1.0, asian)
    with pytest.raises(InputError, match="rate must be finite"):
        forward_start_price(FO, 100.0, fwd, rate=np.nan)
    with pytest.raises(InputError, match="params must be a HestonParams, got dict"):
        geometric_asian_price({"v0": 0.04}, 100.0, asian)
    with pytest.raises(InputError, match="product must be an AsianOption, got ForwardStartOption"):
        geometric_asian_price(FO, 100.0, fwd)
    with pytest.raises(InputError, match="product must be a ForwardStartOption, got AsianOption"):
        forward_start_price(FO, 100.0, asian)
    with pytest.raises(InputError, match=r"product\.average must be 'geometric'"):
        geometric_asian_price(FO, 100.0, AsianOption("call", 100.0, MONTHLY, "arithmetic"))


def test_uncertifiable_series_raises_instead_of_returning_a_number():
    # A forward start over 1e-13 years: the law of the return is so narrow
    # that its cf has not decayed by frequency 1e7, past the grid the decay
    # check looks at.
    fwd = ForwardStartOption("call", 0.5, 0.5 + 1e-13, 1.0)
    with pytest.raises(FourierConvergenceError, match="cannot be certified"):
        forward_start_price(FO, 100.0, fwd)


@pytest.mark.slow
def test_spiky_forward_start_falls_back_to_quadrature_and_stays_right():
    # A short forward start after a long start on a strongly Feller-breaking
    # set (ratio 0.003): the variance at the start is below 1e-6 with
    # probability 0.65, the law of the return has a sharp spike, and the COS
    # series would need more than 2^19 terms.  The price then comes from
    # Lewis's integral by adaptive quadrature; reference as in
    # test_forward_start_is_the_european_price_mixed_over_the_start_variance
    # (Kruse & Nögel 2005 representation; scipy.integrate.quad over the
    # quantiles of scipy.stats.ncx2, scipy 1.17; rootvar.core.heston_price).
    p = HestonParams(0.2472, 0.06308, 0.02628, 1.0834, -0.0452)
    t0, big_t, share = 1.0, 1.02, 1.0
    cf = fourier_exotics.forward_start_log_cf(p, t0, big_t, 0.0)
    with pytest.raises(FourierConvergenceError, match="within 524288 terms"):
        fourier_exotics.cos_put(cf, -np.log(share), share, 1.0, "forward-start")
    kappa_s = p.kappa - p.rho * p.vol_of_vol
    law = cir_transition(p.v0, kappa_s, p.kappa * p.theta / kappa_s, p.vol_of_vol, t0)
    assert law.cdf(1e-6) > 0.6

    def european(q):
        pv = HestonParams(float(law.ppf(q)), p.kappa, p.theta, p.vol_of_vol, p.rho)
        return heston_price(pv, 1.0, share, big_t - t0)

    ref = 100.0 * integrate.quad(european, 0.0, 1.0, epsabs=1e-9, limit=200)[0]
    price = forward_start_price(p, 100.0, ForwardStartOption("call", t0, big_t, share))
    assert price == pytest.approx(ref, abs=1e-7)


@settings(max_examples=15, deadline=None)
@given(
    v0=st.floats(0.005, 0.3),
    kappa=st.floats(0.2, 4.0),
    theta=st.floats(0.01, 0.2),
    vol_of_vol=st.floats(0.1, 1.5),
    rho=st.floats(-0.95, 0.5),
    fixings=st.integers(1, 12),
)
def test_geometric_asian_call_is_bounded_decreasing_and_convex_in_strike(
    v0, kappa, theta, vol_of_vol, rho, fixings
):
    # No-arbitrage in strike (common practice, no source): 0 <= C <= DF E[G],
    # C decreasing and convex in K; with zero rates E[G] <= S (Jensen).
    p = HestonParams(v0, kappa, theta, vol_of_vol, rho)
    dates = np.arange(1, fixings + 1) / 12.0
    strikes = (85.0, 100.0, 115.0)
    calls = [
        geometric_asian_price(p, 100.0, AsianOption("call", k, dates, "geometric")) for k in strikes
    ]
    assert all(0.0 <= c <= 100.0 + 1e-9 for c in calls)
    assert calls[0] >= calls[1] - 1e-9 >= calls[2] - 2e-9
    assert calls[0] - 2.0 * calls[1] + calls[2] >= -1e-8
