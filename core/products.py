"""Option contracts as small frozen, validated values.

A product is plain data: what is paid, on what, and when.  Pricers (the
finite-difference solver of :mod:`rootvar.core.pde.solver`, and later Monte Carlo
exotics) read these fields; they hold no pricing code.  New contracts are
added as further frozen dataclasses beside these, each validating itself on
construction.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rootvar.core.validation import InputError, as_float, as_float_array, check_choice

__all__ = [
    "AVERAGES",
    "DIRECTIONS",
    "KINDS",
    "KNOCKS",
    "AsianOption",
    "BarrierOption",
    "DigitalOption",
    "EuropeanOption",
    "ForwardStartOption",
]

KINDS = ("call", "put")
DIRECTIONS = ("up", "down")
KNOCKS = ("out", "in")
AVERAGES = ("arithmetic", "geometric")


def _vanilla_payoff(kind: str, strike: float, spot_at_expiry):
    s = np.asarray(spot_at_expiry, dtype=float)
    return np.maximum(s - strike, 0.0) if kind == "call" else np.maximum(strike - s, 0.0)


@dataclass(frozen=True)
class EuropeanOption:
    """A European call or put.

    Parameters
    ----------
    kind : {"call", "put"}
    strike : float
        Strike, > 0, in the currency of the spot.
    maturity : float
        Time to expiry in years, > 0.
    """

    kind: str
    strike: float
    maturity: float

    def __post_init__(self) -> None:
        check_choice("kind", self.kind, KINDS)
        object.__setattr__(self, "strike", as_float("strike", self.strike, ">0"))
        object.__setattr__(self, "maturity", as_float("maturity", self.maturity, ">0"))

    def payoff(self, spot_at_expiry):
        """``max(S - K, 0)`` for a call, ``max(K - S, 0)`` for a put."""
        return _vanilla_payoff(self.kind, self.strike, spot_at_expiry)


@dataclass(frozen=True)
class BarrierOption:
    """A single-barrier call or put, knock-out or knock-in, with an optional rebate.

    Parameters
    ----------
    kind : {"call", "put"}
    strike : float
        Strike, > 0.
    maturity : float
        Time to expiry in years, > 0.
    barrier : float
        Barrier level, > 0.
    direction : {"up", "down"}
        ``"down"``: the barrier is hit when the spot is at or below it;
        ``"up"``: at or above it.
    knock : {"out", "in"}
        ``"out"``: the option dies at the hit; ``"in"``: it comes alive at
        the hit and is worthless if the barrier is never hit.
    rebate : float
        Cash amount, >= 0.  A knock-out pays it at the hit (at the monitoring
        date of the hit when monitoring is discrete); a knock-in pays it at
        expiry when the barrier was never hit.
    monitoring : sequence of float or None
        ``None`` (default): the barrier is watched continuously.  Otherwise
        the monitoring dates in years from today, each in ``(0, maturity]``;
        they are sorted and stored as a tuple, repeats refused.

    Notes
    -----
    Whether the spot is already on the knocked side of the barrier is a fact
    about the market, not the contract, so the pricer checks it.
    """

    kind: str
    strike: float
    maturity: float
    barrier: float
    direction: str
    knock: str
    rebate: float = 0.0
    monitoring: tuple | None = None

    def __post_init__(self) -> None:
        check_choice("kind", self.kind, KINDS)
        check_choice("direction", self.direction, DIRECTIONS)
        check_choice("knock", self.knock, KNOCKS)
        for name in ("strike", "maturity", "barrier"):
            object.__setattr__(self, name, as_float(name, getattr(self, name), ">0"))
        object.__setattr__(self, "rebate", as_float("rebate", self.rebate, ">=0"))
        if self.monitoring is not None:
            dates = np.ravel(as_float_array("monitoring", self.monitoring, ">0"))
            if dates.size == 0:
                raise InputError("monitoring must hold at least one date, got an empty list")
            late = dates[dates > self.maturity * (1.0 + 1e-12)]
            if late.size:
                raise InputError(
                    f"monitoring dates must lie in (0, maturity={self.maturity!r}], "
                    f"got {float(late[0])!r}"
                )
            dates = np.sort(np.minimum(dates, self.maturity))
            if np.any(np.diff(dates) <= 0):
                twice = dates[1:][np.diff(dates) <= 0][0]
                raise InputError(f"monitoring dates must differ, got {float(twice)!r} twice")
            object.__setattr__(self, "monitoring", tuple(float(d) for d in dates))

    @property
    def continuous(self) -> bool:
        """True when the barrier is watched continuously."""
        return self.monitoring is None

    def vanilla(self) -> EuropeanOption:
        """The European option with the same kind, strike and maturity."""
        return EuropeanOption(self.kind, self.strike, self.maturity)

    def is_hit(self, spot):
        """True where ``spot`` is at or beyond the barrier (the knock side)."""
        s = np.asarray(spot, dtype=float)
        return s <= self.barrier if self.direction == "down" else s >= self.barrier

    def payoff(self, spot_at_expiry):
        """The vanilla payoff, for the path that was never hit (knock-out)."""
        return _vanilla_payoff(self.kind, self.strike, spot_at_expiry)


@dataclass(frozen=True)
class AsianOption:
    """A discrete average-price call or put.

    Pays ``max(A - K, 0)`` (call) or ``max(K - A, 0)`` (put) at the last
    fixing date, ``A`` the average of the spot over the fixing dates.

    Parameters
    ----------
    kind : {"call", "put"}
    strike : float
        Strike, > 0, in the currency of the spot.
    fixings : sequence of float
        Fixing dates in years from today, each > 0; sorted and stored as a
        tuple, repeats refused.  The last one is the expiry.
    average : {"arithmetic", "geometric"}
        ``"arithmetic"``: ``A = (1/N) sum S_j``; ``"geometric"``:
        ``A = (prod S_j)^(1/N)``.
    """

    kind: str
    strike: float
    fixings: tuple
    average: str = "arithmetic"

    def __post_init__(self) -> None:
        check_choice("kind", self.kind, KINDS)
        check_choice("average", self.average, AVERAGES)
        object.__setattr__(self, "strike", as_float("strike", self.strike, ">0"))
        dates = np.ravel(as_float_array("fixings", self.fixings, ">0"))
        if dates.size == 0:
            raise InputError("fixings must hold at least one date, got an empty list")
        dates = np.sort(dates)
        if np.any(np.diff(dates) <= 0):
            twice = dates[1:][np.diff(dates) <= 0][0]
            raise InputError(f"fixings must differ, got {float(twice)!r} twice")
        object.__setattr__(self, "fixings", tuple(float(d) for d in dates))

    @property
    def maturity(self) -> float:
        """The last fixing date (years), when the option pays."""
        return self.fixings[-1]

    def average_of(self, spots_at_fixings):
        """The average over the last axis (one column per fixing date)."""
        s = np.asarray(spots_at_fixings, dtype=float)
        if self.average == "geometric":
            return np.exp(np.mean(np.log(s), axis=-1))
        return np.mean(s, axis=-1)

    def payoff(self, spots_at_fixings):
        """The payoff on the spots at the fixing dates (last axis)."""
        return _vanilla_payoff(self.kind, self.strike, self.average_of(spots_at_fixings))


@dataclass(frozen=True)
class ForwardStartOption:
    """A call or put whose strike is set at a future date as a share of the spot then.

    Pays ``max(S_T - k S_start, 0)`` (call) or ``max(k S_start - S_T, 0)``
    (put) at ``maturity``.

    Parameters
    ----------
    kind : {"call", "put"}
    start : float
        Date the strike is set, in years from today, >= 0 (0 is a European
        with strike ``k S_0``).
    maturity : float
        Expiry in years, > start.
    strike_share : float
        ``k`` > 0: the strike as a share of the spot at ``start`` (1.0 at the
        money).
    """

    kind: str
    start: float
    maturity: float
    strike_share: float = 1.0

    def __post_init__(self) -> None:
        check_choice("kind", self.kind, KINDS)
        object.__setattr__(self, "start", as_float("start", self.start, ">=0"))
        object.__setattr__(self, "maturity", as_float("maturity", self.maturity, ">0"))
        object.__setattr__(self, "strike_share", as_float("strike_share", self.strike_share, ">0"))
        if self.maturity <= self.start:
            raise InputError(f"maturity must be > start={self.start!r}, got {self.maturity!r}")

    def payoff(self, spot_at_start, spot_at_expiry):
        """The payoff given the spot at the start date and at expiry."""
        strike = self.strike_share * np.asarray(spot_at_start, dtype=float)
        s = np.asarray(spot_at_expiry, dtype=float)
        return np.maximum(s - strike, 0.0) if self.kind == "call" else np.maximum(strike - s, 0.0)


@dataclass(frozen=True)
class DigitalOption:
    """A cash-or-nothing digital call or put.

    Pays ``cash`` at ``maturity`` when the spot then is above the strike
    (call) or below it (put), and nothing otherwise.

    Parameters
    ----------
    kind : {"call", "put"}
    strike : float
        Strike, > 0, in the currency of the spot.
    maturity : float
        Time to expiry in years, > 0.
    cash : float
        Amount paid, > 0, in the currency of the spot (default 1).

    Notes
    -----
    A spot exactly at the strike pays nothing under either kind, so a call
    and a put on the same strike pay ``cash`` together on every other path.
    """

    kind: str
    strike: float
    maturity: float
    cash: float = 1.0

    def __post_init__(self) -> None:
        check_choice("kind", self.kind, KINDS)
        for name in ("strike", "maturity", "cash"):
            object.__setattr__(self, name, as_float(name, getattr(self, name), ">0"))

    def payoff(self, spot_at_expiry):
        """``cash`` where the spot at expiry is beyond the strike, else 0."""
        s = np.asarray(spot_at_expiry, dtype=float)
        won = s > self.strike if self.kind == "call" else s < self.strike
        return np.where(won, self.cash, 0.0)
