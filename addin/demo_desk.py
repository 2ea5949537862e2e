"""The invented desk behind every demo and shipped workbook.

The Harbourline volatility desk trades options on five invented underlyings.
Their Heston parameter sets are made up but shaped like real calibrations:
most break the Feller condition, one equity name badly.  Nothing here is
market data; use it for demonstrations only.
"""

from __future__ import annotations

from rootvar.core import HestonParams
from rootvar.core.control import ModelSpec

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
    """The desk's five models (invented data)."""
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
    ]
