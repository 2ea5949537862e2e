"""The Greeks cells, called as xlwings would call them: ROOTVAR_GREEKS and ROOTVAR_GREEKS_CHECK."""

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rootvar.addin.cells import MARK
from rootvar.addin.functions import (
    GREEK_LABELS,
    GREEKS_PATHS,
    GREEKS_SCHEME,
    NOT_CERTIFIED,
    REGISTRY,
    call,
    clear_cache,
    work_cap,
)
from rootvar.core import (
    DEFAULT_GREEKS_SCHEME,
    BarrierOption,
    DigitalOption,
    EuropeanOption,
    Greeks,
    HestonParams,
    compare_greeks,
    heston_greeks,
    mc_greeks,
    pde_greeks,
)
from rootvar.core.greeks import GREEK_NAMES, GREEK_UNITS

# Corvid Shipping, the invented desk's model of the structurer's workbook (demo_desk.py)
BLOCK = [["v0", 0.09], ["kappa", 1.3], ["theta", 0.11], ["vol_of_vol", 0.95], ["rho", -0.52]]
P = HestonParams(0.09, 1.3, 0.11, 0.95, -0.52)
MARKET = (38.6, 40.0, 1.0, 0.031, 0.042, "call")  # spot, strike, maturity, rate, yield, kind
ROWS = ["price", *GREEK_NAMES]
CHECK_HEADER = ["Greek", "unit", "Monte Carlo", "std error", "reference", "reference error",
                "difference", "band half-width", "tolerance", "verdict", "paths to settle",
                "Monte Carlo estimator"]  # fmt: skip


def _cells(rows):
    return [c for row in rows for c in row]


def _no_raw_nan(rows):
    for c in _cells(rows):
        assert not (isinstance(c, float) and not math.isfinite(c)), rows
        assert not (isinstance(c, str) and c.strip().lower() == "nan"), rows


def _check_args(product, **cells):
    names = ("kind", "strike", "maturity", "barrier", "direction", "knock", "rebate", "dates",
             "start", "strike_share", "cash", "rate", "div_yield", "scheme", "steps", "paths",
             "seed", "z")  # fmt: skip
    return [BLOCK, 38.6, product, *[cells.get(n) for n in names]]


# ------------------------------------------------------------------ ROOTVAR_GREEKS


def test_greeks_spill_a_header_the_price_and_every_greek_of_the_core():
    rows = call("ROOTVAR_GREEKS", BLOCK, *MARKET)
    g = heston_greeks(P, 38.6, 40.0, 1.0, 0.031, 0.042, "call")
    assert rows[0] == ["Greek", "unit", "value", "error estimate", "estimator"]
    assert len(rows) == 1 + len(ROWS) + 1 and all(len(r) == 5 for r in rows)
    assert [r[0] for r in rows[1:-1]] == [GREEK_LABELS[n] for n in ROWS]
    # the default route is the contour; its first note says where it integrated
    assert rows[-1][0] == "notes" and rows[-1][4].startswith("contour: alpha")
    assert rows[1][4] == "certified contour integral"
    assert rows[1][1:4] == ["ccy", g.price, g.price_error]
    for name, row in zip(GREEK_NAMES, rows[2:-1], strict=True):
        assert row[1] == GREEK_UNITS[name]
        assert row[2] == g.values[name] and row[3] == g.errors[name]  # the core's, exactly
        assert row[4] == g.estimators[name]
    _no_raw_nan(rows)


