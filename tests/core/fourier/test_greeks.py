"""Heston Greeks from the characteristic function: differences of the price, Black-Scholes,
parity, certification and bad input."""

import functools
import math

import numpy as np
import pytest
from support.greek_boxes import greek_box

import rootvar.core.fourier.greeks as fourier_greeks
from rootvar.core import (
    GREEK_NAMES,
    Greeks,
    HestonParams,
    InputError,
    bs_greeks,
    bs_price,
    fourier_greek_tolerances,
    heston_greeks,
    heston_greeks_strip,
    heston_price,
    heston_price_details,
)
from rootvar.core.fourier.characteristic import heston_log_cf, log_return_cumulants

LD, CLD = np.longdouble, np.clongdouble
P = HestonParams(0.04, 1.5, 0.04, 0.5, -0.7)
_PARAMS = ("v0", "kappa", "theta", "vol_of_vol", "rho")
# Where long double is only double (some platforms) the difference quotients lose
# three digits more; the error estimates are then checked to the tolerance only.
_EXTENDED = np.finfo(np.longdouble).eps < 1e-18


class _ExtendedPut:
    """COS put in extended precision on a grid wider and longer than the Greeks' own.

    An oracle written apart from the pricer and its kernels (numpy's own
    ``longdouble`` complex functions, principal branches): the characteristic
    function in the form of Albrecher et al. (2007), the put's cosine coefficients
    of Fang & Oosterlee (2008), eqs. 22-23.  The range is six times the
    certified one's extents (the Greeks' values come from its double, or from its
    quadruple where the double does not certify them), the last frequency where
    ``|phi| (1 + u)^2`` falls below 1e-24.  The grid stays fixed while an input
    moves, so the difference quotients of it are limited by their truncation
    error and its rounding (long double: 64-bit mantissa), not by the range.
    """

    def __init__(self, p, spot, strike, t, rate, q):
        d = heston_price_details(p, spot, strike, t, rate, q, "put", "cos")
        left, right = d.half_width[float(t)]
        c1, c2 = log_return_cumulants(p, np.array([t]), rate - q)
        c1, sd = float(c1[0]), float(np.sqrt(c2[0]))
        self.a, self.b = LD(c1 - 6 * left * sd), LD(c1 + 6 * right * sd)
        u = np.geomspace(1e-2, 1e7, 2000)
        size = np.exp(heston_log_cf(u, p, t, rate - q).real) * (1 + u) ** 2
        top = u[min(np.flatnonzero(size > 1e-24).max() + 1, u.size - 1)]
        n = int(np.ceil(top * float(self.b - self.a) / np.pi)) + 2
        self.w = np.arange(n, dtype=LD) * (LD(np.pi) / (self.b - self.a))
        self.start = {
            "params": tuple(LD(getattr(p, name)) for name in _PARAMS),
            "spot": LD(spot),
            "t": LD(t),
            "rate": LD(rate),
            "q": LD(q),
        }
        self.strike = LD(strike)
        self._kept = {}

    def _log_cf(self, params, t):
        key = (params, t)
        if key not in self._kept:
            v0, kappa, theta, sig, rho = params
            w = self.w
            iu = CLD(1j) * w
            xi = kappa - rho * sig * iu
            d = np.sqrt(xi * xi + sig * sig * (w * w + iu))
            g = (xi - d) / (xi + d)
            e = np.exp(-d * t)
            core = (xi - d) * t - 2 * np.log((1 - g * e) / (1 - g))
            self._kept = {
                key: kappa * theta / (sig * sig) * core
                + v0 / (sig * sig) * (xi - d) * (1 - e) / (1 - g * e)
            }
        return self._kept[key]

    def price(self, kind, **moved):
        s = {**self.start, **moved}
        a, b, w, k = self.a, self.b, self.w, self.strike
        t, rate, q = s["t"], s["rate"], s["q"]
        lcf = self._log_cf(s["params"], t) + CLD(1j) * w * ((rate - q) * t - a)
        coef = np.exp(lcf).real
        coef[0] /= 2
        x = np.log(s["spot"] / k)
        c = min(max(-x, a), b)
        arg = w * (c - a)
        psi = np.empty(w.size, dtype=LD)
        psi[0] = c - a
        psi[1:] = np.sin(arg[1:]) / w[1:]
        chi = (np.cos(arg) * np.exp(c) - np.exp(a) + w * np.sin(arg) * np.exp(c)) / (1 + w * w)
        put = np.exp(-rate * t) * np.sum(coef * 2 / (b - a) * k * (psi - np.exp(x) * chi))
        if kind == "put":
            return put
        return put + s["spot"] * np.exp(-q * t) - k * np.exp(-rate * t)


