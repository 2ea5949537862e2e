"""Spreadsheet functions called as xlwings would call them."""

import inspect
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from support.paths import REPO

from rootvar.addin.cells import MARK
from rootvar.addin.functions import REGISTRY, call, clear_cache
from rootvar.core import (
    HestonParams,
    cir_transition,
    euler_max_step,
    euler_negative_probability,
    heston_price,
    implied_vol,
    mc_price,
)

BLOCK = [["v0", 0.04], ["kappa", 0.5], ["theta", 0.04], ["vol_of_vol", 1.0], ["rho", -0.9]]
P = HestonParams(0.04, 0.5, 0.04, 1.0, -0.9)


def test_registry_names_are_ours_and_documented():
    assert len(REGISTRY) >= 12
    for name, entry in REGISTRY.items():
        assert name.startswith("ROOTVAR_")
        assert entry.summary and entry.result
        assert entry.func.__doc__


def test_values_equal_the_core():
    assert call("ROOTVAR_FELLER", BLOCK) == pytest.approx(P.feller_ratio, rel=1e-15)
    assert call("ROOTVAR_EULER_NEG_PROB", BLOCK, 1 / 52) == euler_negative_probability(
        0.04, 0.5, 0.04, 1.0, 1 / 52
    )
    assert call("ROOTVAR_EULER_NEG_PROB", BLOCK, 1 / 52, 0.01) == euler_negative_probability(
        0.01, 0.5, 0.04, 1.0, 1 / 52
    )
    assert call("ROOTVAR_EULER_SAFE_STEP", BLOCK, 1e-3) == euler_max_step(
        0.04, 0.5, 0.04, 1.0, 1e-3
    )
    assert euler_max_step(0.04, 5.0, 0.09, 0.3, 1e-3) == math.inf
    assert call("ROOTVAR_EULER_SAFE_STEP", [[0.04, 5.0, 0.09, 0.3, 0.0]], 1e-3) == "unbounded"
    law = cir_transition(0.04, 0.5, 0.04, 1.0, 2.0)
    assert call("ROOTVAR_VARIANCE_QUANTILE", BLOCK, 2.0, 0.9) == pytest.approx(
        law.ppf(0.9), rel=1e-12
    )
    assert call("ROOTVAR_VARIANCE_CDF", BLOCK, 2.0, 0.01) == pytest.approx(law.cdf(0.01), rel=1e-12)
    strikes = [[60.0], [100.0], [140.0]]
    column = call("ROOTVAR_FOURIER_PRICE", BLOCK, 100.0, strikes, 10.0)
    np.testing.assert_allclose(np.ravel(column), heston_price(P, 100, [60, 100, 140], 10.0))
    assert call(
        "ROOTVAR_FOURIER_PRICE", BLOCK, 100.0, 100.0, 10.0, None, None, "put"
    ) == pytest.approx(heston_price(P, 100, 100, 10.0, kind="put"))
    price = heston_price(P, 100, 100, 1.0)
    assert call("ROOTVAR_IMPLIED_VOL", price, 100, 100, 1.0) == pytest.approx(
        implied_vol(price, 100, 100, 1.0)
    )
    assert call("ROOTVAR_VERSION").startswith("rootvar ")


def test_variance_table_spills_a_header_and_one_row_per_horizon():
    rows = call("ROOTVAR_VARIANCE_TABLE", BLOCK, [[0.5], [1.0], [2.0]], [[0.01], [0.5]])
    assert rows[0][0] == "horizon (years)" and len(rows) == 4
    assert all(len(r) == len(rows[0]) for r in rows)
    assert rows[3][0] == 2.0


