"""Plain numpy reference of the Monte Carlo engine, the oracle for the compiled kernels.

This is the vectorised numpy engine the kernels replaced (each scheme a pure
step on arrays of paths, blocks vectorised together), kept short and
unoptimised in spirit: same draws, same formulas, same order of operations.
Used by tests/test_mc_kernels.py and as the baseline of ``python -m
benchmarks monte_carlo``.
"""

import numpy as np
from scipy.special import ndtr

from rootvar.core.montecarlo.european import BLOCK

_LAST_UNIFORM = 1.0 - 2.0**-53


class Accumulator:
    """Per-path running sums of one chunk of paths."""

    def __init__(self, n: int, v0: float):
        self.v0 = v0
        self.sum_v = np.zeros(n)  # trapezoid schemes: sum of v_1 .. v_n
        self.int_var = np.zeros(n)  # Euler schemes: running I
        self.mart = np.zeros(n)  # Euler schemes: running M
        self.adj = np.zeros(n)  # martingale correction A
        self.touched = np.zeros(n, dtype=bool)  # variance at or below zero at some step
        self.negative_updates = 0  # Euler: updates negative before the fix
        self.adj_failed = 0  # QE-M: path-steps where the correction does not exist


def _finish_euler(p, dt, steps, acc, v_final):
    return acc.int_var, acc.mart


def _finish_trapezoid(p, dt, steps, acc, v_final):
    int_var = dt * (acc.sum_v + 0.5 * (p.v0 - v_final))
    mart = (v_final - p.v0 - p.kappa * p.theta * dt * steps + p.kappa * int_var) / p.vol_of_vol
    return int_var, mart


def _euler(f1, f2, f3):
    """Euler step in the unified form of Lord, Koekkoek & van Dijk (2010), eq. (7):
    ``v~' = f1(v~) + kappa dt (theta - f2(v~)) + sigma sqrt(f3(v~) dt) Z``, and the
    variance seen by the log-price is ``f3(v~)``."""

    def make(p, dt):
        kdt, sq_dt = p.kappa * dt, np.sqrt(dt)
        sq = p.vol_of_vol * sq_dt

        def step(v, draws, acc):
            z = draws.normal()
            out = f3(v)
            root = np.sqrt(out)
            root_z = root * z
            new = f1(v) + kdt * (p.theta - f2(v)) + sq * root_z
            below = new <= 0
            acc.negative_updates += int(np.count_nonzero(new < 0))
            acc.touched |= below
            acc.int_var += out * dt
            acc.mart += sq_dt * root_z
            return new

        return step

    return make


def _pos(x):
    return np.maximum(x, 0.0)


def _same(x):
    return x