def _first(f, h):
    return (-f(2 * h) + 8 * f(h) - 8 * f(-h) + f(-2 * h)) / (12 * h)


def _second(f, h):
    return (-f(2 * h) + 16 * f(h) - 30 * f(0 * h) + 16 * f(-h) - f(-2 * h)) / (12 * h * h)


def _settled(quotient, f, unit):
    """The difference quotient at the step where it has settled: of the steps
    ``unit x 4e-6 x 2^j`` (relative 4e-6 to 5e-4), the one that agrees best with
    both neighbours.

    Below it the long double sum's rounding (some 1e-16 x strike, its terms cancel)
    over ``h`` or ``h^2`` dominates, above it the quotient's truncation; where both
    are small neighbouring steps agree, and asking both neighbours keeps a chance
    agreement of two noisy quotients from being taken (common practice, no source).
    Found necessary on the hard box's one-day, small-v0 cases, whose gamma has no
    fixed step good to 1e-11.
    """
    values = [quotient(f, LD(unit * 4e-6 * 2.0**j)) for j in range(8)]
    spread = [
        max(abs(values[j] - values[j - 1]), abs(values[j + 1] - values[j])) for j in range(1, 7)
    ]
    return values[1 + int(np.argmin(spread))]


def _differences(p, spot, strike, t, rate, q, kind):
    """Every Greek by five-point central differences (h and 2h, Richardson: error
    O(h^4)) of the extended-precision put, in the definitions of rootvar.core.greeks."""
    oracle = _ExtendedPut(p, spot, strike, t, rate, q)
    start = oracle.start
    h_rate = LD(min(3e-3 * math.sqrt(max(min(p.v0, p.theta), 1e-3) * t), 3e-4) / t)

    def moved(name):
        return lambda h: oracle.price(kind, **{name: start[name] + h})

    # delta's and gamma's quotients share their prices (steps h and 2h overlap too)
    spot_moved = functools.lru_cache(maxsize=None)(moved("spot"))
    out = {
        "delta": _settled(_first, spot_moved, spot),
        "gamma": _settled(_second, spot_moved, spot),
        "theta": -_first(moved("t"), LD(1e-3 * t)),
        # a move h of a rate moves the log-price by h T: 3e-3 of its spread, at most 3e-4
        "rho_rate": _first(moved("rate"), h_rate),
        "rho_div": _first(moved("q"), h_rate),
    }
    for j, name in enumerate(_PARAMS):
        value = start["params"][j]

        def param(h, j=j):
            params = list(start["params"])
            params[j] += h
            return oracle.price(kind, params=tuple(params))

        # each parameter's relative step (rho's on the scale of its range): a small
        # v0 curves the price on its own scale (found at v0 1.5e-3, one week)
        scale = max(abs(value), LD(0.1)) if name == "rho" else abs(value)
        out["d_" + name] = _first(param, LD(1e-3) * scale)
    out["vega"] = (
        2 * np.sqrt(start["params"][0]) * out["d_v0"]
        + 2 * np.sqrt(start["params"][2]) * out["d_theta"]
    )
    return {name: float(value) for name, value in out.items()}, float(oracle.price(kind))