def test_monte_carlo_functions_match_the_core_and_are_cached():
    clear_cache()
    out = call(
        "ROOTVAR_MC_PRICE", BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 8.0, 4096.0, 7.0
    )
    direct = mc_price(P, 100, 100.0, 1.0, scheme="qe", steps=8, paths=4096, seed=7)
    labels = [r[0] for r in out]
    assert labels[:4] == ["price", "std error", "95% low", "95% high"]
    assert out[0][1] == direct.price and out[1][1] == direct.std_error
    again = call(
        "ROOTVAR_MC_PRICE", BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 8.0, 4096.0, 7.0
    )
    assert again[-1][1] == out[-1][1]  # same elapsed time: served from the cache
    check = call(
        "ROOTVAR_MC_CHECK", BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 8.0, 4096.0, 7.0
    )
    assert dict(check)["verdict"] in ("consistent", "biased", "undecided")
    assert dict(check)["Fourier price"] == pytest.approx(heston_price(P, 100, 100.0, 1.0))


def test_clear_cache_clears_every_cache_of_every_job_module(monkeypatch):
    # The caches live in several modules of the package; one made with functools.lru_cache
    # instead of registry.cell_cache would survive clear_cache and serve stale results.
    import importlib
    import pkgutil

    import rootvar.addin.functions as package

    found, cleared = [], []
    for info in pkgutil.iter_modules(package.__path__):
        module = importlib.import_module(f"{package.__name__}.{info.name}")
        for name, obj in vars(module).items():
            if callable(getattr(obj, "cache_clear", None)) and obj.__module__ == module.__name__:
                where = f"{info.name}.{name}"
                found.append(where)
                monkeypatch.setattr(obj, "cache_clear", lambda w=where: cleared.append(w))
    clear_cache()
    assert len(found) >= 7 and sorted(cleared) == sorted(found)


def test_step_study_spills_table_and_recommendation():
    rows = call(
        "ROOTVAR_STEP_STUDY", BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", [[2.0, 8.0]], 4096.0
    )
    assert rows[0][0] == "scheme" and rows[1][0] == "qe" and rows[-1][0] == "recommendation"
    assert len(rows) == 4


@pytest.mark.parametrize(
    "name, args, fragment",
    [
        ("ROOTVAR_FELLER", (None,), "params must be a range"),
        ("ROOTVAR_EULER_NEG_PROB", (BLOCK, "daily"), "dt must be a number, got the text 'daily'"),
        ("ROOTVAR_EULER_SAFE_STEP", (BLOCK, 1.5), "tolerance must lie in (0, 1), got 1.5"),
        ("ROOTVAR_VARIANCE_QUANTILE", (BLOCK, 1.0, 0.0), "probability must lie in (0, 1)"),
        ("ROOTVAR_FOURIER_PRICE", (BLOCK, 100.0, -5.0, 1.0), "strike must be > 0, got -5.0"),
        ("ROOTVAR_IMPLIED_VOL", (1.0, 100.0, 80.0, 1.0), "no-arbitrage bounds"),
        (
            "ROOTVAR_MC_PRICE",
            (BLOCK, 100.0, 100.0, 1.0, None, None, None, "milstein"),
            "scheme must be one of",
        ),
        (
            "ROOTVAR_MC_PRICE",
            (BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 2.5),
            "steps must be a whole number",
        ),
        (
            "ROOTVAR_MC_PRICE",
            (BLOCK, 100.0, 100.0, 1.0, None, None, None, "qe", 1000.0, 1e6),
            "exceeds",
        ),
        ("ROOTVAR_MC_CHECK", (BLOCK, 100.0, [[90.0, 100.0]], 1.0), "strike must be a single cell"),
    ],
)
def test_bad_input_comes_back_as_marked_text(name, args, fragment):
    out = call(name, *args)
    assert isinstance(out, str) and out.startswith(MARK)
    assert fragment in out


junk = st.one_of(
    st.none(),
    st.booleans(),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=6),
    st.sampled_from(["#N/A", "#DIV/0!", "call", "qe", "", " "]),
    st.lists(
        st.lists(
            st.one_of(st.none(), st.floats(-2, 2), st.text(max_size=3)), min_size=1, max_size=3
        ),
        min_size=1,
        max_size=6,
    ),
)