def test_greeks_by_monte_carlo_and_the_pde_are_the_core_runs():
    clear_cache()
    rows = call("ROOTVAR_GREEKS", BLOCK, *MARKET, "monte carlo", None, 16, 20_000, 7)
    direct = mc_greeks(P, 38.6, EuropeanOption("call", 40.0, 1.0), 0.031, 0.042,
                       scheme=DEFAULT_GREEKS_SCHEME, steps=16, paths=20_000, seed=7)  # fmt: skip
    assert rows[0][3] == "std error"
    assert rows[1][2:4] == [direct.price, direct.price_error]
    table = {r[0]: r for r in rows}
    assert table["delta"][2:4] == [direct.values["delta"], direct.errors["delta"]]
    assert table["vega"][2] == direct.values["vega"]
    # QE has no variance tangent: those Greeks stay empty, with the core's reason
    qe = {r[0]: r for r in call("ROOTVAR_GREEKS", BLOCK, *MARKET, "monte_carlo", "qe", 16,
                                20_000, 7)}  # fmt: skip
    assert qe["vega"][2:4] == ["", ""] and "not given" in qe["vega"][4]
    assert isinstance(qe["delta"][2], float)
    pde = call("ROOTVAR_GREEKS", BLOCK, *MARKET, "pde")
    grid = pde_greeks(P, 38.6, EuropeanOption("call", 40.0, 1.0), 0.031, 0.042)
    table = {r[0]: r for r in pde}
    assert table["gamma"][2:4] == [grid.values["gamma"], grid.errors["gamma"]]
    assert table["dV/dv0"][2] == grid.values["d_v0"]
    assert table["vega"][2] == "" and "not given" in table["vega"][4]
    for rows in (qe.values(), table.values()):
        _no_raw_nan(list(rows))


def test_a_greek_the_core_cannot_certify_reads_not_certified(monkeypatch):
    # a NaN from the core never reaches a cell: our text, the reason beside it
    real = heston_greeks(P, 38.6, 40.0, 1.0, 0.031, 0.042, "call")
    values = dict(real.values, gamma=math.nan)
    why = "gamma not certified: error estimate 1.0e-06 exceeds its tolerance 2.6e-10"
    fake = Greeks(real.price, values, real.errors, "fourier", real.estimators, real.price_error,
                  (why, *real.notes))  # fmt: skip
    monkeypatch.setattr("rootvar.core.heston_greeks", lambda *args: fake)
    clear_cache()
    try:
        rows = call("ROOTVAR_GREEKS", BLOCK, *MARKET)
    finally:
        clear_cache()
    gamma = next(r for r in rows if r[0] == "gamma")
    assert gamma[2] == NOT_CERTIFIED and "exceeds its tolerance" in gamma[4]
    assert why not in rows[-1][4]  # said once, on its row
    _no_raw_nan(rows)


@pytest.mark.parametrize(
    "args, fragment",
    [
        ((None, *MARKET), "params must be a range"),
        ((BLOCK, -1.0, 40.0, 1.0), "spot must be > 0, got -1.0"),
        ((BLOCK, 38.6, [[40.0], [45.0]], 1.0), "strike must be a single cell"),
        ((BLOCK, 38.6, 40.0, 0.0), "maturity must be > 0"),
        ((BLOCK, 38.6, 40.0, 500.0), "maturity must lie in [0.001, 100]"),
        ((BLOCK, *MARKET[:5], "straddle"), "kind must be one of call, put"),
        ((BLOCK, *MARKET, "bump"), "method must be one of fourier, monte_carlo, pde"),
        ((BLOCK, *MARKET, "fourier", "qe"), "scheme only applies to method monte carlo"),
        ((BLOCK, *MARKET, "pde", None, 8, 1000), "steps, paths only apply to method monte"),
        ((BLOCK, *MARKET, "monte carlo", "milstein"), "scheme must be one of"),
        ((BLOCK, *MARKET, "monte carlo", None, 2.5), "steps must be a whole number"),
        ((BLOCK, *MARKET, "monte carlo", None, None, 1001), "paths must be even"),
        ((BLOCK, *MARKET, "monte carlo", None, None, 10), "paths must be >= 1000"),
        ((BLOCK, *MARKET, "monte carlo", None, None, None, -1), "seed must be >= 0"),
        ((BLOCK, *MARKET, "monte carlo", None, 100_000, 10_000_000), "exceeds the cap"),
        (([0.09, 1.3, 0.11, 0.95, -1.0], *MARKET, "monte carlo"), "rho must lie in (-1, 1)"),
    ],
)
def test_greeks_bad_input_is_our_text_naming_the_argument(args, fragment):
    out = call("ROOTVAR_GREEKS", *args)
    assert isinstance(out, str) and out.startswith(MARK), out
    assert fragment in out and "Error" not in out and "\n" not in out, out


# ------------------------------------------------------------------ ROOTVAR_GREEKS_CHECK


