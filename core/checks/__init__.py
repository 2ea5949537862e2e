"""Prices held against each other: the vanilla verdict and step study (``vanilla``), the exotic
comparison (``exotic``) and the daily check of one model (``daily``).  Public names are served
by :mod:`rootvar.core`."""