@settings(max_examples=300, deadline=None)
@given(st.sampled_from(sorted(REGISTRY)), st.lists(junk, max_size=6))
def test_junk_never_raises(name, args):
    # paths and steps stay small so a junk call that happens to be valid is quick
    entry = REGISTRY[name]
    n = len([p for p in __import__("inspect").signature(entry.func).parameters])
    args = args[:n]
    if name in ("ROOTVAR_MC_PRICE", "ROOTVAR_MC_CHECK", "ROOTVAR_STEP_STUDY") and len(args) > 8:
        args = [*args[:8], 2.0, 64.0]
    out = entry.func(*args)
    assert out is not None
    if isinstance(out, str) and out.startswith(MARK):
        assert "\n" not in out


def test_pde_price_spills_price_error_status_and_greeks():
    # identical to the core call (same grid, deterministic)
    from rootvar.core import BarrierOption, pde_price

    rows = call("ROOTVAR_PDE_PRICE", BLOCK, 100.0, 100.0, 1.0, "call", 90.0, None, None, None, None)
    table = dict(rows)
    direct = pde_price(P, 100.0, BarrierOption("call", 100.0, 1.0, 90.0, "down", "out"))
    assert table["price"] == direct.price
    assert table["error estimate"] == direct.error_estimate
    assert table["status"] in ("converged", "not converged") and table["status"] == direct.status
    assert [r[0] for r in rows][4:7] == ["delta", "gamma", "variance sensitivity"]
    european = dict(call("ROOTVAR_PDE_PRICE", BLOCK, 100.0, 100.0, 1.0, "put"))
    # certified Fourier price as the reference (rootvar.core.heston_price)
    assert abs(european["price"] - heston_price(P, 100, 100, 1.0, kind="put")) <= 0.1


@pytest.mark.parametrize(
    "args, fragment",
    [
        ((BLOCK, 100.0, 100.0, 1.0, None, None, "up"), "barrier is empty, so leave direction"),
        ((BLOCK, 100.0, 100.0, 1.0, None, 90.0, "sideways"), "direction must be one of"),
        ((BLOCK, 100.0, 100.0, 1.0, None, 90.0, None, None, None, [[0.5, 2.0]]), "monitoring"),
        ((BLOCK, 100.0, 100.0, 1.0, *[None] * 8, [[16.0, 16.0, 16.0]]), "grid spot steps"),
        ((BLOCK, 100.0, 100.0, 1.0, *[None] * 8, [[64.0, 32.0]]), "grid must be three cells"),
        ((BLOCK, 100.0, 100.0, 1.0, *[None] * 8, [[2000.0, 1000.0, 100.0]]), "exceeds"),
    ],
)
def test_pde_price_bad_input_is_marked_text(args, fragment):
    out = call("ROOTVAR_PDE_PRICE", *args)
    assert isinstance(out, str) and out.startswith(MARK) and "InputError" not in out
    assert fragment in out


# ------------------------------------------------------------------ junk fuzz and cell rules

_EXTREMES = [0.0, -1.0, 1e-12, 1e-300, 5e-324, 1e300, 1e308, math.inf, -math.inf, math.nan]
_EXTREMES += [1e12, 1e15, 2.5, 1.0, 0.5, 100.0, 3.0, 7.0, 32.0, 2.0, 0.999999, 1e-6, 40.0]
_PYTHON_NAMES = __import__("re").compile(
    r"[A-Z][A-Za-z]*(Error|Exception|Warning)\b|Traceback|np\.float64|please report"
)


@st.composite
def _junk_param_block(draw):
    block = [list(row) for row in BLOCK]
    block[draw(st.integers(0, 4))][1] = draw(st.sampled_from(_EXTREMES))
    return draw(st.sampled_from([block, [r[1] for r in block], [[0.04, 0.5], [0.04], [1.0]]]))


