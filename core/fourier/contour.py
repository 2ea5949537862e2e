"""European prices under Heston by one Fourier integral on a shifted, turned contour.

The second Fourier route, for one price or a short strip (the strikes of one
maturity): Lewis's (2001) single integral with the damping ``alpha`` chosen per
option as Lord & Kahl (2007) do, the contour's far ends turned as Andersen &
Lake (2018) do, and a double-exponential trapezoid whose step is halved until
two levels agree.  Everything per maturity runs in one compiled call
(:func:`rootvar.core.fourier.contour_kernels.contour_cells`); this module validates and unpacks.

It certifies each price to ``TOLERANCE x spot`` or says why not; the caller
then prices that option by the COS route (:func:`rootvar.core.heston_price`).
"""

from __future__ import annotations

import math
import threading
from collections import OrderedDict
from dataclasses import dataclass

import numpy as np

from rootvar.core.fourier.contour_kernels import (
    BRANCH,
    CERTIFIED,
    CFG,
    HEAD_COLS,
    N_SLOTS,
    NO_DECAY,
    NO_STRIP,
    NON_FINITE,
    NOT_CONVERGED,
    ROUNDING,
    ROWS,
    SLOT_FIELDS,
    STRIP_ROWS,
    contour_cells,
    contour_strip,
)
from rootvar.core.params import as_params
from rootvar.core.validation import (
    InputError,
    as_float,
    as_float_array,
    check_choice,
)

__all__ = [
    "CACHE_SIZE",
    "FIRST_CELLS",
    "MAX_STRIKES",
    "MAX_TILT",
    "REASONS",
    "TOLERANCE",
    "ContourDetails",
    "cache_info",
    "clear_cache",
    "contour_prices",
    "strip_table",
]

#: Certified accuracy of each price, x spot (the project's Fourier tolerance).
TOLERANCE = 1e-10
#: Largest angle (radians) by which the contour's far ends are turned.  pi/4 keeps
#: the contour well off the imaginary axis, where the characteristic function's
#: singularities lie; sweeps with pi/8 .. 3pi/8 certified the same cases.
MAX_TILT = math.pi / 4
#: Most strikes per call (one maturity).  The strip mode shares the
#: characteristic function's values among a maturity's strikes, so a whole
#: smile is one call.
MAX_STRIKES = 4096
#: Maturities whose node tables the strip mode keeps (least recently used
#: dropped first).  A table reserves 57 kB per cell (log-strike cells of 0.5
#: or wider) but touches, level by level, only what strikes used: 4 kB per
#: cell at level 3, where most prices certify.
CACHE_SIZE = 32
#: Cells a new maturity's table starts with (it grows when strikes need more).
FIRST_CELLS = 32

#: Why a price was not certified, by the kernel's status code.
REASONS = {
    CERTIFIED: "",
    NO_STRIP: "no admissible contour: the strip of finite moments leaves no room for alpha",
    NON_FINITE: "the integrand was not finite on the contour",
    NOT_CONVERGED: "error estimate above tolerance after the last step halving",
    NO_DECAY: "the integrand had not decayed at the end of the contour",
    ROUNDING: "rounding in the sum exceeds the tolerance (cancellation)",
    BRANCH: "the moment at the chosen alpha is not a finite positive number",
}

_KINDS = ("call", "put")
_MODES = ("strip", "strike")


