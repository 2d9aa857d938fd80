"""Linear Gaussian state-space model with a scalar observation: Kalman filter and
Rauch-Tung-Striebel smoother.

Model (Durbin & Koopman 2012, Ch. 4, with time-varying system matrices)::

    y_t = Z a_t + eps_t,            eps_t ~ N(0, H_t)          (scalar observation)
    a_{t+1} = T_t a_t + eta_t,      eta_t ~ N(0, Q_t)

with ``a_0 ~ N(a0, P0)``. A missing observation (NaN) leaves the prediction step only. The
recursion over t is sequential by nature; it is a compact numpy loop over the observation
times (in kinetrace: the laboratory samples, a few per day, never the minute readings).

References
----------
.. [1] Durbin, J., Koopman, S. J. (2012). Time Series Analysis by State Space Methods, 2nd ed.
   Oxford University Press. Ch. 2 (local level model), Ch. 4 (filter and smoother).
.. [2] Rauch, H. E., Tung, F., Striebel, C. T. (1965). Maximum likelihood estimates of linear
   dynamic systems. AIAA J. 3(8), 1445-1450.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class FilterResult:
    """Filter and smoother output for ``n`` time steps and ``m`` states.

    Attributes
    ----------
    predicted, predicted_cov : ndarray (n, m), (n, m, m)
        ``a_{t|t-1}`` and ``P_{t|t-1}``, before ``y_t`` is seen. [state units]
    filtered, filtered_cov : ndarray (n, m), (n, m, m)
        ``a_{t|t}`` and ``P_{t|t}``, after ``y_t``. [state units]
    smoothed, smoothed_cov : ndarray (n, m), (n, m, m)
        ``a_{t|n}`` and ``P_{t|n}``, given every observation. [state units]
    innovation, innovation_var : ndarray (n,)
        ``v_t = y_t - Z a_{t|t-1}`` and its variance ``F_t`` (NaN where y is missing). [y units]
    gain : ndarray (n, m)
        Kalman gain ``K_t = P_{t|t-1} Z' / F_t`` (0 where y is missing). [state units / y units]
    """

    predicted: np.ndarray
    predicted_cov: np.ndarray
    filtered: np.ndarray
    filtered_cov: np.ndarray
    smoothed: np.ndarray
    smoothed_cov: np.ndarray
    innovation: np.ndarray
    innovation_var: np.ndarray
    gain: np.ndarray

    @property
    def standardized_innovation(self) -> np.ndarray:
        """``v_t / sqrt(F_t)``: independent N(0, 1) when the model is right (Durbin & Koopman 2012,
        Sec. 2.12). [-]"""
        return self.innovation / np.sqrt(self.innovation_var)


def kalman_smoother(y, design, transition, state_cov, obs_var, initial_state, initial_cov) -> FilterResult:
    """Kalman filter and Rauch-Tung-Striebel smoother of a scalar-observation model.

    Parameters
    ----------
    y : array_like (n,)
        Observations; NaN where missing. [y units]
    design : array_like (m,)
        Observation vector Z. [y units / state units]
    transition : array_like (m, m) or (n, m, m)
        T_t, from step t to t+1 (the last one is not used). [-]
    state_cov : array_like (m, m) or (n, m, m)
        Q_t, state disturbance covariance from t to t+1. [state units^2]
    obs_var : float or array_like (n,)
        H_t, observation noise variance. [y units^2]
    initial_state, initial_cov : array_like (m,), (m, m)
        Mean and covariance of the first state a_1 (before y_1). [state units], [state units^2]

    Returns
    -------
    FilterResult

    References
    ----------
    .. [1] Durbin & Koopman (2012), Sec. 4.3 (filter), Sec. 4.4 (smoother).
    .. [2] Rauch, Tung & Striebel (1965).

    Examples
    --------
    Local level model with unit variances (q = 1): the gain settles at (sqrt(5) - 1) / 2.

    >>> r = kalman_smoother(np.zeros(30), [1.0], [[1.0]], [[1.0]], 1.0, [0.0], [[1e6]])
    >>> round(float(r.gain[-1, 0]), 6)
    0.618034
    """
    y = np.asarray(y, dtype=float)
    n = y.size
    z = np.asarray(design, dtype=float).ravel()
    m = z.size
    tt = np.broadcast_to(np.asarray(transition, dtype=float), (n, m, m))
    qq = np.broadcast_to(np.asarray(state_cov, dtype=float), (n, m, m))
    hh = np.broadcast_to(np.asarray(obs_var, dtype=float), (n,))
    a_pred = np.empty((n, m))
    p_pred = np.empty((n, m, m))
    a_filt = np.empty((n, m))
    p_filt = np.empty((n, m, m))
    v = np.full(n, np.nan)
    f = np.full(n, np.nan)
    k = np.zeros((n, m))
    a = np.asarray(initial_state, dtype=float).reshape(m)
    p = np.asarray(initial_cov, dtype=float).reshape(m, m)
    for t in range(n):   # sequential recursion over the observation times (see module docstring)
        a_pred[t], p_pred[t] = a, p
        if np.isfinite(y[t]):
            pz = p @ z
            f[t] = float(z @ pz + hh[t])
            v[t] = y[t] - float(z @ a)
            k[t] = pz / f[t]
            a = a + k[t] * v[t]
            p = p - np.outer(k[t], pz)
            p = 0.5 * (p + p.T)
        a_filt[t], p_filt[t] = a, p
        a = tt[t] @ a
        p = tt[t] @ p @ tt[t].T + qq[t]
    # Rauch-Tung-Striebel backward pass: a_t|n = a_t|t + J_t (a_t+1|n - a_t+1|t), J_t = P_t|t T' P_t+1|t^-1
    a_s = a_filt.copy()
    p_s = p_filt.copy()
    for t in range(n - 2, -1, -1):
        j = np.linalg.solve(p_pred[t + 1].T, (p_filt[t] @ tt[t].T).T).T
        a_s[t] = a_filt[t] + j @ (a_s[t + 1] - a_pred[t + 1])
        p_s[t] = p_filt[t] + j @ (p_s[t + 1] - p_pred[t + 1]) @ j.T
        p_s[t] = 0.5 * (p_s[t] + p_s[t].T)
    return FilterResult(a_pred, p_pred, a_filt, p_filt, a_s, p_s, v, f, k)


def local_level_gain(q: float) -> float:
    """Steady-state Kalman gain of the local level model with signal-to-noise ratio q.

    ``P / sigma_eps^2 = (q + sqrt(q^2 + 4 q)) / 2`` and ``K = P / (P + sigma_eps^2)`` for the
    prediction variance P (Durbin & Koopman 2012, Sec. 2.11).

    Parameters
    ----------
    q : float
        sigma_eta^2 / sigma_eps^2. [-]

    Returns
    -------
    float
        Steady-state gain K. [-]

    >>> round(local_level_gain(1.0), 6)
    0.618034
    """
    p = 0.5 * (q + np.sqrt(q * q + 4.0 * q))
    return float(p / (p + 1.0))


__all__ = ["FilterResult", "kalman_smoother", "local_level_gain"]