_cell_junk = st.one_of(
    st.sampled_from(_EXTREMES),
    st.sampled_from([None, True, False, "", " ", "#N/A", "call", "put", "qe", "1/252", "abc"]),
    st.lists(
        st.lists(st.sampled_from([*_EXTREMES, None, "x"]), min_size=1, max_size=2),
        min_size=1,
        max_size=3,
    ),
    st.floats(allow_nan=True, allow_infinity=True),
)


@settings(max_examples=400, deadline=None)
@given(st.sampled_from(sorted(REGISTRY)), st.data())
def test_junk_never_shows_a_python_exception_name(name, data):
    # Every ROOTVAR_ function, every argument drawn from junk and extreme values, a parameter
    # block with one value pushed to an extreme.  The answer is a value, a table or one
    # marked line that names a rule: never a Python class name or a traceback.
    import inspect

    from rootvar.addin.functions import work_cap

    params = list(inspect.signature(REGISTRY[name].func).parameters)
    count = data.draw(st.integers(0, len(params)))
    args = [
        data.draw(_junk_param_block() if p == "params" else _cell_junk, label=p)
        for p in params[:count]
    ]
    with work_cap(200_000):  # a junk call that happens to be valid stays quick
        out = REGISTRY[name].func(*args)
    texts = [out] if isinstance(out, str) else []
    if isinstance(out, list):
        texts = [c for row in out for c in (row if isinstance(row, list) else [row])
                 if isinstance(c, str)]  # fmt: skip
    for text in texts:
        assert not _PYTHON_NAMES.search(text), text
        if text.startswith(MARK):
            assert "\n" not in text


def test_missing_arguments_are_named():
    out = call("ROOTVAR_FOURIER_PRICE", BLOCK, 100.0)
    assert out == (
        f"{MARK}ROOTVAR_FOURIER_PRICE needs params, spot, strike, maturity; missing strike, "
        "maturity"
    )


@pytest.mark.parametrize(
    "name, args, fragment",
    [
        # a huge maturity names the maturity, not an argument the user never gave
        ("ROOTVAR_STEP_STUDY", (BLOCK, 100.0, 100.0, 1e12), "maturity must lie in [0.001, 100]"),
        ("ROOTVAR_FOURIER_PRICE", (BLOCK, 0.5, 5e-324, 1.0), "strike / spot must lie in"),
        # a horizon of 1e-12 would need a Poisson series of ~1e11 terms: refused up front
        ("ROOTVAR_VARIANCE_QUANTILE", (BLOCK, 1e-12, 0.01), "horizon is too short"),
        ("ROOTVAR_VARIANCE_TABLE", (BLOCK, [[1.0], [1e-12]]), "horizons is too short"),
        ("ROOTVAR_FELLER", ([0.04, 1e15, 0.04, 1.0, -0.9],), "kappa must lie in"),
        ("ROOTVAR_FELLER", ([[0.04, 0.5], [0.04], [1.0, -0.9]],), "rectangular range"),
        ("ROOTVAR_MC_PRICE", (BLOCK, 100.0, 100.0, 1.0, 0, 0, [["call"], ["put"]]), "kind must"),
        (
            "ROOTVAR_MC_PRICE",
            (BLOCK, 100.0, 100.0, 1.0, 0, 0, "call", "qe", 4, 1000, 1, [[True], [False]]),
            "antithetic must be a single cell, got a range of 2 cells",
        ),
        (
            "ROOTVAR_MC_PRICE",
            (BLOCK, 100.0, 100.0, 1.0, 0, 0, "call", "qe", 4, 1000, 1e15),
            "seed must be >= 0 and <= 999,999,999,999,999",
        ),
    ],
)
def test_cell_rules_are_named_and_refused_up_front(name, args, fragment):
    out = call(name, *args)
    assert isinstance(out, str) and out.startswith(MARK), out
    assert fragment in out, out