@dataclass(frozen=True)
class ContourDetails:
    """How each price of :func:`contour_prices` was obtained.

    Built around the kernel's read-only output table (no copies on the hot
    path); every attribute below is computed from it on access.

    Attributes
    ----------
    method : str
        ``"lewis-contour"``.
    alpha : ndarray
        Contour shift per strike: the line ``Im z = -alpha`` (``alpha > 0``
        prices the call, ``alpha < -1`` the put, through their residues).
    angle : ndarray
        Angle (radians) of the contour's far ends to the real axis.
    nodes : ndarray of int
        Per strike, the nodes its sum used (shared nodes in strip mode, each
        counted by every strike that used it), plus, on its own contour, the
        alpha search.
    error_estimate : ndarray
        The quadrature's own error estimate per strike, in price units
        (inf where it stopped before having one).
    certified : ndarray of bool
        ``error_estimate <= TOLERANCE x spot`` and every check passed.
    reason : tuple of str
        Per strike, why it was not certified ("" where it was).
    moment_strip : tuple of float
        ``(w_-, w_+)``: ``E[(S_T / F)^w]`` is finite for ``w_- < w < w_+``;
        an end no contour of the maturity has needed yet is NaN (strikes on
        one side of the forward often need only one).
    route : ndarray of int
        Strip mode: 0 where the strike was priced on its cell's shared
        contour, 1 where on its own contour (the cell's did not certify it).
        Per-strike mode: all 1.
    cf_evaluations : int
        Characteristic-function evaluations this call made (nodes already
        in the cache cost none; the alpha searches included).
    """

    method: str
    table: np.ndarray  # the kernel's rows (ROWS x (n + 1)), read-only

    @property
    def _n(self):
        return self.table.shape[1] - 1

    @property
    def alpha(self) -> np.ndarray:
        return self.table[1, : self._n]

    @property
    def angle(self) -> np.ndarray:
        return self.table[2, : self._n]

    @property
    def nodes(self) -> np.ndarray:
        return self.table[3, : self._n].astype(np.int64)

    @property
    def error_estimate(self) -> np.ndarray:
        return self.table[4, : self._n]

    @property
    def status(self) -> np.ndarray:
        """The kernel's status code per strike (0 = certified; see ``REASONS``)."""
        return self.table[5, : self._n].astype(np.int64)

    @property
    def certified(self) -> np.ndarray:
        return self.status == CERTIFIED

    @property
    def reason(self) -> tuple:
        return tuple(REASONS[int(c)] for c in self.status)

    @property
    def route(self) -> np.ndarray:
        if self.table.shape[0] > ROWS:
            return self.table[ROWS, : self._n].astype(np.int64)
        return np.ones(self._n, np.int64)

    @property
    def cf_evaluations(self) -> int:
        if self.table.shape[0] > ROWS:
            return int(self.table[2, self._n])
        return int(self.table[3, : self._n].sum())

    @property
    def moment_strip(self) -> tuple:
        return float(self.table[0, self._n]), float(self.table[1, self._n])

    @property
    def all_certified(self) -> bool:
        """True when every price is certified."""
        return bool(self.certified.all())


class _Tables:
    """One maturity's node tables for the strip mode (see ``contour_cells``),
    and its config vector (the parameters and maturity set once; spot, rate,
    dividend, kind and tolerance written per call, under ``lock``)."""

    __slots__ = ("cfg", "done", "head", "key", "lock", "tab")

    def __init__(self, cells):
        self.head = np.full((cells + 1, HEAD_COLS), np.nan)
        self.tab = np.empty((cells, N_SLOTS, SLOT_FIELDS))
        self.done = np.zeros((cells, N_SLOTS), np.uint8)
        self.cfg = np.zeros(CFG)
        self.lock = threading.Lock()
        self.key = None

    def start(self, key):
        """Set the config vector for ``key`` (params, maturity, side, tilt cap);
        the kernel wipes the cells and nodes on its first call (``head[0, 3]``)."""
        kappa, theta, sigma, rho, v0, maturity, side, tilt = key
        self.key = key
        self.head[0, 3] = 0.0
        cfg = self.cfg
        cfg[0], cfg[1], cfg[2], cfg[3], cfg[4] = kappa, theta, sigma, rho, v0
        cfg[6], cfg[11], cfg[12] = maturity, tilt, side
        return self

    def grow(self, more):
        """Room for ``more`` further cells; the filled ones are kept."""
        cells = self.tab.shape[0]
        new = cells + max(more, cells)
        head = np.full((new + 1, HEAD_COLS), np.nan)
        head[: cells + 1] = self.head
        tab = np.empty((new, N_SLOTS, SLOT_FIELDS))
        tab[:cells] = self.tab
        done = np.zeros((new, N_SLOTS), np.uint8)
        done[:cells] = self.done
        self.head, self.tab, self.done = head, tab, done

    @property
    def cells(self):
        return int(np.count_nonzero(~np.isnan(self.head[1:, 0])))


