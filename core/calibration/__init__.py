"""Fitting Heston to a smile: reading and checking quotes (``quotes``) and the least-squares fit
with the Feller trade-off (``fit``).  Public names are served by :mod:`rootvar.core`."""