def test_all_blank_schemes_mean_the_default():
    args = (BLOCK, 100.0, 100.0, 1.0, 0, 0, "call")
    tail = ([[2.0], [4.0]], 1000.0, 5.0, 5.0)
    blank = call("ROOTVAR_STEP_STUDY", *args, [[None], [""], ["  "]], *tail)
    default = call("ROOTVAR_STEP_STUDY", *args, None, *tail)
    assert blank == default
    assert {row[0] for row in blank[1:-1]} == {"euler_full", "qe", "exact_variance"}


def test_a_seed_read_back_from_a_cell_reproduces_the_row():
    # A spreadsheet keeps 15 significant digits (common practice, no source): the largest
    # seed a cell takes survives the round trip through the text a cell shows.
    from rootvar.addin.functions import MAX_SEED
    from rootvar.core.checks.daily import row_seed

    for seed in (MAX_SEED, row_seed(20240601, "ALD-EQX"), row_seed(7, "QLN-FXB")):
        assert seed <= MAX_SEED
        shown = f"{float(seed):.15g}"  # what the cell displays and a user copies
        assert int(float(shown)) == seed
        clear_cache()
        first = call("ROOTVAR_MC_PRICE", BLOCK, 100.0, 100.0, 1.0, 0, 0, "call", "qe", 4, 2000,
                     float(seed))  # fmt: skip
        clear_cache()
        again = call("ROOTVAR_MC_PRICE", BLOCK, 100.0, 100.0, 1.0, 0, 0, "call", "qe", 4, 2000,
                     float(shown))  # fmt: skip
        assert first[:7] == again[:7]  # every row but the timing


@pytest.mark.slow
def test_default_step_study_recommends_a_scheme_on_every_demo_model():
    # the flagship answer with every default: a scheme and step, not "none consistent"
    from rootvar.addin.workbooks.demo_desk import demo_models

    for m in demo_models():
        p = m.params
        block = [["v0", p.v0], ["kappa", p.kappa], ["theta", p.theta]]
        block += [["vol_of_vol", p.vol_of_vol], ["rho", p.rho]]
        rows = call("ROOTVAR_STEP_STUDY", block, m.spot, m.spot, 1.0)
        assert rows[-1][0] == "recommendation"
        text = rows[-1][1]
        assert text.split(" at ")[0] in ("euler_full", "qe", "exact_variance"), (m.model_id, text)
        # the recommended cell itself is consistent in the table
        scheme, steps = text.split(" at ")[0], int(text.split(" at ")[1].split()[0])
        cell = [r for r in rows[1:-1] if r[0] == scheme and r[1] == steps]
        assert cell and "consistent" in cell[0]


# ------------------------------------------------------------------ exotics

#: Fang & Oosterlee (2008), SIAM J. Sci. Comput. 31(2), Heston test case, as a cell block.
FO_BLOCK = [["v0", 0.0175], ["kappa", 1.5768], ["theta", 0.0398], ["vol_of_vol", 0.5751],
            ["rho", -0.5711]]  # fmt: skip
FO = HestonParams(0.0175, 1.5768, 0.0398, 0.5751, -0.5711)


def _exotic_args(product, check=False, **cells):
    names = ("kind", "strike", "maturity", "barrier", "direction", "knock", "rebate", "dates",
             "start", "strike_share", "cash", "rate", "div_yield", "scheme", "steps", "paths",
             "seed", "control", "tolerance", "z")  # fmt: skip
    return [FO_BLOCK, 100.0, product, *[cells.get(n) for n in names[: 20 if check else 18]]]


