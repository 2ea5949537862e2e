"""Simulation: the schemes as data and steps (``schemes``), the European engine (``european``)
and the path-dependent one (``exotic``), each with its compiled kernels (``kernels``,
``exotic_kernels``).  Public names are served by :mod:`rootvar.core`."""
