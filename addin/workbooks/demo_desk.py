"""The invented desk behind every demo and shipped workbook.

The Harbourline volatility desk trades options on seven invented underlyings.
Their Heston parameter sets are made up but shaped like real calibrations:
four break the Feller condition, one equity name badly.  Nothing here is
market data; use it for demonstrations only.

At the shipped control settings (weekly Euler steps, 40,000 paths, 10 bp,
base seed 20240601) the daily control gives each flag a model that shows it,
so the *Results* sheet reads as a contrast:

- PLW-GLD (a gold fixing: Feller holds with room, spot and volatility
  almost uncorrelated) is clear on every test option: what a clean model
  looks like;
- MRD-PWR holds Feller, but its low starting variance trips the Euler
  negative-step flag (and its in-the-money options are undecided);
- TMS-BIO breaks Feller badly (ratio below the 0.3 warning) and its
  Monte Carlo price is biased at half a year, undecided at two;
- ALD-EQX and CRV-SHP break Feller markedly and trip the negative-step
  flag; some of their options are biased, others undecided;
- QLN-FXB raises no model-level flag and is only undecided, in the money,
  where a basis point of volatility is a tiny price;
- OST-FXP, a pegged currency, is checked on the desk's strike grid, which
  lies many standard deviations away from its spot: far strikes have no time
  value a price can carry, so the check there cannot be formed.
"""

from __future__ import annotations

from rootvar.core import HestonParams
from rootvar.core.checks.daily import ModelSpec

__all__ = ["DEMO_MATURITIES", "DEMO_MONEYNESS", "DESK_NAME", "demo_models"]

DESK_NAME = "Harbourline volatility desk"
#: Test options the desk controls every day (years; strike / spot).
DEMO_MATURITIES = (0.5, 2.0)
DEMO_MONEYNESS = (0.8, 0.9, 1.0, 1.1, 1.2)


def _model(model_id, underlying, spot, rate, div_yield, params):
    return ModelSpec(
        model_id, underlying, spot, rate, div_yield, params, DEMO_MATURITIES, DEMO_MONEYNESS
    )


def demo_models() -> list[ModelSpec]:
    """The desk's seven models (invented data)."""
    return [
        _model(
            "ALD-EQX",
            "Alder 50 equity index",
            4125.0,
            0.031,
            0.018,
            HestonParams(v0=0.028, kappa=2.1, theta=0.045, vol_of_vol=0.72, rho=-0.74),
        ),
        _model(
            "CRV-SHP",
            "Corvid Shipping",
            38.6,
            0.031,
            0.042,
            HestonParams(v0=0.09, kappa=1.3, theta=0.11, vol_of_vol=0.95, rho=-0.52),
        ),
        _model(
            "MRD-PWR",
            "Meridale Power",
            71.2,
            0.031,
            0.035,
            HestonParams(v0=0.021, kappa=3.4, theta=0.026, vol_of_vol=0.38, rho=-0.41),
        ),
        _model(
            "TMS-BIO",
            "Tamsin Biotech",
            12.9,
            0.031,
            0.0,
            HestonParams(v0=0.16, kappa=0.85, theta=0.19, vol_of_vol=1.35, rho=-0.28),
        ),
        _model(
            "QLN-FXB",
            "Quillon currency basket",
            1.084,
            0.031,
            0.024,
            HestonParams(v0=0.0085, kappa=1.6, theta=0.0095, vol_of_vol=0.21, rho=0.12),
        ),
        # the clean row: spot and volatility barely correlated, so the conditional Monte
        # Carlo estimator is quiet even deep in the money, and Feller holds with room
        _model(
            "PLW-GLD",
            "Pellow gold fixing",
            1932.5,
            0.031,
            0.004,
            HestonParams(v0=0.027, kappa=3.0, theta=0.026, vol_of_vol=0.2, rho=-0.01),
        ),
        # a volatility near 1.4%: the desk strikes (80%-120%) lie 5 to 23 standard deviations out
        _model(
            "OST-FXP",
            "Ostmarch pegged dollar",
            5.412,
            0.031,
            0.028,
            HestonParams(v0=0.00018, kappa=2.4, theta=0.0002, vol_of_vol=0.018, rho=0.0),
        ),
    ]
