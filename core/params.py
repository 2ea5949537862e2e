"""The Heston parameter set as one frozen, validated value."""

from __future__ import annotations

from dataclasses import dataclass

from rootvar.core.validation import InputError, as_float_array

__all__ = ["HestonParams", "as_params"]


@dataclass(frozen=True)
class HestonParams:
    """Heston model parameters, checked on construction.

    The variance follows the CIR square-root process
    ``dv = kappa (theta - v) dt + vol_of_vol sqrt(v) dW_v`` and the log-price is
    driven by ``dW_s`` with ``d<W_s, W_v> = rho dt``.

    Parameters
    ----------
    v0 : float
        Initial variance (annualised, e.g. 0.04 for 20% volatility), >= 0.
    kappa : float
        Mean-reversion speed, per year, > 0.
    theta : float
        Long-run variance (annualised), > 0.
    vol_of_vol : float
        Volatility of the variance, per sqrt(year), > 0.
    rho : float
        Correlation between price and variance shocks, in [-1, 1].

    Notes
    -----
    The Feller condition ``2 kappa theta >= vol_of_vol**2`` is *reported*
    (see :func:`rootvar.core.feller_ratio`), never enforced: calibrated sets
    often break it.

    References
    ----------
    Heston, S. L. (1993). A closed-form solution for options with stochastic
    volatility. Review of Financial Studies 6(2), 327-343.
    """

    v0: float
    kappa: float
    theta: float
    vol_of_vol: float
    rho: float

    def __post_init__(self) -> None:
        rules = {
            "v0": (">=0",),
            "kappa": (">0",),
            "theta": (">0",),
            "vol_of_vol": (">0",),
            "rho": ("[-1,1]",),
        }
        for name, rule in rules.items():
            value = as_float_array(name, getattr(self, name), *rule)
            if value.ndim != 0:
                raise InputError(f"{name} must be a single number, got shape {value.shape}")
            object.__setattr__(self, name, float(value))

    @property
    def feller_ratio(self) -> float:
        """``2 kappa theta / vol_of_vol**2``; the Feller condition holds when >= 1."""
        return 2.0 * self.kappa * self.theta / self.vol_of_vol**2


def as_params(params) -> HestonParams:
    """``params`` itself when it is a :class:`HestonParams`; otherwise an :class:`InputError`.

    The one check every public entry makes of its parameter set, with one message.
    """
    if not isinstance(params, HestonParams):
        raise InputError(f"params must be a HestonParams, got {type(params).__name__}")
    return params
