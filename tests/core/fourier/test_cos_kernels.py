"""Compiled characteristic function against a plain numpy form; the COS series cache."""

import numpy as np
import pytest
from oracles.fourier_reference import (
    reference_cf_values,
    reference_cos_coefficients,
    reference_cos_puts,
    reference_fourier_sums,
)

import rootvar.core.fourier.series as series
from rootvar.core import HestonParams, heston_price, heston_price_details
from rootvar.core.fourier.characteristic import heston_log_cf
from rootvar.core.fourier.cos_kernels import cos_coefficients, cos_puts

FO = HestonParams(v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)
ANDERSEN_I = HestonParams(v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)


def _plain_log_cf(u, p, t, drift):
    """Albrecher, Mayer, Schoutens & Tistaert (2007), 'The little Heston trap',
    with numpy's own complex sqrt and log (principal branches)."""
    sig2 = p.vol_of_vol**2
    xi = p.kappa - p.rho * p.vol_of_vol * 1j * u
    d = np.sqrt(xi * xi + sig2 * (u * u + 1j * u))
    g = (xi - d) / (xi + d)
    e = np.exp(-d * t)
    c = p.kappa * p.theta / sig2 * ((xi - d) * t - 2.0 * np.log((1.0 - g * e) / (1.0 - g)))
    return 1j * u * drift * t + c + p.v0 * (xi - d) / sig2 * (1.0 - e) / (1.0 - g * e)


@pytest.mark.parametrize("p", [FO, ANDERSEN_I, HestonParams(0.09, 1.2, 0.04, 2.0, 0.9)])
def test_compiled_characteristic_function_matches_the_plain_form(p):
    # Different elementary functions (real-form sqrt and log), so agreement to
    # rounding, relative to |log cf| + 1, over frequencies that matter for COS.
    u = np.concatenate([[0.0, 1e-3], np.geomspace(1e-2, 300.0, 400)])[:, None]
    t = np.array([1 / 365, 0.25, 1.0, 10.0])[None, :]
    got = heston_log_cf(u, p, t, 0.02)
    want = _plain_log_cf(u + 0j, p, t, 0.02)
    assert got.shape == (u.size, t.size)
    assert np.max(np.abs(got - want) / (1.0 + np.abs(want))) < 1e-12


@pytest.mark.parametrize("t", [1 / 365, 1.0, 10.0])
def test_compiled_cf_values_match_the_numpy_reference(t):
    omega = np.arange(6000) * 0.05
    got = series.cf_values(omega, ANDERSEN_I, t, 0.01)
    want = reference_cf_values(omega, ANDERSEN_I, t, 0.01)
    assert np.max(np.abs(got - want)) < 1e-13  # |cf| <= 1


def test_compiled_fourier_sums_match_the_matrix_product_form():
    # Same split and running products; the products are added in another
    # order than the matrix routine's, so agreement to rounding.
    rng = np.random.default_rng(8)
    coef = rng.normal(size=(7000, 2)) / np.arange(1, 7001)[:, None] + 0j
    angle = rng.uniform(0, np.pi, 9)
    got = series.fourier_sums(angle, coef)
    assert np.max(np.abs(got - reference_fourier_sums(angle, coef))) < 1e-13


def test_fourier_sums_have_the_same_bits_however_the_angles_are_grouped():
    # Four angles share one pass over the coefficients and one or two use a
    # single lane; every angle's operations are its own either way.
    rng = np.random.default_rng(9)
    coef = (rng.normal(size=(3000, 2)) + 1j * rng.normal(size=(3000, 2))) / 50.0
    angle = rng.uniform(0, np.pi, 11)
    whole = series.fourier_sums(angle, coef)
    pieces = [series.fourier_sums(angle[i:j], coef) for i, j in [(0, 1), (1, 3), (3, 6), (6, 11)]]
    np.testing.assert_array_equal(np.concatenate(pieces), whole)


