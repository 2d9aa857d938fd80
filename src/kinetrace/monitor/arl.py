"""Average run length (ARL) of EWMA and tabular CUSUM charts by the Markov-chain approximation.

Observations are independent N(shift, 1) in units of the in-control standard
deviation. The chart statistic's in-control region is cut into ``n_states``
intervals; the transition probabilities between interval midpoints form the
matrix P of the transient states, and the vector of ARLs from each start state
is (I - P)^-1 1 (Brook & Evans 1972).

* EWMA, z_t = lam x_t + (1 - lam) z_{t-1}, z_0 = 0, two-sided limits
  +-L sqrt(lam / (2 - lam)) (asymptotic limits, as in Lucas & Saccucci 1990).
* Tabular CUSUM, C+_t = max(0, C+_{t-1} + x_t - k), signal at C+ > h; the
  zero state is kept as a state of its own. The two-sided ARL of the upper and
  lower schemes together is 1/ARL = 1/ARL+ + 1/ARL- (Lucas & Crosier 1982;
  exact enough for k > 0, where the two sides cannot both be non-zero for long).

:func:`ewma_limit_for_arl` and :func:`cusum_limit_for_arl` solve for the limit
that gives a stated in-control ARL, by Brent's method on the Markov-chain ARL.

References
----------
.. [1] Brook, D., Evans, D. A. (1972). An approach to the probability
   distribution of CUSUM run length. Biometrika 59(3), 539-549.
.. [2] Lucas, J. M., Saccucci, M. S. (1990). Exponentially weighted moving
   average control schemes: properties and enhancements. Technometrics 32(1), 1-12.
.. [3] Lucas, J. M., Crosier, R. B. (1982). Fast initial response for CUSUM
   quality-control schemes. Technometrics 24(3), 199-205.
.. [4] Page, E. S. (1954). Continuous inspection schemes. Biometrika 41, 100-115.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import optimize, stats

from kinetrace.errors import KinetraceError

__all__ = [
    "ewma_arl",
    "cusum_arl",
    "ewma_limit_for_arl",
    "cusum_limit_for_arl",
]


def _check_lambda(lam: float) -> float:
    lam = float(lam)
    if not 0.0 < lam <= 1.0:
        raise KinetraceError(f"EWMA weight lambda must be in (0, 1], got {lam!r}")
    return lam


def ewma_arl(lam: float, limit: float, shift: float = 0.0, *, n_states: int = 301) -> float:
    """ARL of a two-sided EWMA chart with asymptotic limits, by Markov chain.

    Parameters
    ----------
    lam : float
        Weight of the newest observation, 0 < lambda <= 1. [-]
    limit : float
        Width L of the limits in standard deviations of the EWMA statistic. [-]
    shift : float
        Shift of the process mean. [in-control standard deviations]
    n_states : int
        Number of Markov-chain states (odd; more is more accurate).

    Returns
    -------
    float
        Average number of observations to the first signal, starting from z_0 = 0. [-]

    References
    ----------
    .. [1] Brook, D., Evans, D. A. (1972). Biometrika 59(3), 539-549.
    .. [2] Lucas, J. M., Saccucci, M. S. (1990). Technometrics 32(1), 1-12.

    Examples
    --------
    Lucas & Saccucci (1990): lambda = 0.10, L = 2.814 gives ARL0 about 500.

    >>> round(ewma_arl(0.10, 2.814), -1)
    500.0
    """
    lam = _check_lambda(lam)
    if not limit > 0:
        raise KinetraceError(f"EWMA limit L must be positive, got {limit!r}")
    return _ewma_arl(lam, float(limit), float(shift), int(n_states) | 1)


@lru_cache(maxsize=1024)
def _ewma_arl(lam: float, limit: float, shift: float, m: int) -> float:
    h = limit * np.sqrt(lam / (2.0 - lam))
    w = 2.0 * h / m
    c = -h + w * (np.arange(m) + 0.5)
    centre = (1.0 - lam) * c[:, None]
    upper = stats.norm.cdf((c[None, :] + w / 2 - centre) / lam - shift)
    lower = stats.norm.cdf((c[None, :] - w / 2 - centre) / lam - shift)
    p = upper - lower
    arl = np.linalg.solve(np.eye(m) - p, np.ones(m))
    return float(arl[m // 2])


@lru_cache(maxsize=1024)
def _cusum_one_sided(k: float, h: float, shift: float, n_states: int, head_start: float = 0.0) -> float:
    m = int(n_states)
    w = 2.0 * h / (2 * m - 1)  # state 0 is [0, w/2), state i is [(i - 1/2) w, (i + 1/2) w)
    i = np.arange(m)
    d = (i[None, :] - i[:, None]) * w + k - shift  # centre_j - centre_i + k - shift
    p = stats.norm.cdf(d + w / 2) - stats.norm.cdf(d - w / 2)
    p[:, 0] = stats.norm.cdf(w / 2 - i * w + k - shift)
    arl = np.linalg.solve(np.eye(m) - p, np.ones(m))
    return float(arl[min(int(round(head_start / w)), m - 1)])


def cusum_arl(k: float, h: float, shift: float = 0.0, *, two_sided: bool = True, n_states: int = 250,
              head_start: float = 0.0) -> float:
    """ARL of a tabular CUSUM chart, by Markov chain, optionally with a head start.

    With a head start (fast initial response, Lucas & Crosier 1982) both one-sided
    statistics start at ``head_start`` instead of 0; the ARL is read from the
    Markov-chain state that holds it. The two sides are combined by
    1/ARL = 1/ARL+ + 1/ARL-, as without a head start; with a head start this
    overstates the two-sided in-control ARL by a few per cent (both sides start
    away from zero, so they are not independent renewals): k = 0.5, h = 4, head
    start 2 gives 158 here against about 150 by simulation (tests).

    Parameters
    ----------
    k : float
        Reference value (allowance). [in-control standard deviations]
    h : float
        Decision interval. [in-control standard deviations]
    shift : float
        Shift of the process mean. [in-control standard deviations]
    two_sided : bool
        Upper and lower schemes together (default) or the upper one alone.
    n_states : int
        Number of Markov-chain states.
    head_start : float
        C+_0 = C-_0, 0 <= head_start < h; h/2 is the usual choice. [in-control standard deviations]

    Returns
    -------
    float
        Average run length from C_0 = ``head_start``. [-]

    References
    ----------
    .. [1] Brook, D., Evans, D. A. (1972). Biometrika 59(3), 539-549.
    .. [2] Page, E. S. (1954). Biometrika 41, 100-115.
    .. [3] Lucas, J. M., Crosier, R. B. (1982). Technometrics 24(3), 199-205.

    Examples
    --------
    k = 0.5, h = 5: two-sided in-control ARL about 465.

    >>> 460 < cusum_arl(0.5, 5.0) < 470
    True

    A head start of h/2 shortens the run length after a start-up shift:

    >>> cusum_arl(0.5, 5.0, 1.0, head_start=2.5) < cusum_arl(0.5, 5.0, 1.0)
    True
    """
    if not h > 0:
        raise KinetraceError(f"CUSUM decision interval h must be positive, got {h!r}")
    if k < 0:
        raise KinetraceError(f"CUSUM reference value k must be non-negative, got {k!r}")
    if not 0.0 <= head_start < h:
        raise KinetraceError(f"CUSUM head start must be in [0, h = {h:g}), got {head_start!r}")
    k, h, shift, n_states, hs = float(k), float(h), float(shift), int(n_states), float(head_start)
    up = _cusum_one_sided(k, h, shift, n_states, hs)
    if not two_sided:
        return up
    down = _cusum_one_sided(k, h, -shift, n_states, hs)
    return 1.0 / (1.0 / up + 1.0 / down)


def _solve(func, target: float, lo: float, hi: float, name: str) -> float:
    if not target > 1:
        raise KinetraceError(f"target in-control ARL must exceed 1, got {target!r}")
    f_lo, f_hi = func(lo) - target, func(hi) - target
    if f_lo * f_hi > 0:
        raise KinetraceError(f"no {name} in [{lo}, {hi}] gives an in-control ARL of {target}")
    return float(optimize.brentq(lambda x: func(x) - target, lo, hi, xtol=1e-5))


def ewma_limit_for_arl(lam: float, arl0: float, *, n_states: int = 301) -> float:
    """Limit width L of a two-sided EWMA chart that gives the in-control ARL ``arl0``.

    Parameters
    ----------
    lam : float
        EWMA weight. [-]
    arl0 : float
        Wanted in-control average run length. [observations]
    n_states : int
        Markov-chain states.

    Returns
    -------
    float
        L. [standard deviations of the EWMA statistic]

    References
    ----------
    .. [1] Lucas, J. M., Saccucci, M. S. (1990). Technometrics 32(1), 1-12.

    Examples
    --------
    >>> round(ewma_limit_for_arl(0.10, 500.0), 2)
    2.81
    """
    return _ewma_limit(_check_lambda(lam), float(arl0), int(n_states))


@lru_cache(maxsize=256)
def _ewma_limit(lam: float, arl0: float, n_states: int) -> float:
    return _solve(lambda L: ewma_arl(lam, L, n_states=n_states), arl0, 1.0, 5.0, "EWMA limit L")


def cusum_limit_for_arl(k: float, arl0: float, *, two_sided: bool = True, n_states: int = 250) -> float:
    """Decision interval h of a tabular CUSUM that gives the in-control ARL ``arl0``.

    Parameters
    ----------
    k : float
        Reference value. [in-control standard deviations]
    arl0 : float
        Wanted in-control average run length. [observations]
    two_sided, n_states
        As in :func:`cusum_arl`.

    Returns
    -------
    float
        h. [in-control standard deviations]

    References
    ----------
    .. [1] Brook, D., Evans, D. A. (1972). Biometrika 59(3), 539-549.

    Examples
    --------
    >>> round(cusum_limit_for_arl(0.5, 465.0), 1)
    5.0
    """
    return _cusum_limit(float(k), float(arl0), bool(two_sided), int(n_states))


@lru_cache(maxsize=256)
def _cusum_limit(k: float, arl0: float, two_sided: bool, n_states: int) -> float:
    return _solve(lambda h: cusum_arl(k, h, two_sided=two_sided, n_states=n_states), arl0, 0.25, 15.0,
                  "CUSUM decision interval h")
