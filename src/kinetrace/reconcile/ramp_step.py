"""A step or a ramp in the mean of a standardised residual: generalised likelihood ratio test.

For residuals ``u_j`` that are independent N(0, 1) while nothing is wrong, two alternatives
with an unknown onset m are tested at each new observation n:

* **step**: ``E u_j = nu`` for j >= m; ``2 ln Lambda = (sum_{m..n} u_j)^2 / (n - m + 1)``;
* **ramp** (drift): ``E u_j = beta (t_j - tau_m)``, tau_m the time of the last observation
  before the onset; ``2 ln Lambda = (sum x_j u_j)^2 / sum x_j^2`` with ``x_j = t_j - tau_m``.

The statistic is the larger of the two, maximised over onsets in a window of the last
``window`` observations (a window-limited GLR, Basseville & Nikiforov 1993, Sec. 2.4.3 and
Ch. 8 for the linear-trend alternative; Lai 1995). Both alternatives have one parameter and
one onset, so their likelihoods compare directly: the one that explains the residuals
better names the fault a step or a drift. Sums over every window come from cumulative sums
(no loop over time).

The in-control average run length of the test with ``window = 28`` and ``threshold =
GLR_THRESHOLD`` is :data:`GLR_ARL0` observations, estimated by simulation on independent
N(0, 1) residuals (tests/reconcile/test_ramp_step.py repeats the estimate).

References
----------
.. [1] Basseville, M., Nikiforov, I. V. (1993). Detection of Abrupt Changes: Theory and
   Application. Prentice Hall. Sec. 2.4 (GLR), Ch. 8 (changes in regression models).
.. [2] Lai, T. L. (1995). Sequential changepoint detection in quality control and dynamical
   systems. J. R. Statist. Soc. B 57(4), 613-658 (window-limited GLR).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Onsets considered at each observation (14 days of lab samples at one every 12 h). [observations]
GLR_WINDOW = 28
#: Decision threshold on 2 ln(likelihood ratio). [-]
GLR_THRESHOLD = 16.0
#: In-control average run length of (GLR_WINDOW, GLR_THRESHOLD) on N(0, 1) residuals, by
#: simulation (200 runs of 30000 observations: 2620, standard error about 190; about 3.5 years of
#: lab samples at two a day). [observations]
GLR_ARL0 = 2600.0


@dataclass(frozen=True)
class GlrStatistic:
    """Window-limited GLR of a step and of a ramp at every observation.

    Attributes
    ----------
    step, ramp : ndarray (n,)
        Largest 2 ln(likelihood ratio) over the onsets in the window. [-]
    step_onset, ramp_onset : ndarray of int (n,)
        Index of the onset at the maximum. [-]
    step_size : ndarray (n,)
        Estimated step ``nu`` at the maximum. [u units]
    ramp_rate : ndarray (n,)
        Estimated slope ``beta`` at the maximum. [u units / t units]
    """

    step: np.ndarray
    ramp: np.ndarray
    step_onset: np.ndarray
    ramp_onset: np.ndarray
    step_size: np.ndarray
    ramp_rate: np.ndarray

    @property
    def value(self) -> np.ndarray:
        """``max(step, ramp)``. [-]"""
        return np.maximum(self.step, self.ramp)


def glr_step_ramp(u, t, *, window: int = GLR_WINDOW, start: int = 0, ends=None) -> GlrStatistic:
    """Window-limited GLR statistics of a step and a ramp in the mean of ``u`` (module docstring).

    Parameters
    ----------
    u : array_like (n,)
        Standardised residuals, N(0, 1) in control; NaN where missing (adds nothing). [-]
    t : array_like (n,)
        Observation times, increasing. [any time unit, e.g. d]
    window : int
        Number of onsets considered (the last ``window`` observations). [-]
    start : int
        No onset before this index (a restart after an alarm). [-]
    ends : array_like of int, optional
        Only these observations' statistics (default: every one). The work and memory are
        ``len(ends) x window``: a whole-record test at its last observation asks for
        ``ends=[n - 1], window=n`` (linear, where every end would be quadratic in n).

    Returns
    -------
    GlrStatistic
        One entry per end (every observation by default); zero statistics before ``start``.

    References
    ----------
    .. [1] Basseville & Nikiforov (1993), Sec. 2.4.3.

    Examples
    --------
    >>> rng = np.random.default_rng(1)
    >>> t = np.arange(60) * 0.5
    >>> u = rng.standard_normal(60) + np.where(t > 15, 1.0 * (t - 15), 0.0)
    >>> g = glr_step_ramp(u, t)
    >>> bool(g.ramp[-1] > g.step[-1]), round(float(g.ramp_rate[-1]), 1)
    (True, 1.0)
    >>> last = glr_step_ramp(u, t, window=60, ends=[59])
    >>> bool(last.ramp[0] == glr_step_ramp(u, t, window=60).ramp[59])
    True
    """
    u = np.asarray(u, dtype=float)
    t = np.asarray(t, dtype=float)
    n = u.size
    ok = np.isfinite(u)
    u0 = np.where(ok, u, 0.0)
    w = ok.astype(float)
    dt0 = float(np.median(np.diff(t))) if n > 1 else 1.0

    def csum(x):
        return np.concatenate([[0.0], np.cumsum(x)])

    c_w, c_u, c_t, c_tt, c_tu = csum(w), csum(u0), csum(w * t), csum(w * t * t), csum(u0 * t)
    end = (np.arange(n) if ends is None else np.asarray(ends, dtype=int))[:, None]
    onset = end - np.arange(window)[None, :]
    valid = onset >= max(start, 0)
    m = np.clip(onset, 0, n - 1)
    tau = np.where(m > 0, t[np.maximum(m - 1, 0)], t[0] - dt0)

    def seg(c):
        return c[end + 1] - c[m]

    cnt, su, st, stt, stu = seg(c_w), seg(c_u), seg(c_t), seg(c_tt), seg(c_tu)
    with np.errstate(divide="ignore", invalid="ignore"):
        g_step = np.where(valid & (cnt > 0), su * su / cnt, 0.0)
        sxu = stu - tau * su
        sxx = stt - 2.0 * tau * st + cnt * tau * tau
        g_ramp = np.where(valid & (sxx > 0), sxu * sxu / sxx, 0.0)
        size = np.where(cnt > 0, su / cnt, 0.0)
        rate = np.where(sxx > 0, sxu / sxx, 0.0)
    i_s = np.argmax(g_step, axis=1)
    i_r = np.argmax(g_ramp, axis=1)
    rows = np.arange(end.shape[0])
    return GlrStatistic(g_step[rows, i_s], g_ramp[rows, i_r], onset[rows, i_s], onset[rows, i_r],
                        size[rows, i_s], rate[rows, i_r])


def first_alarm(stat: GlrStatistic, threshold: float = GLR_THRESHOLD, start: int = 0) -> int | None:
    """Index of the first observation at or after ``start`` whose statistic exceeds ``threshold``. [-]"""
    hit = np.flatnonzero(stat.value[start:] > threshold)
    return int(start + hit[0]) if hit.size else None


__all__ = ["GLR_ARL0", "GLR_THRESHOLD", "GLR_WINDOW", "GlrStatistic", "first_alarm", "glr_step_ramp"]