def _make_qe(p, dt, martingale=False, psi_c=1.5):
    """Andersen's (2008) quadratic-exponential step, optionally martingale-corrected.

    With ``m`` and ``s^2`` the exact conditional mean and variance of
    ``v(t + dt)`` and ``psi = s^2 / m^2``, the step works with ``r = 2 / psi``
    (Andersen, eqs. 17-29, rewritten to save divisions):

    * quadratic branch (``psi <= psi_c``): ``v' = a (b + Z)^2`` with
      ``b^2 = r - 1 + sqrt(r (r - 1))`` and ``a = m / (1 + b^2)``;
    * exponential branch (``psi > psi_c``): ``v' = 0`` with probability
      ``p = (psi - 1) / (psi + 1)``, else ``ln((1 - p) / (1 - U)) / beta`` with
      ``beta = (1 - p) / m``; with ``q = (1 + psi) / 2 = 1 / r + 1/2`` this
      is ``v' = m q max(0, -ln(q (1 - U)))``.
    """
    e = np.exp(-p.kappa * dt)
    s2 = p.vol_of_vol**2
    half_c1 = 0.5 * s2 * e * (1.0 - e) / p.kappa  # s^2 / 2 = half_c1 v + half_c2
    half_c2 = 0.25 * p.theta * s2 * (1.0 - e) ** 2 / p.kappa
    m_const = p.theta * (1.0 - e)
    r_c = 2.0 / psi_c
    rho, sig = p.rho, p.vol_of_vol
    # Andersen (2008), eq. (33) with gamma1 = gamma2 = 1/2
    k0 = -rho * p.kappa * p.theta * dt / sig
    k1 = 0.5 * dt * (p.kappa * rho / sig - 0.5) - rho / sig
    k2 = 0.5 * dt * (p.kappa * rho / sig - 0.5) + rho / sig
    k3 = k4 = 0.5 * dt * (1.0 - rho * rho)
    big_a = k2 + 0.5 * k4

    work: dict[int, list[np.ndarray]] = {}

    def step(v, draws, acc):
        # One normal for the quadratic branch and one uniform for the
        # exponential branch per path and step (Andersen uses one uniform for
        # both; the branch is fixed by v before the draw, so the law is the
        # same, and a fresh uniform is cheaper here than Phi(Z)).  Both are
        # drawn on every step, used or not: whether a block consumes draws
        # must not depend on the other blocks vectorised with it.
        z = draws.normal()
        u = draws.uniform()
        # Both branches are evaluated on every path with in-place operations
        # on reused buffers, then the exponential one is copied where
        # psi > psi_c: this loop is the hot path of every QE run; whole-array
        # passes cost about what gathering the exponential paths does and
        # keep the step free of branches (measured in an interleaved A/B run).
        if v.size not in work:
            work[v.size] = [np.empty(v.size) for _ in range(7)] + [np.empty(v.size, bool)]
        m, r, b2, q, expo, out0, out1, hot = work[v.size]
        new = out1 if v is out0 else out0  # never overwrite the input variance
        np.multiply(v, e, out=m)
        m += m_const
        np.multiply(v, half_c1, out=q)
        q += half_c2
        np.multiply(m, m, out=r)
        r /= q  # r = 2 / psi
        np.less(r, r_c, out=hot)
        # quadratic branch, psi clipped at psi_c so that it is defined
        np.maximum(r, r_c, out=b2)
        np.subtract(b2, 1.0, out=q)
        b2 *= q
        np.sqrt(b2, out=b2)
        b2 += q  # b^2
        np.sqrt(b2, out=new)
        new += z
        new *= new
        new *= m
        b2 += 1.0  # now 1 + b^2
        new /= b2
        # exponential branch
        np.divide(1.0, r, out=q)
        q += 0.5
        np.subtract(1.0, u, out=expo)
        expo *= q  # 1 - U is in (0, 1], also for mirrored draws
        np.log(expo, out=expo)
        np.negative(expo, out=expo)
        np.maximum(expo, 0.0, out=expo)
        expo *= q
        expo *= m
        np.copyto(new, expo, where=hot)
        acc.touched |= new <= 0.0
        if martingale:
            # Andersen (2008), eqs. (36)-(37): K0* replaces K0 so that
            # E[exp(dx)] = exp((r - q) dt) exactly under the QE law.
            a = m / b2
            with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
                one = 1.0 - 2.0 * big_a * a
                k0_star = -big_a * (b2 - 1.0) * a / one + 0.5 * np.log(one)
                ok = one > 0
                idx = np.flatnonzero(hot)
                if idx.size:
                    qh = q[idx]
                    pz, beta = 1.0 - 1.0 / qh, 1.0 / (qh * m[idx])
                    k0_star[idx] = -np.log(pz + beta * (1.0 - pz) / (beta - big_a))
                    ok[idx] = beta > big_a
            k0_star -= (k1 + 0.5 * k3) * v
            ok &= np.isfinite(k0_star)
            # where the correction does not exist the step stays uncorrected
            acc.adj += np.where(ok, k0_star - k0, 0.0)
            acc.adj_failed += int(np.count_nonzero(~ok))
        acc.sum_v += new
        return new

    return step


def _make_qe_martingale(p, dt):
    return _make_qe(p, dt, martingale=True)


def _make_exact(p, dt):
    """Exact noncentral chi-square draw of v(t + dt) given v(t) (Broadie & Kaya 2006)."""
    e = np.exp(-p.kappa * dt)
    c = p.vol_of_vol**2 * (1.0 - e) / (4.0 * p.kappa)
    df = 4.0 * p.kappa * p.theta / p.vol_of_vol**2

    def step(v, draws, acc):
        new = c * draws.noncentral_chisquare(df, v * (e / c))
        acc.touched |= new <= 0
        acc.sum_v += new
        return new

    return step


_STEPS = {
    "euler_absorb": (_euler(_pos, _pos, _pos), _finish_euler),
    "euler_reflect": (_euler(np.abs, np.abs, np.abs), _finish_euler),
    "euler_partial": (_euler(_same, _same, _pos), _finish_euler),
    "euler_full": (_euler(_same, _pos, _pos), _finish_euler),
    "qe": (_make_qe, _finish_trapezoid),
    "qe_martingale": (_make_qe_martingale, _finish_trapezoid),
    "exact_variance": (_make_exact, _finish_trapezoid),
}