@pytest.mark.parametrize(
    "seed, count, hard",
    [(2201, 30, False), (7, 16, True)],
    ids=["box", "hard box"],
)
def test_every_greek_matches_extended_precision_differences_of_the_price(seed, count, hard):
    # Common practice, no source: five-point central differences (Richardson of steps h
    # and 2h) of the COS price in extended precision on a fixed grid wider and longer
    # than the Greeks' (_ExtendedPut: Fang & Oosterlee 2008, Albrecher et al. 2007).
    # Seeded boxes: 30 cases of ordinary models, maturities 0.05-5 years, strikes
    # within 2 sd; 16 of the hard box (v0 down to 1e-3, vol_of_vol to 2, rho to -0.99,
    # one day to 10 years, strikes to 4 sd).  Each Greek must be certified, within its
    # tolerance of the difference quotient, and the error it states must cover the
    # actual error up to the quotient's own accuracy: a hundredth of the tolerance, half
    # for gamma, whose quotient over h^2 keeps up to some 4e-11 (spot 100) of the long
    # double sum's rounding at its best step on one-week, small-v0 cases (a sweep of 300
    # hard-box cases by hand); where long double is double, the tolerance.  Both
    # routes: the default (the contour, or COS where it hands over) and COS.
    floor = {name: 1e-2 for name in GREEK_NAMES} | {"gamma": 0.5}
    if not _EXTENDED:
        floor = dict.fromkeys(GREEK_NAMES, 1.0)
    for case in greek_box(seed, count, hard):
        tol = fourier_greek_tolerances(case[1])
        ref, ref_price = _differences(*case)
        for method in ("auto", "cos"):
            g = heston_greeks(*case, method=method)
            assert g.price == pytest.approx(ref_price, abs=1e-10 * case[1]), (method, case)
            assert g.price_error <= 1e-10 * case[1] * 100, (method, case)
            for name in GREEK_NAMES:
                err = abs(g[name] - ref[name])
                assert err <= tol[name], (name, method, case, g[name], ref[name])
                assert g.errors[name] <= tol[name], (name, method, case)
                assert err <= g.errors[name] + floor[name] * tol[name], (
                    name,
                    method,
                    case,
                    err,
                    g.errors[name],
                )


def _black_scholes_limit(rho, kind, method="cos"):
    """Heston price and Greeks at vol_of_vol -> 0 with v0 = theta, extrapolated from
    vol_of_vol s, 2s and 4s: (8 G(s) - 6 G(2s) + G(4s)) / 3 removes the terms in s and
    s^2 (the first is there when rho != 0)."""
    theta, kappa, spot, strike, t, r, q = 0.05, 1.2, 100.0, 95.0, 0.8, 0.03, 0.01
    runs = [
        heston_greeks(
            HestonParams(theta, kappa, theta, m * 1e-3, rho), spot, strike, t, r, q, kind, method
        )
        for m in (1, 2, 4)
    ]

    def limit(values):
        return (8 * values[0] - 6 * values[1] + values[2]) / 3

    greeks = {name: limit([g[name] for g in runs]) for name in GREEK_NAMES}
    price = limit([g.price for g in runs])
    return greeks, price, (spot, strike, t, math.sqrt(theta), r, q, kind), kappa


@pytest.mark.parametrize("rho", [0.0, -0.6])
@pytest.mark.parametrize("kind", ["call", "put"])
@pytest.mark.parametrize("method", ["auto", "cos"])
def test_greeks_tend_to_black_scholes_as_vol_of_vol_vanishes(rho, kind, method):
    # Black & Scholes (1973) / Merton (1973) Greeks (Hull, Options, Futures, and Other
    # Derivatives, "The Greek letters") at vol sqrt(theta): with vol_of_vol -> 0 and
    # v0 = theta the variance stays at theta.  The variance sensitivities split the
    # Black-Scholes total-variance sensitivity dV/dW = vega / (2 vol T) by how v0 and
    # theta move the integrated variance W = theta T + (v0 - theta)(1 - e^{-kappa T})/kappa
    # (common practice, no source); kappa and rho then move nothing.
    values, price, bs_args, kappa = _black_scholes_limit(rho, kind, method)
    spot, _, t, vol = bs_args[:4]
    bs = bs_greeks(*bs_args)
    assert price == pytest.approx(bs_price(*bs_args), rel=1e-8)
    for name, value in bs.items():
        assert values[name] == pytest.approx(value, rel=1e-7), name
    d_total = bs["vega"] / (2 * vol * t)
    share = -math.expm1(-kappa * t) / kappa
    assert values["d_v0"] == pytest.approx(d_total * share, rel=1e-7)
    assert values["d_theta"] == pytest.approx(d_total * (t - share), rel=1e-7)
    assert abs(values["d_kappa"]) <= 1e-8 * spot
    assert abs(values["d_rho"]) <= 1e-8 * spot