@pytest.mark.parametrize("step", [1, 2])
def test_compiled_series_coefficients_match_the_numpy_form(step):
    # The kernel's phases are running products of a near and a far wave; the
    # numpy form takes every phase by its own exponential, so agreement to
    # rounding (the argument omega_k a reaches ~300 here, ~1e-14 relative).
    a, b = -2.7, 1.9
    omega = np.arange(6000) * (np.pi / (b - a)) / step
    cf = reference_cf_values(omega, ANDERSEN_I, 1.0, 0.01)
    got_omega, coef, pay_re, pay_im, edge = cos_coefficients(cf, step, a, b)
    want_omega, want_coef, want_pay, want_edge = reference_cos_coefficients(cf, step, a, b)
    n = want_coef.size
    np.testing.assert_array_equal(got_omega, want_omega)
    assert np.max(np.abs(coef - want_coef)) < 1e-13
    pay = (pay_re[: 2 * n] + 1j * pay_im[: 2 * n]).reshape(n, 2)
    assert np.max(np.abs(pay - want_pay)) < 1e-13
    assert not pay_re[2 * n :].any() and not pay_im[2 * n :].any()  # zero padding
    assert edge == pytest.approx(want_edge, abs=1e-12)


def test_compiled_puts_match_the_numpy_form_and_do_not_depend_on_the_strip():
    a, b = -2.7, 1.9
    omega = np.arange(4000) * (np.pi / (b - a))
    cf = reference_cf_values(omega, FO, 1.0, 0.01)
    _, coef, pay_re, pay_im, edge = cos_coefficients(cf, 1, a, b)
    strikes = np.linspace(20.0, 400.0, 41)  # kinks inside and past both ends of the range
    x = np.log(100.0 / strikes)
    got = cos_puts(a, b, coef[0], pay_re, pay_im, coef.size, edge, x, strikes)
    pay = (pay_re[: 2 * coef.size] + 1j * pay_im[: 2 * coef.size]).reshape(-1, 2)
    want = reference_cos_puts(a, b, coef[0], pay, edge, x, strikes)
    assert np.max(np.abs(got - want)) < 1e-11  # |put| <= 400
    # a strike priced alone or inside any strip: the same bits
    alone = [
        cos_puts(a, b, coef[0], pay_re, pay_im, coef.size, edge, x[i : i + 1], strikes[i : i + 1])[
            0
        ]
        for i in range(0, 41, 5)
    ]
    np.testing.assert_array_equal(alone, got[::5])


def test_complex_arguments_are_accepted():
    # cf(-i) = E[S_T / S_0] = exp(drift T): the martingale identity (common practice, no source).
    value = heston_log_cf(-1j, FO, 2.0, 0.03)
    assert value == pytest.approx(0.06, abs=1e-12)


def test_cached_series_give_the_same_prices_as_a_cold_call():
    series.SERIES.clear()
    first = heston_price(ANDERSEN_I, 100, [80.0, 100.0], 10.0, 0.02, 0.01, method="cos")
    # same model, maturity
    warm = heston_price(ANDERSEN_I, 100, [95.0, 120.0], 10.0, 0.02, 0.01, method="cos")
    series.SERIES.clear()
    cold = heston_price(ANDERSEN_I, 100, [95.0, 120.0], 10.0, 0.02, 0.01, method="cos")
    np.testing.assert_array_equal(warm, cold)
    again = heston_price(ANDERSEN_I, 100, [80.0, 100.0], 10.0, 0.02, 0.01, method="cos")
    np.testing.assert_array_equal(first, again)


def test_a_further_strike_at_a_cached_maturity_evaluates_no_characteristic_function(monkeypatch):
    series.SERIES.clear()
    heston_price(ANDERSEN_I, 100, 100.0, 1.0, method="cos")
    calls = []
    real = series.cf_values
    monkeypatch.setattr(series, "cf_values", lambda *a: calls.append(a) or real(*a))
    heston_price(ANDERSEN_I, 100, 101.0, 1.0, method="cos")
    assert calls == []
    heston_price(ANDERSEN_I, 100, 101.0, 1.5, method="cos")  # a new maturity does
    assert calls


