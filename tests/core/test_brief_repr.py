"""Result objects print as a short summary; their arrays stay reachable as attributes."""

import numpy as np

from rootvar.core import EuropeanOption, HestonParams, mc_price, pde_price

P = HestonParams(0.04, 1.5, 0.04, 0.5, -0.7)


def test_a_pde_result_prints_its_grid_by_shape_not_by_its_numbers():
    result = pde_price(P, 100.0, EuropeanOption("call", 100.0, 1.0), refine=False)
    text = repr(result)
    assert len(text) < 1500
    assert f"values=<array {result.values.shape[0]}x{result.values.shape[1]} float64>" in text
    assert f"price={result.price!r}" in text  # scalars in full precision
    assert result.values.size > 1000 and np.isfinite(result.values).all()


def test_short_arrays_print_in_full():
    result = mc_price(P, 100.0, [90.0, 100.0, 110.0], 1.0, paths=200, steps=4)
    assert f"price={result.price.tolist()!r}" in repr(result)