@pytest.mark.parametrize("method", ["auto", "cos"])
def test_greeks_of_calls_and_puts_obey_put_call_parity(method):
    # derivatives of C - P = S e^{-qT} - K e^{-rT} (identity, common practice, no source);
    # both routes read a call and a put from the same sums (the put's, or the contour's)
    spot, t, r, q = 100.0, 0.9, 0.04, 0.015
    strikes = np.array([60.0, 85.0, 100.0, 120.0, 160.0])
    calls = heston_greeks_strip(P, spot, strikes, t, r, q, "call", method)
    puts = heston_greeks_strip(P, spot, strikes, t, r, q, "put", method)
    for k, c, p in zip(strikes, calls, puts, strict=True):
        assert c["delta"] - p["delta"] == pytest.approx(math.exp(-q * t), abs=1e-12)
        parity_theta = q * spot * math.exp(-q * t) - r * k * math.exp(-r * t)
        assert c["theta"] - p["theta"] == pytest.approx(parity_theta, abs=1e-10)
        assert c["rho_rate"] - p["rho_rate"] == pytest.approx(t * k * math.exp(-r * t), abs=1e-9)
        assert c["rho_div"] - p["rho_div"] == pytest.approx(-t * spot * math.exp(-q * t), abs=1e-9)
        for name in ("gamma", "vega", "d_v0", "d_kappa", "d_theta", "d_vol_of_vol", "d_rho"):
            assert c[name] == p[name], name
        assert c.price - p.price == pytest.approx(spot * math.exp(-q * t) - k * math.exp(-r * t))


def test_price_is_the_certified_price_and_the_result_is_the_shared_type():
    # rootvar.core.heston_price: on the COS route its COS price is the price given, and
    # its default route (certified to 1e-10 x spot by its own estimate) agrees; the
    # contour route's Greeks: tests/core/fourier/test_contour_greeks.py
    g = heston_greeks(P, 100.0, 105.0, 0.75, 0.02, 0.01, "call", method="cos")
    assert isinstance(g, Greeks) and g.method == "fourier"
    args = (P, 100.0, 105.0, 0.75, 0.02, 0.01, "call")
    assert g.price == heston_price(*args, method="cos")
    assert g.price == pytest.approx(heston_price(*args), abs=2e-10 * 100.0)
    assert set(g.values) == set(GREEK_NAMES) == set(g.errors) == set(g.estimators)
    tol = fourier_greek_tolerances(100.0)
    assert all(g.errors[name] <= tol[name] for name in GREEK_NAMES)
    assert g.price_error <= 1e-10 * 100.0


def test_tolerances_are_stated_in_each_greeks_unit():
    # the rule of fourier_greek_tolerances: 1e-8 x spot, per spot for delta, per spot^2 gamma
    tol = fourier_greek_tolerances(250.0)
    assert tol["delta"] == 1e-8
    assert tol["gamma"] == pytest.approx(1e-8 / 250.0)
    assert tol["theta"] == tol["d_v0"] == tol["rho_rate"] == pytest.approx(1e-8 * 250.0)


@pytest.mark.parametrize("method", ["auto", "cos"])
def test_a_strip_agrees_with_one_strike_at_a_time(method):
    # identity: on COS the strip shares one range (the strip's certified one), on the
    # contour each strike has its own contour; each strike's Greeks agree with its own
    # call to within the two error estimates
    strikes = np.array([70.0, 100.0, 140.0])
    strip = heston_greeks_strip(P, 100.0, strikes, 2.0, 0.01, 0.0, "put", method)
    for k, g in zip(strikes, strip, strict=True):
        alone = heston_greeks(P, 100.0, k, 2.0, 0.01, 0.0, "put", method)
        for name in GREEK_NAMES:
            assert abs(g[name] - alone[name]) <= g.errors[name] + alone.errors[name] + 1e-13, name