def test_remembered_maturity_facts_change_no_price_and_stay_bounded():
    maturities = np.array([[0.5], [2.0]])
    series.law_facts_kept.cache_clear()
    series.SERIES.clear()
    cold = heston_price(ANDERSEN_I, 100, [90.0, 110.0], maturities, 0.02, method="cos")
    series.SERIES.clear()  # the series rebuilt, the facts of the maturities remembered
    warm = heston_price(ANDERSEN_I, 100, [90.0, 110.0], maturities, 0.02, method="cos")
    np.testing.assert_array_equal(warm, cold)
    kept = series.law_facts_kept.cache_info().currsize
    many = np.linspace(0.1, 5.0, series.LAW_FACTS_MATURITIES + 1)  # too many to keep
    heston_price(FO, 100, 100.0, many, method="cos")
    assert series.law_facts_kept.cache_info().currsize == kept


def test_a_full_cache_evicts_instead_of_growing(monkeypatch):
    maturities = np.linspace(0.5, 5.0, 12)[:, None]
    strikes = np.array([70.0, 100.0, 140.0])
    unbounded = series.SeriesCache(max_bytes=1 << 40)
    monkeypatch.setattr(series, "SERIES", unbounded)
    heston_price_details(ANDERSEN_I, 100, strikes, maturities, method="cos")
    assert unbounded.nbytes > 4_000_000  # so a 2 MB cache must evict
    small = series.SeriesCache(max_bytes=2_000_000)
    monkeypatch.setattr(series, "SERIES", small)
    details = heston_price_details(ANDERSEN_I, 100, strikes, maturities, method="cos")
    assert 0 < small.nbytes <= 2_000_000
    stored = len(small)
    heston_price_details(ANDERSEN_I, 100, strikes, maturities + 0.01, method="cos")
    assert small.nbytes <= 2_000_000 and len(small) <= stored + 20
    # what was evicted is rebuilt to the same prices
    again = heston_price_details(ANDERSEN_I, 100, strikes, maturities, method="cos")
    np.testing.assert_array_equal(details.price, again.price)
    assert again.terms == details.terms


def test_cache_entries_larger_than_the_cache_are_not_kept():
    cache = series.SeriesCache(max_bytes=10)
    value = cache.get("key", series.series_on_range, FO, 1.0, 0.0, -1.0, 1.0, 64)
    assert len(cache) == 0 and cache.nbytes == 0
    np.testing.assert_array_equal(
        value.coef, series.series_on_range(FO, 1.0, 0.0, -1.0, 1.0, 64).coef
    )


def test_prices_are_bit_identical_for_one_and_two_threads(monkeypatch):
    # Frequencies and strikes are sliced over threads when the work is large;
    # every value is computed alone, so the split must not change a bit.
    # The thresholds are lowered so that every slice of work here is split.
    from rootvar.core.runtime import numba

    monkeypatch.setattr(series, "SPLIT_WORK", 1)
    monkeypatch.setattr(series, "CF_SPLIT_WORK", 1)

    strikes = np.linspace(40.0, 250.0, 60)
    maturities = np.array([0.1, 1.0, 10.0])[:, None]
    threads = numba.get_num_threads()
    try:
        numba.set_num_threads(1)
        series.SERIES.clear()
        one = heston_price_details(ANDERSEN_I, 100, strikes, maturities, 0.02, 0.01, method="cos")
        numba.set_num_threads(min(2, numba.config.NUMBA_NUM_THREADS))
        series.SERIES.clear()
        two = heston_price_details(ANDERSEN_I, 100, strikes, maturities, 0.02, 0.01, method="cos")
    finally:
        numba.set_num_threads(threads)
    np.testing.assert_array_equal(one.price, two.price)
    assert one.terms == two.terms
