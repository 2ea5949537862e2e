"""Prices from the characteristic function: the characteristic function and its cumulants
(``characteristic``), the joint one over several dates (``joint_cf``), the certified COS route
(``cos``, kernels in ``cos_kernels``), the adaptive check method (``check``), exotics by Fourier
(``exotics``) and the price gradient in the parameters (``gradient``, kernels in
``gradient_kernels``).  Public names are served by :mod:`rootvar.core`."""