def test_strikes_far_beyond_the_range_have_the_limits_of_delta_and_gamma():
    # common practice, no source: far below the forward a put is worthless and flat, far
    # above it is K e^{-rT} - S e^{-qT} (delta -e^{-qT}); both with gamma 0.  Both kinks
    # lie beyond the doubled range, where the tail masses bound delta and gamma.
    t, q = 0.5, 0.02
    low = heston_greeks(P, 100.0, 1e-3, t, 0.03, q, "put", method="cos")
    high = heston_greeks(P, 100.0, 1e4, t, 0.03, q, "put", method="cos")
    assert low["delta"] == pytest.approx(0.0, abs=1e-8)
    assert high["delta"] == pytest.approx(-math.exp(-q * t), abs=1e-8)
    for g in (low, high):
        assert g["gamma"] == pytest.approx(0.0, abs=1e-12)
        assert abs(g["d_v0"]) <= 1e-6
        assert g.errors["delta"] <= 1e-10


def test_greeks_past_their_tolerance_are_nan_with_a_note_naming_them(monkeypatch):
    # the certification rule of heston_greeks: a Greek whose error estimate exceeds its
    # tolerance is NaN, never a plausible uncertified number
    monkeypatch.setattr(fourier_greeks, "GREEK_TOL", 1e-30)
    fourier_greeks.clear_cache()
    g = heston_greeks(P, 100.0, 100.0, 1.0)
    fourier_greeks.clear_cache()
    for name in GREEK_NAMES:
        assert math.isnan(g[name])
        assert math.isfinite(g.errors[name])
        assert any(note.startswith(f"{name} not certified") for note in g.notes), name
    assert math.isfinite(g.price)


def test_a_series_longer_than_allowed_leaves_its_greeks_nan(monkeypatch):
    # the term rule of heston_greeks: the price's own terms do not bound gamma's tail here
    # (the density's coefficients decay slowest); with no more terms allowed gamma is NaN
    details = heston_price_details(P, 100.0, 100.0, 1.0, method="cos")
    monkeypatch.setattr(fourier_greeks, "MAX_TERMS", details.terms[1.0])
    monkeypatch.setattr(fourier_greeks, "TAIL_SHARE", 1e-6)
    fourier_greeks.clear_cache()  # it remembers the term rule's answers
    g = heston_greeks(P, 100.0, 100.0, 1.0, method="cos")
    fourier_greeks.clear_cache()
    assert math.isnan(g["gamma"])
    assert any("gamma not certified: the series needs more terms" in n for n in g.notes)


def test_no_greek_where_the_cos_range_cannot_be_certified(monkeypatch):
    # rootvar.core.fourier.series.certified_puts answers None when no range within its
    # most terms passes (the pricer then goes to another route): no COS series to read
    # Greeks from, so none is given; the price is heston_price's
    monkeypatch.setattr(fourier_greeks, "certified_puts", lambda *args: (None, 0, (12.0, 12.0)))
    g = heston_greeks(P, 100.0, 100.0, 1.0, method="cos")
    assert all(math.isnan(g[name]) for name in GREEK_NAMES)
    assert "no Greek certified" in g.notes[0]
    assert g.price == heston_price(P, 100.0, 100.0, 1.0)


@pytest.mark.parametrize(
    "kwargs, name",
    [
        ({"params": (0.04, 1.5, 0.04, 0.5, -0.7)}, "params"),
        ({"spot": -100.0}, "spot"),
        ({"spot": "100"}, "spot"),
        ({"strike": 0.0}, "strike"),
        ({"strike": [90.0, 110.0]}, "strike"),
        ({"maturity": 0.0}, "maturity"),
        ({"maturity": np.nan}, "maturity"),
        ({"rate": True}, "rate"),
        ({"div_yield": np.inf}, "div_yield"),
        ({"kind": "straddle"}, "kind"),
        ({"method": "quad"}, "method"),
    ],
)
def test_junk_input_names_the_argument(kwargs, name):
    args = {"params": P, "spot": 100.0, "strike": 100.0, "maturity": 1.0, **kwargs}
    with pytest.raises(InputError, match=name):
        heston_greeks(**args)


def test_junk_strip_names_the_argument():
    with pytest.raises(InputError, match="strike"):
        heston_greeks_strip(P, 100.0, [[90.0, 110.0]], 1.0)
    with pytest.raises(InputError, match="strike"):
        heston_greeks_strip(P, 100.0, [90.0, -1.0], 1.0)
    with pytest.raises(InputError, match="maturity"):
        heston_greeks_strip(P, 100.0, [90.0], [1.0, 2.0])