def test_exotic_price_spills_the_core_run_with_and_without_control():
    from rootvar.core import BarrierOption, mc_exotic

    args = _exotic_args("down and out", strike=100.0, maturity=1.0, barrier=90.0, paths=20_000)
    assert call("ROOTVAR_EXOTIC_PRICE", *args).startswith(MARK)  # not a product word
    args[2] = "barrier"
    rows = call("ROOTVAR_EXOTIC_PRICE", *args)
    table = dict(rows)
    direct = mc_exotic(FO, 100.0, BarrierOption("call", 100.0, 1.0, 90.0, "down", "out"),
                       paths=20_000)  # fmt: skip
    # the same seed and settings give the same numbers (reproducibility, README)
    assert table["price"] == direct.price and table["std error"] == direct.std_error
    assert table["control variate"] == "european"
    assert table["price without control"] == direct.uncontrolled_price
    assert table["variance reduction"] == direct.variance_reduction > 1.0
    assert table["steps"] == direct.steps
    assert [r[0] for r in rows][:2] == ["price", "std error"]


def test_exotic_check_gives_the_core_verdict():
    from rootvar.core import ForwardStartOption, compare_exotic

    args = _exotic_args("forward start", True, maturity=1.0, start=0.5, paths=20_000)
    rows = call("ROOTVAR_EXOTIC_CHECK", *args)
    table = dict(rows)
    direct = compare_exotic(FO, 100.0, ForwardStartOption("call", 0.5, 1.0, 1.0), paths=20_000)
    assert table["second method"] == "Fourier"
    assert table["second price"] == direct.second_price
    assert table["verdict"] == direct.verdict
    assert table["tolerance"] == pytest.approx(0.1)  # 0.1% of spot 100 by default
    assert rows[-1][0] == "reason" and table["reason"] == direct.reason


def test_exotic_cells_build_every_product():
    # every product word builds its contract; an empty Asian date range means monthly fixings
    for product, cells in (
        ("european", {"strike": 100.0, "maturity": 1.0}),
        ("asian", {"strike": 100.0, "maturity": 1.0}),
        ("geometric asian", {"strike": 100.0, "maturity": 0.5, "dates": [[0.25], [0.5]]}),
        ("digital", {"strike": 100.0, "maturity": 1.0, "cash": 5.0}),
        ("barrier", {"strike": 100.0, "maturity": 1.0, "barrier": 120.0, "knock": "in",
                     "dates": [[0.5], [1.0]]}),
    ):  # fmt: skip
        out = call("ROOTVAR_EXOTIC_PRICE", *_exotic_args(product, paths=2_000, steps=8, **cells))
        assert isinstance(out, list), (product, out)
    from rootvar.addin.functions.exotics import product_from_cells

    asian = product_from_cells(100.0, "asian", None, 100.0, 1.0, *[None] * 8)
    assert asian.fixings == pytest.approx([(j + 1) / 12 for j in range(12)])


@pytest.mark.parametrize(
    "product, cells, fragment",
    [
        (None, {"strike": 100.0, "maturity": 1.0}, "product must be one of"),
        ("european", {"strike": 100.0, "maturity": 1.0, "barrier": 90.0},
         "a european takes no barrier"),
        ("forward start", {"strike": 100.0, "maturity": 1.0, "start": 0.5},
         "a forward start takes no strike"),
        ("forward start", {"maturity": 1.0, "start": 1.5}, "maturity must be > start"),
        ("asian", {"strike": 100.0, "maturity": 2.0, "dates": [[0.5], [1.0]]},
         "maturity must be the last fixing date"),
        ("barrier", {"strike": 100.0, "maturity": 1.0}, "barrier must be a number"),
        ("digital", {"strike": 100.0, "maturity": 1.0, "cash": -1.0}, "cash must be > 0"),
        ("european", {"strike": 100.0, "maturity": 1.0, "paths": 1001}, "paths must be even"),
        ("barrier", {"strike": 100.0, "maturity": 1.0, "barrier": 90.0, "control": "forward start"},
         "control must be one of"),
        ("asian", {"strike": 100.0, "maturity": 1.0, "paths": 10_000_000, "steps": 1000},
         "exceeds the cap"),
    ],
)  # fmt: skip
def test_exotic_bad_input_is_marked_text(product, cells, fragment):
    for check, name in enumerate(("ROOTVAR_EXOTIC_PRICE", "ROOTVAR_EXOTIC_CHECK")):
        out = call(name, *_exotic_args(product, bool(check), **cells))
        assert isinstance(out, str) and out.startswith(MARK), out
        assert fragment in out and "InputError" not in out, out


