"""The certified COS series: coefficients, their cache and the verified truncation range.

What :mod:`rootvar.core.fourier.cos` prices with (Fang & Oosterlee 2008): the
characteristic function on a frequency grid, the density coefficients of
ln(S_T / S_0) on a range, the put payoff's sums, the bounded cache that lets a
column of cells pay for one maturity's series once, and the range check that
certifies a strip of puts.  :mod:`rootvar.core.fourier.exotics` reuses the series
class for its own laws.

References
----------
Fang, F. and Oosterlee, C. W. (2008). A novel pricing method for European
options based on Fourier-cosine series expansions. SIAM J. Sci. Comput. 31(2).
"""

from __future__ import annotations

import functools
import itertools
import threading
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

from rootvar.core.fourier.characteristic import heston_log_cf, log_return_cumulants
from rootvar.core.fourier.cos_kernels import (
    cf_array,
    cos_coefficients,
    cos_puts,
    flat_coefficients,
    flat_sums,
)
from rootvar.core.runtime import numba, thread_pool

#: Bound (x spot) on the COS terms left out past the last one (see ``cf_cutoffs``).
SERIES_TOL = 1e-11
#: Allowed change (x spot) when both ends of the truncation range are doubled.
RANGE_TOL = 1e-10
#: Most COS terms per maturity before the check method takes over.
MAX_TERMS = 1 << 19
#: Unit roundoff of float64.
EPS = float(np.finfo(float).eps)


#: Frequencies on which ``cf_cutoffs`` reads the decay of the characteristic function.
CUTOFF_GRID = np.geomspace(1e-2, 1e7, 160)


#: Most maturities in one call whose ``law_facts`` are remembered (bounds the
#: memo at 256 entries x 160 x 64 numbers, 21 MB).
LAW_FACTS_MATURITIES = 64


def law_facts(params, maturities, drift):
    """Per maturity (a tuple), the mean and standard deviation of ln(S_T / S_0)
    and ``|cf|`` on ``CUTOFF_GRID`` (a column: grid x maturities).

    Pure functions of the arguments, remembered (up to
    ``LAW_FACTS_MATURITIES`` maturities per call) so that a column of cells
    pricing one model and maturity pays them once; read-only arrays.
    """
    if len(maturities) > LAW_FACTS_MATURITIES:
        return law_facts_now(params, maturities, drift)
    return law_facts_kept(params, maturities, drift)


def law_facts_now(params, maturities, drift):
    t = np.array(maturities)
    c1, c2 = log_return_cumulants(params, t, drift)
    mod = np.exp(heston_log_cf(CUTOFF_GRID[:, None], params, t[None, :], drift).real)
    sd = np.sqrt(c2)
    for part in (c1, sd, mod):
        part.flags.writeable = False
    return c1, sd, mod


law_facts_kept = functools.lru_cache(maxsize=256)(law_facts_now)


def cf_cutoffs(params, maturities, drift, max_strike, spot):
    """Per maturity, the frequency beyond which the dropped COS terms are negligible.

    For the put payoff ``K (1 - e^y)^+`` two integrations by parts bound the
    cosine coefficients on a range of width ``w`` by
    ``|V_k| <= 4 K w / (k pi)^2``, so the terms past ``N = u* w / pi`` add at
    most ``|cf(u*)| 4 K / (pi u*)`` whatever the range, as long as ``|cf|``
    does not grow again past ``u*`` (checked on a grid up to 1e7).  ``u*`` is
    the first grid point after which that bound stays below ``SERIES_TOL x spot``.
    """
    u = CUTOFF_GRID
    mod = law_facts(params, tuple(np.asarray(maturities, dtype=float).tolist()), float(drift))[2]
    above = mod * (4.0 * max_strike / (np.pi * u[:, None])) >= SERIES_TOL * spot
    # index of the first grid point past the last one still above the tolerance
    last = np.where(above.any(axis=0), u.size - 1 - np.argmax(above[::-1], axis=0), -1)
    return u[np.clip(last + 1, 0, u.size - 1)]