def test_greeks_check_of_a_european_is_the_core_comparison():
    clear_cache()
    rows = call("ROOTVAR_GREEKS_CHECK", *_check_args(
        "european", kind="call", strike=40.0, maturity=1.0, rate=0.031, div_yield=0.042,
        steps=16, paths=20_000))  # fmt: skip
    c = compare_greeks(P, 38.6, EuropeanOption("call", 40.0, 1.0), 0.031, 0.042, steps=16,
                       paths=20_000)  # fmt: skip
    assert rows[0] == CHECK_HEADER
    assert len(rows) == 1 + len(ROWS) + 1 and all(len(r) == len(CHECK_HEADER) for r in rows)
    assert [r[0] for r in rows[1:-1]] == [GREEK_LABELS[n] for n in ROWS]
    for name, row in zip(ROWS, rows[1:-1], strict=True):
        t = c.table.loc[name]  # every Greek is compared for a European on an Euler scheme
        assert row[2:10] == [t["monte_carlo"], t["mc_std_error"], t["reference"],
                             t["reference_error"], t["difference"], t["band"], t["tolerance"],
                             t["verdict"]]  # fmt: skip
        settle = int(t["paths_to_settle"])
        assert row[10] == ("" if settle == 0 else "no count" if settle < 0 else settle)
        assert (settle == 0) == (t["verdict"] != "undecided")
    overall = rows[-1]
    assert overall[0] == "overall" and overall[4] == "Fourier (contour)"
    assert overall[9] == c.verdict and overall[10] == "" and "mc_price(" in overall[11]
    _no_raw_nan(rows)


def test_greeks_check_of_the_down_and_out_call_against_the_pde():
    clear_cache()
    rows = call("ROOTVAR_GREEKS_CHECK", *_check_args(
        "barrier", kind="call", strike=40.0, maturity=1.0, barrier=34.0, direction="down",
        knock="out", rate=0.031, div_yield=0.042, steps=64, paths=20_000))  # fmt: skip
    product = BarrierOption("call", 40.0, 1.0, 34.0, "down", "out")
    c = compare_greeks(P, 38.6, product, 0.031, 0.042, steps=64, paths=20_000)
    table = {r[0]: r for r in rows[1:-1]}
    assert table["delta"][4] == c.table.loc["delta", "reference"]  # the grid's delta
    assert table["delta"][9] == c.table.loc["delta", "verdict"]
    # the grid has no vega: the simulated one is shown, not compared
    assert table["vega"][2] == c.monte_carlo.values["vega"] and table["vega"][4] == ""
    assert table["vega"][9] == "not compared"
    assert rows[-1][4] == "PDE (finite differences)" and rows[-1][9] == c.verdict
    assert c.reference_method == "pde"
    _no_raw_nan(rows)


def test_greeks_check_of_a_digital_and_of_a_knocked_barrier():
    clear_cache()
    digital = call("ROOTVAR_GREEKS_CHECK", *_check_args(
        "digital", strike=40.0, maturity=1.0, cash=1.0, steps=16, paths=10_000))  # fmt: skip
    c = compare_greeks(P, 38.6, DigitalOption("call", 40.0, 1.0, 1.0), steps=16, paths=10_000)
    assert digital[1][2] == c.monte_carlo.price and digital[-1][9] == c.verdict
    knocked = call("ROOTVAR_GREEKS_CHECK", *_check_args(
        "barrier", strike=40.0, maturity=1.0, barrier=40.0, direction="down",
        paths=10_000))  # fmt: skip
    assert knocked[1][2] == 0.0 and "already knocked" in knocked[-1][11]
    _no_raw_nan(digital + knocked)


def test_greeks_cells_are_cached(monkeypatch):
    import rootvar.core as core

    calls = []
    real = core.compare_greeks
    monkeypatch.setattr(core, "compare_greeks", lambda *a, **k: calls.append(1) or real(*a, **k))
    clear_cache()
    args = _check_args("european", strike=40.0, maturity=1.0, steps=8, paths=4_000)
    first = call("ROOTVAR_GREEKS_CHECK", *args)
    assert call("ROOTVAR_GREEKS_CHECK", *args) == first and len(calls) == 1
    clear_cache()


