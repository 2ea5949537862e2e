"""Rules every ROOTVAR_ cell keeps: names, docs, the caches, defaults and bad input."""

import inspect
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from support.cells import BLOCK, P
from support.paths import REPO

from rootvar.addin.cells import MARK
from rootvar.addin.functions import REGISTRY, call, clear_cache
from rootvar.core import (
    cir_transition,
    euler_max_step,
    euler_negative_probability,
    heston_price,
    implied_vol,
)


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
