"""The variance alone: the Feller ratio and Euler's one-step risk (``euler``), the exact and
stationary laws of the CIR process (``cir_law``) and the report that puts them side by side
(``report``).  Public names are served by :mod:`rootvar.core`."""
