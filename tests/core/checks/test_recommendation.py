"""The control's recommendation search and its screening runs."""

import math

import pytest

from rootvar.core import CONSISTENT, HestonParams, compare_mc_fourier, step_study
from rootvar.core.checks.daily import (
    SCREEN_MARGIN,
    ControlSettings,
    ModelSpec,
    recommendation_grid,
    recommended_run,
    row_seed,
    screen_paths,
    screened_out,
    search_cells,
)
from rootvar.core.montecarlo.european import BLOCK

# Andersen (2008) case I (Feller ratio 0.04) and a low-Feller model of our own
ANDERSEN_I = HestonParams(0.04, 0.5, 0.04, 1.0, -0.9)
LOW_FELLER = HestonParams(0.02, 0.4, 0.03, 0.9, -0.8)


def test_a_screening_run_is_whole_blocks_about_an_eighth_of_the_paths():
    assert screen_paths(40_000) == BLOCK
    assert screen_paths(100_000) == 3 * BLOCK
    assert screen_paths(8 * BLOCK - 1) == 0  # under one block: no screening
    assert screen_paths(8 * BLOCK) == BLOCK


def _compare(params, scheme, steps, paths, tolerance_bp=10.0):
    return compare_mc_fourier(
        params, 100.0, 100.0, 1.0, 0.0, 0.0, "call", scheme, steps, paths, 11, False, True,
        tolerance_bp, None, 3.0,
    )  # fmt: skip


def test_a_biased_screening_run_rules_the_cell_out():
    # absorption at one step a year is hundreds of bp off on case I (as in test_vanilla)
    screen = _compare(ANDERSEN_I, "euler_absorb", 1, BLOCK)
    assert screen.verdict == "biased"
    assert screened_out(screen, 40_000) == "biased on the screening paths"


def test_the_band_scales_as_the_square_root_of_the_paths():
    """The screening error predicts the production error (the 1/sqrt(n) law).

    Glasserman (2004), *Monte Carlo Methods in Financial Engineering*,
    sec. 1.1: the standard error of a mean of n independent paths is
    sigma / sqrt(n).  The screening run's estimate of it, scaled to the
    production paths, is within 10% of the production run's own.
    """
    for params, scheme in ((ANDERSEN_I, "qe"), (LOW_FELLER, "exact_variance")):
        screen = _compare(params, scheme, 16, BLOCK)
        full = _compare(params, scheme, 16, 10 * BLOCK)
        predicted = float(screen.mc.std_error) * math.sqrt(BLOCK / (10 * BLOCK))
        assert predicted == pytest.approx(float(full.mc.std_error), rel=0.1)


def test_the_margin_decides_on_the_scaled_band():
    screen = _compare(LOW_FELLER, "qe", 16, BLOCK)
    assert screen.verdict != "biased"
    per_path = 3.0 * float(screen.mc.std_error) * math.sqrt(BLOCK) / float(screen.tolerance_price)
    # paths at which the scaled band is exactly `ratio` tolerances
    for ratio, ruled_out in ((0.9 * SCREEN_MARGIN, False), (1.1 * SCREEN_MARGIN, True)):
        paths = int((per_path / ratio) ** 2)
        why = screened_out(screen, paths)
        assert bool(why) == ruled_out
        if ruled_out:
            assert f"band {ratio:.2f} tolerances at {paths:,} paths" in why


@pytest.mark.parametrize(
    ("params", "tolerance_bp", "paths"),
    [
        (ANDERSEN_I, 10.0, 2 * BLOCK),  # too few paths to screen: every cell run in full
        (ANDERSEN_I, 10.0, 8 * BLOCK),
        (LOW_FELLER, 2.0, 8 * BLOCK),
        (LOW_FELLER, 20.0, 8 * BLOCK),
    ],
)
def test_screened_cells_are_never_consistent_and_the_answer_is_the_studys(
    params, tolerance_bp, paths
):
    """Identity test: the search's answer is the full step study's cheapest consistent cell."""
    settings = ControlSettings(paths=paths, steps_per_year=16, tolerance_bp=tolerance_bp)
    spec = ModelSpec("T1", "test", 100.0, 0.0, 0.0, params, (1.0,), (1.0,))
    seed = row_seed(settings.seed, "T1")
    schemes, grid = recommendation_grid(settings, 1.0)
    table = step_study(
        params, 100.0, 100.0, 1.0, 0.0, 0.0, "call", schemes=schemes, steps_grid=grid,
        paths=settings.paths, seed=seed, conditional=True, tolerance_bp=tolerance_bp, z=3.0,
        antithetic=False,
    )  # fmt: skip
    full = {(r.scheme, int(r.steps)): r.verdict for r in table.itertuples()}
    cells = list(search_cells(spec, settings, seed, 1.0, 100.0))
    for scheme, steps, verdict, screened in cells:
        if screened:
            assert full[(scheme, steps)] != CONSISTENT
        else:  # run at the production paths: the study's own verdict
            assert verdict == full[(scheme, steps)]
    best = table.attrs["cheapest"]
    text = recommended_run(spec, settings, seed, 1.0, 100.0)
    if best is None:
        assert text.startswith("none consistent")
    else:
        assert text == f"{best['scheme']} at {best['steps']:.0f} steps a year"
    if paths < 8 * BLOCK:
        assert not any(screened for *_, screened in cells)
    if tolerance_bp == 2.0:  # tight enough that no cell settles: screening must do the work
        assert best is None and all(screened for *_, screened in cells)