_CACHE: OrderedDict = OrderedDict()
_CACHE_LOCK = threading.Lock()
#: Tables of dropped maturities, kept for reuse: allocating (and later freeing)
#: a table costs more than pricing a few strikes.
_SPARE: list = []


def clear_cache():
    """Drop every cached maturity's node tables."""
    with _CACHE_LOCK:
        _CACHE.clear()
        _SPARE.clear()


def _new_tables(key):
    """Tables for ``key``: a spare one wiped, or a new one."""
    while _SPARE:
        spare = _SPARE.pop()
        if spare.lock.acquire(blocking=False):  # no call still uses it
            try:
                return spare.start(key)
            finally:
                spare.lock.release()
    return _Tables(FIRST_CELLS).start(key)


def _tables(key):
    """The cached tables for ``key``, made (and the oldest dropped) if absent."""
    with _CACHE_LOCK:
        entry = _CACHE.get(key)
        if entry is None:
            entry = _CACHE[key] = _new_tables(key)
            if len(_CACHE) > CACHE_SIZE:
                _, old = _CACHE.popitem(last=False)
                if len(_SPARE) < 2 and old.tab.shape[0] == FIRST_CELLS:
                    _SPARE.append(old)
        else:
            _CACHE.move_to_end(key)
    return entry


def cache_info():
    """``[(key, cells), ...]``: each kept maturity's cache key (the parameters
    ``kappa, theta, vol_of_vol, rho, v0``, the maturity, ``side`` and
    ``MAX_TILT``) and the cells in use in its table, least recently used first."""
    with _CACHE_LOCK:
        return [(key, tables.cells) for key, tables in _CACHE.items()]


def strip_table(
    params, spot, strike, maturity, rate, div_yield, put, cache=True, side=0, tol=None, out=None
):
    """The strip-mode kernel's output for already validated arguments.

    ``strike`` a contiguous 1-d float64 array of at most ``MAX_STRIKES``
    positive strikes, the other arguments floats as :func:`contour_prices`
    takes them, ``put`` a bool.  Rows: price (NaN where not certified),
    alpha, angle, nodes, error estimate, status, route; the last column holds
    the strip's ends and this call's characteristic-function evaluations.
    Written into ``out`` (``STRIP_ROWS x (n + 1)`` floats) when given, else
    into a new read-only array.  The lean entry of
    :func:`rootvar.core.heston_price_details`, which has validated its
    arguments once already.
    """
    p = params
    n = strike.size
    given = out is not None
    out = np.empty((STRIP_ROWS, n + 1)) if out is None else out
    key = (p.kappa, p.theta, p.vol_of_vol, p.rho, p.v0, maturity, side, MAX_TILT)
    while True:
        tables = _tables(key) if cache else _Tables(FIRST_CELLS).start(key)
        with tables.lock:
            # a table dropped and taken for another maturity between the
            # look-up and the lock is looked up again
            if tables.key != key:
                continue
            cfg = tables.cfg
            cfg[5], cfg[7], cfg[8], cfg[9] = spot, rate, div_yield, 1.0 if put else 0.0
            cfg[10] = TOLERANCE if tol is None else tol
            evals = 0.0
            while True:
                contour_cells(cfg, strike, tables.head, tables.tab, tables.done, out)
                evals += out[2, n]
                if out[3, n] == 0.0:
                    break
                tables.grow(int(out[3, n]))
            out[2, n] = evals
        break
    if not given:
        out.flags.writeable = False
    return out


