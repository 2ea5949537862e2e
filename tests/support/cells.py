"""A Heston parameter block as cells take it, and the same model as HestonParams (test data)."""

from rootvar.core import HestonParams

BLOCK = [["v0", 0.04], ["kappa", 0.5], ["theta", 0.04], ["vol_of_vol", 1.0], ["rho", -0.9]]
P = HestonParams(0.04, 0.5, 0.04, 1.0, -0.9)