def test_exotic_price_says_why_a_knocked_barrier_is_worth_its_exact_value():
    # a continuous down-and-out whose spot is already at the barrier is dead:
    # worth nothing without a rebate (the definition of the contract), and the
    # spill must carry the reason rather than a bare zero
    rows = call(
        "ROOTVAR_EXOTIC_PRICE",
        *_exotic_args("barrier", strike=100.0, maturity=1.0, barrier=100.0, direction="down"),
    )
    table = dict(rows)
    assert table["price"] == 0.0 and table["std error"] == 0.0
    assert "already knocked" in table["notes"]
    assert dict(call("ROOTVAR_EXOTIC_PRICE", *_exotic_args(
        "barrier", strike=100.0, maturity=1.0, barrier=90.0, paths=2_000, steps=8
    )))["notes"] == ""  # fmt: skip


def test_exotic_messages_name_the_product_in_words():
    text = call(
        "ROOTVAR_EXOTIC_PRICE",
        *_exotic_args("asian", strike=100.0, maturity=1.0, control="forward_start"),
    )
    assert text.startswith(MARK) and "for arithmetic Asian options" in text
    assert "Option" not in text and "np.float64" not in text
    text = call(
        "ROOTVAR_EXOTIC_PRICE",
        *_exotic_args("asian", strike=100.0, maturity=1.0, dates=[[0.5], [2.0]]),
    )
    assert "maturity must be the last fixing date 2 of an Asian, got 1" in text


def test_documented_defaults_are_the_ones_the_code_uses():
    # The function reference, module docstrings and README state defaults that the
    # code must actually use (common practice, no source: documentation from the code).
    import ast
    import re

    from rootvar.addin import functions
    from rootvar.core.checks.exotic import DEFAULT_EXOTIC_PATHS
    from rootvar.core.montecarlo.exotic import BARRIER_STEPS_PER_YEAR, DEFAULT_STEPS_PER_YEAR

    exotic = dict(REGISTRY["ROOTVAR_EXOTIC_PRICE"].args)
    assert f"(empty: {DEFAULT_EXOTIC_PATHS})" in exotic["paths"]
    assert f"{BARRIER_STEPS_PER_YEAR} for a continuously watched barrier" in exotic["steps"]
    assert f"else {DEFAULT_STEPS_PER_YEAR})" in exotic["steps"]
    study = dict(REGISTRY["ROOTVAR_STEP_STUDY"].args)["paths"]
    assert f"(empty: {functions.STUDY_PATHS})" in study
    root = REPO
    texts = [(root / "README.md").read_text(encoding="utf-8"), functions.__doc__]
    texts += [p.read_text(encoding="utf-8") for p in (root / "docs").rglob("*.rst")]
    claims = [c for t in texts for c in re.findall(r"step study ([\d,]+) paths per", t)]
    assert {int(c.replace(",", "")) for c in claims} <= {functions.STUDY_PATHS}
    # numpydoc "name : type, default X" lines of the public core functions match the signature
    import rootvar.core as core

    checked = 0
    for name in core.__all__:
        obj = getattr(core, name)
        if not callable(obj) or isinstance(obj, type) or not obj.__doc__:
            continue
        signature = inspect.signature(obj)
        for arg, text in re.findall(r"^\s+(\w+) : [^\n]*?, default ([^\n]+)$", obj.__doc__, re.M):
            if arg in signature.parameters:
                assert ast.literal_eval(text.strip()) == signature.parameters[arg].default, arg
                checked += 1
    assert checked >= 2