#: Least work worth splitting over threads: in terms x columns x strikes of the
#: COS sums (about 0.3 ns each), and ``CF_SPLIT_WORK`` in characteristic-function
#: values (about 100 ns each); half a millisecond to 2 ms either way.  Handing a
#: slice to the other thread costs tens of microseconds on an idle machine and far
#: more on a busy one, where the other thread may wait for a core: smaller pieces
#: were measured slower split than whole (10 x 101 surface, Fang & Oosterlee set,
#: load 4 on 2 cores: 8.6 ms on one thread, 15.5 ms split).
SPLIT_WORK = 1 << 21
CF_SPLIT_WORK = 1 << 14


def thread_slices(count, work, unit=1, least=None):
    """Slices of ``range(count)``, one per thread when ``work`` is at least
    ``least`` (``SPLIT_WORK`` by default), and the pool.

    Slices hold whole multiples of ``unit`` items (the kernel's own batch),
    so that splitting adds no work.
    """
    units = -(-count // unit)
    least = SPLIT_WORK if least is None else least
    pool = thread_pool() if work >= least and units > 1 else None
    if pool is None:
        return [slice(0, count)], None
    edges = np.linspace(0, units, min(numba.get_num_threads(), units) + 1).astype(int) * unit
    edges[-1] = count
    return [slice(a, b) for a, b in itertools.pairwise(edges)], pool


def cf_values(omega, params, maturity, drift):
    """The characteristic function at real ``omega`` (compiled, no temporaries).

    Every value is computed alone, so slicing the frequencies over threads
    changes no bit.
    """
    p = params
    model = np.array([p.kappa, p.theta, p.vol_of_vol, p.rho, p.v0])
    t, mu = float(maturity), float(drift)
    parts, pool = thread_slices(omega.size, omega.size, least=CF_SPLIT_WORK)
    if pool is None:
        return cf_array(omega, t, model, mu)
    return np.concatenate(list(pool.map(lambda s: cf_array(omega[s], t, model, mu), parts)))


def fourier_sums(angle, coef):
    """``sum_k coef[k, p] exp(i k angle[m])`` for every m and column p.

    Splits ``k = l J + j`` (``J ~ sqrt(N)``) so that only ``2 M`` complex
    exponentials are taken instead of ``M N``; see
    :func:`rootvar.core.fourier.cos_kernels.flat_sums`.
    """
    coef = np.ascontiguousarray(coef, dtype=complex)
    flat_re, flat_im = flat_coefficients(coef)
    return split_flat_sums(angle, flat_re, flat_im, *coef.shape)


def split_flat_sums(angle, flat_re, flat_im, n, cols):
    """:func:`fourier_sums` on coefficients already laid out flat.

    Each angle's sum is independent of the others and has the same bits
    however the angles are grouped, so slicing them over threads changes no bit.
    """
    angle = np.ascontiguousarray(angle, dtype=float)
    parts, pool = thread_slices(angle.size, angle.size * n * cols, unit=4)  # 4 angles at a time
    if pool is None:
        return flat_sums(angle, flat_re, flat_im, n, cols)
    return np.concatenate(
        list(pool.map(lambda s: flat_sums(angle[s], flat_re, flat_im, n, cols), parts))
    )


def phases(step, count):
    """``exp(1j * step * arange(count))`` from about ``2 sqrt(count)`` exponentials."""
    near_n = max(1, int(np.ceil(np.sqrt(count))))
    far_n = -(-count // near_n)
    near = np.exp(1j * step * np.arange(near_n))
    far = np.exp(1j * step * near_n * np.arange(far_n))
    return np.multiply.outer(far, near).ravel()[:count]


@dataclass(frozen=True)
class CosSeries:
    """Density coefficients of ln(S_T/S_0) on [a, b] (Fang & Oosterlee 2008, eq. 9)."""

    a: float
    b: float
    omega: np.ndarray
    coef: np.ndarray
    # the payoff columns coef / omega and coef (1 - i omega) / (1 + omega^2),
    # real and imaginary parts laid out for cos_kernels.flat_sums
    payoff_re: np.ndarray
    payoff_im: np.ndarray
    chi_edge: float  # sum of Re of the second column, the chi term at the lower end

    @property
    def nbytes(self):
        return self.omega.nbytes + self.coef.nbytes + self.payoff_re.nbytes + self.payoff_im.nbytes

    @functools.cached_property
    def put_rounding(self):
        """Bound on the rounding of :meth:`puts`, per unit of strike.

        The put is ``K (2 / w) (psi_sum - e^x chi_sum)``, ``w = b - a``: its
        terms are at most ``|coef_k|`` times ``w`` (``k = 0``) or
        ``1 / omega_k + 1 / sqrt(1 + omega_k^2)`` (``e^{x + cut} <= 1``),
        and each carries the roundings of its phase, a running product of
        about ``2 sqrt(N)`` factors.  ``eps (16 + 8 sqrt(N))`` times their sum,
        twice the rounding measured where it showed (a strike 82,580 x spot at
        40 years, whose put was 2.4e-7 off at a bound of 5.4e-7).
        """
        width = self.b - self.a
        size = np.abs(self.coef)
        omega = self.omega[1:]
        basis = 1.0 / omega + 1.0 / np.sqrt(1.0 + omega * omega)
        terms = size[0] * width + np.sum(size[1:] * basis)
        return EPS * (16.0 + 8.0 * np.sqrt(self.coef.size)) * 2.0 / width * terms

    @property
    def payoff_coef(self):
        """The two payoff columns as an ``N x 2`` complex array."""
        n = self.coef.size
        return (self.payoff_re[: 2 * n] + 1j * self.payoff_im[: 2 * n]).reshape(n, 2)

    @classmethod
    def from_cf(cls, a, b, cf, step=1):
        """Series from ``cf[::step]``, the characteristic function at
        ``k pi / (b - a)``, ``k = 0, 1, ...`` (``step`` picks a coarser grid)."""
        # one compiled pass: Re[cf e^{-i omega a}] (first term halved) and the payoff columns
        a, b = float(a), float(b)
        return cls(a, b, *cos_coefficients(cf, step, a, b))

    def _sums(self, angle):
        return payoff_sums(angle, self)

    def cdf(self, points):
        """``P(R <= point)`` under the series' density on ``[a, b]``.

        ``(2 / (b - a)) (coef_0 (c - a) + sum_k coef_k sin(omega_k (c - a)) / omega_k)``,
        the payoff-free part of the put's coefficients (Fang & Oosterlee
        2008, eq. 22).
        """
        a, b = self.a, self.b
        cut = np.minimum(np.maximum(points, a), b)  # clip, without its wrapper's cost
        sums = self._sums(np.pi * (cut - a) / (b - a))
        return 2.0 / (b - a) * (self.coef[0] * (cut - a) + sums[:, 0].imag)

    def puts(self, log_moneyness, strike):
        """Undiscounted puts ``E[K (1 - e^{x + R})^+]`` with ``x = ln(S_0 / K)``.

        Payoff coefficients from Fang & Oosterlee (2008), eqs. 22-23, with the
        payoff cut at ``R = -x`` clipped to the range.
        """
        x, k = np.asarray(log_moneyness, dtype=float), np.asarray(strike, dtype=float)
        if x.shape != k.shape:
            x, k = np.broadcast_arrays(x, k)
        shape = x.shape
        x, k = np.ascontiguousarray(x.ravel()), np.ascontiguousarray(k.ravel())
        args = (self.a, self.b, self.coef[0], self.payoff_re, self.payoff_im, self.coef.size)
        args = (*args, self.chi_edge)
        work = k.size * self.coef.size * 2
        if work < SPLIT_WORK:  # the common case, without the splitting's overhead
            return cos_puts(*args, x, k).reshape(shape)  # one compiled call: a strike or a strip
        parts, pool = thread_slices(k.size, work, unit=4)  # 4 strikes at a time
        if pool is None:
            return cos_puts(*args, x, k).reshape(shape)
        parts = pool.map(lambda s: cos_puts(*args, x[s], k[s]), parts)
        return np.concatenate(list(parts)).reshape(shape)


def payoff_sums(angle, series):
    """``sum_k payoff_coef[k, p] exp(i k angle[m])`` for the series' two payoff columns."""
    return split_flat_sums(angle, series.payoff_re, series.payoff_im, series.coef.size, 2)


def series_pair(params, maturity, drift, c1, sd, left, right, n):
    """The series on ``[c1 - left sd, c1 + right sd]`` (``n`` terms), on its double (``2 n``),
    and the double's cdf at the range's ends.

    The double's frequencies are taken as ``j h / 2`` with ``h`` the range's
    own spacing, so that its even ones are exactly the range's (``2k (h/2)``
    and ``k h`` round to the same number): the range's values come from the
    cache when a widening check already asked for them (see
    ``certified_puts``), and only the odd ones are computed here.  ``h / 2``
    and the double's own spacing ``pi / (wide_b - wide_a)`` agree to rounding.
    """
    a, b = c1 - left * sd, c1 + right * sd
    cf = np.empty(2 * n, dtype=complex)
    cf[0::2] = range_cf(params, maturity, drift, a, b, n)
    cf[1::2] = cf_values(
        np.arange(1, 2 * n, 2) * (0.5 * (np.pi / (b - a))), params, maturity, drift
    )
    wide = CosSeries.from_cf(c1 - 2.0 * left * sd, c1 + 2.0 * right * sd, cf)
    base = CosSeries.from_cf(a, b, cf, step=2)
    # the doubled range's cdf at the range's ends (the tail masses; no strike in them)
    return base, wide, wide.cdf(np.array([base.a, base.b]))


def cf_on_range(params, maturity, drift, a, b, n):
    """The characteristic function at ``k pi / (b - a)``, ``k = 0 .. n - 1``."""
    return cf_values(np.arange(n) * (np.pi / (b - a)), params, maturity, drift)


def range_cf(params, maturity, drift, a, b, n):
    """:func:`cf_on_range` through the series cache (a pure function of the key)."""
    key = ("cf", params, float(maturity), float(drift), float(a), float(b), n)
    return SERIES.get(key, cf_on_range, params, maturity, drift, a, b, n)


def series_on_range(params, maturity, drift, a, b, n):
    """The series on ``[a, b]`` with ``n`` terms."""
    return CosSeries.from_cf(a, b, range_cf(params, maturity, drift, a, b, n))


class SeriesCache:
    """Bounded memo of COS series, least recently used evicted first.

    It only ever stores what a pure function returned for the key (model,
    maturity, drift ``rate - div_yield``, range, terms), so prices cannot
    depend on what is cached: a column of cells pricing one model and
    maturity at different strikes builds the series once, and the range
    checks, which depend on the strikes, still run on every call.
    """

    def __init__(self, max_bytes):
        self.max_bytes = max_bytes
        self._items = OrderedDict()
        self._lock = threading.Lock()
        self.nbytes = 0

    def __len__(self):
        return len(self._items)

    def clear(self):
        with self._lock:
            self._items.clear()
            self.nbytes = 0

    def get(self, key, make, *args):
        """``make(*args)``, from the cache when ``key`` is in it."""
        with self._lock:
            if key in self._items:
                self._items.move_to_end(key)
                return self._items[key][0]
        value = make(*args)
        size = sum(part.nbytes for part in (value if isinstance(value, tuple) else (value,)))
        with self._lock:
            if key not in self._items and size <= self.max_bytes:
                self._items[key] = (value, size)
                self.nbytes += size
                while self.nbytes > self.max_bytes:
                    _, (_, dropped) = self._items.popitem(last=False)
                    self.nbytes -= dropped
        return value


#: Most bytes of COS series kept between calls (about 60 maturities of the
#: hardest demo model; one series of 2^19 terms is 25 MB).
SERIES_CACHE_BYTES = 64 << 20
SERIES = SeriesCache(SERIES_CACHE_BYTES)


def certified_puts(params, spot, strike, maturity, drift, c1, sd, u_cut, start=(12.0, 12.0)):
    """Undiscounted puts for one maturity with a verified range, or None.

    The range ``[c1 - left sd, c1 + right sd]`` is compared with its double
    (both extents doubled).  It is accepted when

    * the probed prices (lowest, highest and nearest-the-money strike) move
      by at most ``RANGE_TOL x spot`` between the range and its double; and
    * for strikes whose payoff kink ``ln(K / S0)`` lies outside the range,
      where the probes cannot see the tail (the put is 0, or its whole
      payoff, on both ranges alike), the tail mass past that end bounds the
      error: at most ``K P(R < a)`` on the left and ``2 K P(R > b)`` on the
      right (the cosine series folds the outside mass back in), with the
      masses read from the doubled range's density.  Found necessary at
      8 days, vol_of_vol 1.5, v0 1e-4, where a put 28 sd out of the money
      is worth 4e-6 x spot.

    The strip is then priced on the doubled range, unless the rounding of
    its largest strike's put (``CosSeries.put_rounding`` times the strike)
    exceeds the tolerance: the puts of strikes far above the spot are large
    numbers (found at 82,580 x spot, 2.4e-7 off), and the check method takes
    the strip.  Otherwise the end at
    fault is widened by half and the check repeats: heavy left tails under
    negative correlation need far more room than the right tail.  ``start``
    is the first range tried (the previous maturity's answer, since the
    shape of the law changes slowly with maturity).

    The doubled range has twice the width, so its frequencies
    ``k pi / (2 w)`` contain every frequency of the original range at even
    ``k``: one evaluation of the characteristic function serves both.
    Returns ``(puts or None, terms, (left, right))``.
    """
    x = np.log(spot / strike)
    kink = -x
    probe = np.unique([np.argmin(strike), np.argmax(strike), np.argmin(np.abs(x))])
    tol = RANGE_TOL * spot

    def terms(left, right):
        """Terms that take a range of ``left + right`` sd up to frequency ``u_cut``."""
        return int(np.ceil(u_cut * (left + right) * sd / np.pi)) + 2

    def pair(left, right):
        """The series on the range and on its double, or None if too long."""
        n = terms(left, right)
        if 2 * n > MAX_TERMS:
            return None
        key = (params, float(maturity), float(drift), float(c1), float(sd), left, right, n)
        return SERIES.get(key, series_pair, params, maturity, drift, c1, sd, left, right, n)

    def outside_error(ends, a, b):
        """Bounds on the error of the strikes with kinks left of a and right of b."""
        below, up_to = ends
        k_left = strike[kink < a].max(initial=0.0)
        k_right = strike[kink > b].max(initial=0.0)
        return k_left * abs(below), 2.0 * k_right * abs(1.0 - up_to)

    left, right = start
    for _ in range(16):
        series = pair(left, right)
        if series is None:
            break
        base, wide, ends = series
        err_left, err_right = outside_error(ends, base.a, base.b)
        if err_left > tol or err_right > tol:
            left *= 1.5 if err_left > tol else 1.0
            right *= 1.5 if err_right > tol else 1.0
            continue
        # the probes first, the whole strip only once the range is accepted
        # (each strike's sum is computed alone, so the probes' values are the strip's)
        base_probe = base.puts(x[probe], strike[probe])
        if np.max(np.abs(base_probe - wide.puts(x[probe], strike[probe]))) <= tol:
            if wide.put_rounding * strike.max() > tol:
                # the put of a strike far above the spot is a large number
                # whose rounding no wider range reduces: the check method
                break
            return wide.puts(x, strike), wide.omega.size, (left, right)
        # which end is at fault: widen the left alone by half and look again
        n = terms(1.5 * left, right)
        if n > MAX_TERMS:
            break
        a, b = c1 - 1.5 * left * sd, c1 + right * sd
        key = (params, float(maturity), float(drift), float(a), float(b), n)
        series = SERIES.get(key, series_on_range, params, maturity, drift, a, b, n)
        wider = series.puts(x[probe], strike[probe])
        if np.max(np.abs(wider - base_probe)) > tol:
            left = 1.5 * left
        else:
            right = 1.5 * right
    return None, 0, (left, right)
