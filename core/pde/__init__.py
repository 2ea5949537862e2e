"""Finite differences: the grids and operators (``grid``), the ADI time stepping (``adi``) and
the priced result with refinement (``solver``).  Public names are served by :mod:`rootvar.core`."""