class _Draws:
    """Random numbers for a chunk of blocks, each block from its own stream.

    ``normal`` and ``uniform`` fill reused buffers: a caller must be done
    with one draw before asking for the next of the same kind.
    """

    def __init__(self, generators, sizes, antithetic):
        self.gens, self.sizes, self.anti = generators, sizes, antithetic
        self.n = int(sum(sizes))
        self._normal = np.empty(self.n)
        self._uniform = np.empty(self.n)

    def _fill(self, out, draw, mirror):
        """Each block's draws in place; with antithetic, the second half mirrors the first."""
        start = 0
        for gen, size in zip(self.gens, self.sizes, strict=True):
            if self.anti:
                half = (size + 1) // 2
                first = out[start : start + half]
                draw(gen, first)
                mirror(first[: size - half], out=out[start + half : start + size])
            else:
                draw(gen, out[start : start + size])
            start += size
        return out

    def normal(self):
        return self._fill(self._normal, lambda g, out: g.standard_normal(out=out), np.negative)

    def uniform(self):
        # numpy's doubles are k 2^-53, k = 0 .. 2^53 - 1; the mirror takes k to
        # 2^53 - 1 - k exactly, so mirrored draws stay in [0, 1) like the
        # originals and 1 - U is never 0
        return self._fill(
            self._uniform,
            lambda g, out: g.random(out=out),
            lambda u, out: np.subtract(_LAST_UNIFORM, u, out=out),
        )

    def noncentral_chisquare(self, df, nonc):
        out = np.empty(self.n)
        start = 0
        for gen, size in zip(self.gens, self.sizes, strict=True):
            out[start : start + size] = gen.noncentral_chisquare(df, nonc[start : start + size])
            start += size
        return out


def _conditional_prices(p, spot, strikes, t, rate, div, kind, int_var, mart, adj):
    """Black-Scholes given the variance path (Willard 1997; Romano & Touzi 1997)."""
    rho = p.rho
    log_fwd = np.log(spot) + (rate - div) * t + adj + rho * mart - 0.5 * rho * rho * int_var
    total = np.sqrt(np.maximum((1.0 - rho * rho) * int_var, 0.0))[:, None]
    fwd = np.exp(log_fwd)[:, None]
    k = strikes[None, :]
    with np.errstate(divide="ignore", invalid="ignore"):
        d1 = (log_fwd[:, None] - np.log(k)) / total + 0.5 * total
    d2 = d1 - total
    sign = 1.0 if kind == "call" else -1.0
    value = sign * (fwd * ndtr(sign * d1) - k * ndtr(sign * d2))
    intrinsic = np.maximum(sign * (fwd - k), 0.0)
    return np.exp(-rate * t) * np.where(total > 0, value, intrinsic)


def _terminal_prices(p, spot, strikes, t, rate, div, kind, int_var, mart, adj, z):
    rho = p.rho
    log_s = (
        np.log(spot)
        + (rate - div) * t
        + adj
        - 0.5 * int_var
        + rho * mart
        + np.sqrt(np.maximum((1.0 - rho * rho) * int_var, 0.0)) * z
    )
    s_t = np.exp(log_s)[:, None]
    sign = 1.0 if kind == "call" else -1.0
    return np.exp(-rate * t) * np.maximum(sign * (s_t - strikes[None, :]), 0.0)


def reference_paths(scheme, p, dt, steps, gens, sizes, antithetic):
    """Every step of the blocks ``gens`` vectorised together.

    Returns ``(draws, v, int_var, mart, acc)``; ``draws`` can still give the
    terminal normal.
    """
    make, finish = _STEPS[scheme]
    step = make(p, dt)
    draws = _Draws(gens, sizes, antithetic)
    v = np.full(draws.n, p.v0)
    acc = Accumulator(draws.n, p.v0)
    for _ in range(steps):
        v = step(v, draws, acc)
    int_var, mart = finish(p, dt, steps, acc, v)
    return draws, v, int_var, mart, acc


def reference_price(
    p, spot, strikes, t, rate, div, kind, scheme, steps, paths, seed, antithetic, conditional
):
    """Price and standard error per strike, as the numpy engine computed them."""
    n_blocks = -(-paths // BLOCK)
    sizes = [BLOCK] * (n_blocks - 1) + [paths - BLOCK * (n_blocks - 1)]
    children = np.random.SeedSequence(seed).spawn(n_blocks)
    gens = [np.random.Generator(np.random.SFC64(c)) for c in children]
    draws, _, int_var, mart, acc = reference_paths(
        scheme, p, t / steps, steps, gens, sizes, antithetic
    )
    args = (p, spot, np.asarray(strikes, dtype=float), t, rate, div, kind, int_var, mart, acc.adj)
    if conditional:
        values = _conditional_prices(*args)
    else:
        values = _terminal_prices(*args, draws.normal())
    if antithetic:  # pair averages within each block
        parts, start = [], 0
        for size in sizes:
            block = values[start : start + size]
            parts.append(0.5 * (block[: size // 2] + block[size // 2 :]))
            start += size
        values = np.concatenate(parts)
    n = values.shape[0]
    return values.mean(axis=0), values.std(axis=0, ddof=1) / np.sqrt(n)