def contour_prices(
    params,
    spot,
    strikes,
    maturity,
    rate=0.0,
    div_yield=0.0,
    kind="call",
    *,
    mode="strip",
    cache=True,
    side=0,
    tol=None,
):
    """European call or put prices at one maturity by Lewis's integral on a turned contour.

    Parameters
    ----------
    params : HestonParams
        Model parameters.
    spot : float
        Spot price, > 0.
    strikes : float or array_like
        Strike(s), > 0; one maturity, at most ``MAX_STRIKES`` of them.
    maturity : float
        Years, > 0.
    rate, div_yield : float
        Continuously compounded rate and dividend yield, decimals per year.
    kind : {"call", "put"}
        Option type.
    mode : {"strip", "strike"}
        ``"strip"`` (default): log-strikes are binned in cells of a maturity's
        width (0.5, or half a standard deviation of ``ln S_T`` if wider,
        crossed with four bands of the contour's asymptotic angle);
        the strikes of a cell share one contour, chosen for the cell's centre,
        and its characteristic-function values.  ``"strike"``: a contour per
        strike, chosen for that strike.
    cache : bool
        Strip mode: keep the maturity's node tables (keyed by the parameters,
        the maturity and ``side``; rate and dividend do not enter the
        characteristic function of ``ln(S_T / F)``), so that further strikes
        at that maturity reuse them.  At most ``CACHE_SIZE`` maturities are
        kept.  Prices do not depend on the cache: cells and node values are
        fixed by the parameters and the maturity.
    side : {0, 1, -1}
        For checks: force the piece of the alpha search (+1: alpha > 0, -1:
        alpha < -1; 0, the default, chooses), to price on a second,
        independent contour (another integrand and residue).
    tol : float, optional
        For checks: the tolerance, x spot (default ``TOLERANCE``).

    Returns
    -------
    prices : float or ndarray
        Prices in the spot's currency; NaN where not certified (never an
        uncertified number).  A float for a single strike.
    details : ContourDetails
        Per strike: alpha, angle, evaluations, error estimate, certified flag
        and reason.

    Raises
    ------
    InputError
        A ``ValueError`` naming the argument, the rule and the value.

    Notes
    -----
    With ``F = S e^{(r-q)T}``, ``k = ln(K/F)``, ``psi(u) = E[e^{iu ln(S_T/F)}]``
    (Albrecher et al. 2007 form) and ``g(z) = e^{-izk} psi(z - i) / (-z (z - i))``,

    .. math::
        \\frac{C}{e^{-rT}F} = R(\\alpha) + \\frac{1}{\\pi}\\,\\mathrm{Re}\\int_0^\\infty
        g(z(v))\\,z'(v)\\,dv,\\qquad
        z(v) = -i\\alpha + v + i\\tan\\varphi\\,\\big(\\sqrt{v^2 + c^2} - c\\big),

    with the residues ``R = 0`` for ``alpha > 0``, ``1`` for ``-1 < alpha < 0``
    and ``1 - e^k`` for ``alpha < -1`` (Lord & Kahl 2007, eq. 3.6); at
    ``phi = 0`` and ``alpha = -1/2`` this is Lewis's (2001) formula.

    * **Strip.**  ``E[(S_T/F)^w]`` is finite for ``w_- < w < w_+``, found by
      bisection on the moment explosion time of Andersen & Piterbarg (2007).
    * **alpha** minimises ``|g(-i alpha)| = e^{-alpha k} M(alpha + 1) /
      |alpha (alpha + 1)|`` (Lord & Kahl 2007), by golden section in
      ``ln|alpha - pole|``, on the out-of-the-money side's piece (``alpha > 0``
      for ``K >= F``, ``alpha < -1`` below: the integral is then that
      out-of-the-money price, with no residue to cancel) and at most half way
      from the pole to the strip's end (past it the strip's end is the nearest
      singularity and the trapezoid slows).  Where that leaves the contour
      within 0.05 of a singularity (a very narrow strip), Lewis's
      ``alpha = -1/2`` is used instead: it is always at least 1/2 from every one.
    * **Contour.**  Far from the origin ``ln psi(u) ~ -u C (sqrt(1 - rho^2) +
      i rho)``, ``C = (v0 + kappa theta T) / sigma``; turning the ends by
      ``phi = -arg(C sqrt(1-rho^2) + i (C rho + k))`` (capped at ``MAX_TILT``)
      turns the oscillation ``e^{-iuk}`` into decay (Andersen & Lake 2018).
      The hyperbola keeps the integrand even in ``v``, so the trapezoid stays
      exponentially accurate; it stays flat up to
      ``c = max(1 / sqrt(E int v dt), 2 C / E int v dt)``, where ``ln psi``
      leaves its Gaussian start (a Gaussian turned by ``pi/4`` does not decay).
      The region swept between the line and the contour must hold no
      singularity; those of the Heston characteristic function lie on the
      imaginary axis (checked by an argument-principle scan of the
      Riccati denominator for five parameter sets at 0.05, 1 and 10 years; a
      scan, not a proof: see the methods page of the documentation),
      which the contour meets only at ``-i alpha``.
    * **Quadrature.**  ``v = s sinh((pi/2) sinh tau)`` (sinh-sinh double
      exponential), ``s = min(1 / sqrt(E int v dt), delta)`` with ``delta``
      the distance from the contour to the nearest singularity (poles at
      ``alpha``, ``alpha + 1``, strip ends); trapezoid in ``tau`` at
      ``h = 1/2, 1/4, ...`` (each level reuses the previous nodes), ending
      where a node's weighted modulus is below ``tol / 100`` and falling.
      The estimate at step ``h`` is ``|T_h - T_{2h}|`` (plus
      ``|T_{2h} - T_{4h}|`` unless the differences fell fourfold), plus the
      tail and a rounding bound that includes the characteristic function's
      own cancellation (``kappa theta / sigma^2`` times terms of order
      ``sigma^2``); certified from ``h = 1/16`` on when it is at most
      ``TOLERANCE x spot``.  In the double-exponential regime the error of
      ``T_h`` is about the square of that of ``T_{2h}``, so the difference
      bounds it with room to spare (tested against a second contour).

    References
    ----------
    Lewis, A. L. (2001). A simple option formula for general jump-diffusion
    and other exponential Lévy processes. Envision Financial Systems.
    Lord, R. & Kahl, C. (2007). Optimal Fourier inversion in semi-analytical
    option pricing. Journal of Computational Finance 10(4), 1-30.
    Andersen, L. B. G. & Lake, M. (2018). Robust high-precision option
    pricing by Fourier transforms: contour deformations and double-exponential
    quadrature. SSRN 3231626.
    Andersen, L. B. G. & Piterbarg, V. V. (2007). Moment explosions in
    stochastic volatility models. Finance and Stochastics 11(1), 29-50.
    Albrecher, H., Mayer, P., Schoutens, W. & Tistaert, J. (2007). The little
    Heston trap. Wilmott Magazine, January 2007, 83-92.
    Takahasi, H. & Mori, M. (1974). Double exponential formulas for numerical
    integration. Publ. RIMS Kyoto Univ. 9, 721-741.

    Examples
    --------
    >>> from rootvar.core import HestonParams
    >>> fo = HestonParams(v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)
    >>> price, details = contour_prices(fo, 100.0, 100.0, 1.0)
    >>> round(price, 8), bool(details.certified[0])
    (5.78515543, True)
    """
    as_params(params)
    check_choice("kind", kind, _KINDS)
    check_choice("mode", mode, _MODES)
    spot = as_float("spot", spot, ">0")
    maturity = as_float("maturity", maturity, ">0")
    rate = as_float("rate", rate)
    div_yield = as_float("div_yield", div_yield)
    given = as_float_array("strikes", strikes, ">0")
    if given.ndim > 1:
        raise InputError(f"strikes must be a number or a 1-d array, got shape {given.shape}")
    strike = np.ascontiguousarray(np.atleast_1d(given))
    if not 0 < strike.size <= MAX_STRIKES:
        raise InputError(f"strikes must hold 1 to {MAX_STRIKES} strikes, got {strike.size}")
    if side not in (-1, 0, 1):
        raise InputError(f"side must be one of -1, 0, 1, got {side!r}")
    tol = TOLERANCE if tol is None else as_float("tol", tol, ">0")
    put = kind == "put"
    if mode == "strike":
        p = params
        model = np.array([p.kappa, p.theta, p.vol_of_vol, p.rho, p.v0])
        out = np.empty((ROWS, strike.size + 1))
        contour_strip(model, spot, strike, maturity, rate, div_yield, put, tol, MAX_TILT, side, out)
        out.flags.writeable = False
    else:
        out = strip_table(params, spot, strike, maturity, rate, div_yield, put, cache, side, tol)
    details = ContourDetails("lewis-contour", out)
    return (float(out[0, 0]) if given.ndim == 0 else out[0, : strike.size].copy()), details