@pytest.mark.parametrize(
    "product, cells, fragment",
    [
        (None, {"strike": 40.0, "maturity": 1.0}, "product must be one of european, barrier, "
         "digital, got an empty cell"),
        ("asian", {"strike": 40.0, "maturity": 1.0}, "product must be one of european, barrier, "
         "digital, got the text 'asian'"),
        ("barrier", {"strike": 40.0, "maturity": 1.0, "barrier": 34.0, "dates": [[0.5], [1.0]]},
         "dates must be empty for Greeks"),
        ("european", {"strike": 40.0, "maturity": 1.0, "barrier": 34.0},
         "a european takes no barrier"),
        ("barrier", {"strike": 40.0, "maturity": 1.0}, "barrier must be a number"),
        ("european", {"strike": 40.0}, "maturity must be a number, got an empty cell"),
        ("european", {"strike": 40.0, "maturity": 1.0, "paths": 999}, "paths must be >= 1000"),
        ("european", {"strike": 40.0, "maturity": 1.0, "z": 0.0}, "z must be > 0"),
        ("european", {"strike": 40.0, "maturity": 1.0, "z": 50.0}, "z must lie in"),
        ("european", {"strike": 40.0, "maturity": 1.0, "scheme": "milstein"},
         "scheme must be one of"),
        ("barrier", {"strike": 40.0, "maturity": 10.0, "barrier": 34.0, "paths": 5_000_000},
         "exceeds the cap"),
    ],
)  # fmt: skip
def test_greeks_check_bad_input_is_our_text_naming_the_argument(product, cells, fragment):
    out = call("ROOTVAR_GREEKS_CHECK", *_check_args(product, **cells))
    assert isinstance(out, str) and out.startswith(MARK), out
    assert fragment in out and "Error" not in out and "Option" not in out, out


# ------------------------------------------------------------------ junk and documented defaults

_junk = st.one_of(
    st.none(),
    st.booleans(),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from(["", " ", "#N/A", "call", "put", "fourier", "pde", "monte carlo", "qe",
                     "barrier", "european", "digital", "down", "out", 0.0, -1.0, 1e300]),
    st.lists(st.lists(st.one_of(st.none(), st.floats(-2, 2), st.text(max_size=3)),
                      min_size=1, max_size=2), min_size=1, max_size=3),
)  # fmt: skip


@settings(max_examples=150, deadline=None)
@given(st.sampled_from(["ROOTVAR_GREEKS", "ROOTVAR_GREEKS_CHECK"]), st.data())
def test_junk_in_greeks_cells_gives_a_table_or_our_text(name, data):
    import inspect

    params = list(inspect.signature(REGISTRY[name].func).parameters)
    args = [BLOCK, 38.6] + [data.draw(_junk, label=p) for p in params[2:]]
    with work_cap(100_000):  # a junk call that happens to be valid stays quick
        out = REGISTRY[name].func(*args)
    if isinstance(out, str):
        assert out.startswith(MARK) and "\n" not in out, out
        assert "please report" not in out and "Error" not in out, out
    else:
        assert all(len(r) == len(out[0]) for r in out)
        _no_raw_nan(out)


def test_documented_defaults_are_the_ones_the_core_uses():
    import inspect

    from rootvar.core.montecarlo.exotic import BARRIER_STEPS_PER_YEAR, DEFAULT_STEPS_PER_YEAR

    assert GREEKS_SCHEME == DEFAULT_GREEKS_SCHEME
    assert GREEKS_PATHS == inspect.signature(compare_greeks).parameters["paths"].default
    assert GREEKS_PATHS == inspect.signature(mc_greeks).parameters["paths"].default
    for name in ("ROOTVAR_GREEKS", "ROOTVAR_GREEKS_CHECK"):
        docs = dict(REGISTRY[name].args)
        assert f"(empty: {GREEKS_SCHEME};" in docs["scheme"]
        assert f"(empty: {GREEKS_PATHS})" in docs["paths"]
        steps = f"(empty: {BARRIER_STEPS_PER_YEAR} for a barrier, else {DEFAULT_STEPS_PER_YEAR})"
        assert steps in docs["steps"]
    # the registry keeps the job modules' order: the Greeks after the exotics
    names = list(REGISTRY)
    assert names.index("ROOTVAR_GREEKS") == names.index("ROOTVAR_EXOTIC_CHECK") + 1
    assert names.index("ROOTVAR_GREEKS_CHECK") == names.index("ROOTVAR_GREEKS") + 1
