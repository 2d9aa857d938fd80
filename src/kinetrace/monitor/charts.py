"""Drift detection: EWMA and two-sided tabular CUSUM charts with change-point and size estimates.

The series is standardised with an in-control mean and standard deviation
(given, or estimated from a reference stretch: mean, and sigma = mean moving
range / d2 with d2 = 1.128 for ranges of two). Chart limits are chosen for a
stated in-control average run length (ARL0) with the Markov-chain ARL of
:mod:`kinetrace.monitor.arl`. After a signal the chart restarts from zero at
the next observation, so a long series can yield several alarms.

EWMA limits are by default the exact ones, +-L sigma_z(i) with
sigma_z(i)^2 = lam/(2 - lam) [1 - (1 - lam)^(2i)] for the i-th observation since the
(re)start (Montgomery 2009, sec. 9.2), which are narrower than the asymptotic
+-L sqrt(lam/(2 - lam)) for the first observations; ``limits="asymptotic"`` keeps the
latter. A fast initial response (``fir``) narrows them further at the start by the
factor 1 - (1 - f)^(1 + a (i - 1)) (Steiner 1999). The tabular CUSUM takes a head
start C_0 = ``head_start`` (h/2 is usual) after the start and after every restart
(Lucas & Crosier 1982); its reported ARL0 is the one of the chart with the head start.

Estimates carried by each :class:`~kinetrace.monitor.alarms.Alarm`:

* CUSUM onset: the first observation after the statistic was last zero; size
  mu0 + k + C_t / N_t (upper side, mirror for the lower) with N_t the number of
  observations since that zero (Montgomery, sec. 9.1.2).
* EWMA onset: the maximum-likelihood change point of a step in the mean of
  independent normal observations, tau = argmax_t (T - t)(xbar_{t+1..T} - mu0)^2
  (Samuel, Pignatiello & Calvin 1998); size xbar_{tau+1..T} - mu0.

The ARL arithmetic assumes independent observations; hourly plant data are
often autocorrelated, which shortens the real in-control run length. Charting
residuals of a fitted trend reduces this.

Both statistics (in :mod:`kinetrace.monitor.chart_statistics`) are computed for
many series at once (axis 0 is time): the EWMA with a linear filter, the CUSUM with the closed form of Lindley's
recursion, C_t = S_t - min(0, min_{s<=t} S_s) with S the running sum of
(x - k) started at C_0.

References
----------
.. [1] Page, E. S. (1954). Continuous inspection schemes. Biometrika 41, 100-115.
.. [2] Lucas, J. M., Saccucci, M. S. (1990). Technometrics 32(1), 1-12.
.. [3] Samuel, T. R., Pignatiello, J. J., Calvin, J. A. (1998). Identifying the
   time of a step change with X-bar control charts. Quality Engineering 10(3), 521-527.
.. [4] Montgomery, D. C. (2009). Introduction to Statistical Quality Control, 6th ed.
   Wiley, sec. 6.4 (moving range, d2) and ch. 9 (CUSUM and EWMA).
.. [5] Lindley, D. V. (1952). The theory of queues with a single server. Proc.
   Cambridge Philos. Soc. 48, 277-289.
.. [6] Alwan, L. C., Roberts, H. V. (1988). Time-series modeling for statistical
   process control. J. Business & Economic Statistics 6(1), 87-95.
.. [7] Steiner, S. H. (1999). EWMA control charts with time-varying control limits
   and fast initial response. J. Quality Technology 31(1), 75-86.
.. [8] Lucas, J. M., Crosier, R. B. (1982). Fast initial response for CUSUM
   quality-control schemes: give your CUSUM a head start. Technometrics 24(3), 199-205.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.monitor._common import float_values, restart_positions, utc_index
from kinetrace.monitor.alarms import Alarm, span, when
from kinetrace.monitor.arl import cusum_arl, cusum_limit_for_arl, ewma_arl, ewma_limit_for_arl
from kinetrace.monitor.chart_statistics import cusum_statistic, ewma_limits, ewma_statistic, list_ewma_limit_methods

__all__ = [
    "ChartResult",
    "ar1_innovations",
    "ewma_statistic",
    "ewma_limits",
    "list_ewma_limit_methods",
    "cusum_statistic",
    "in_control_estimates",
    "ewma_alarms",
    "cusum_alarms",
    "detect_drift",
    "list_drift_methods",
]

D2_RANGE_OF_TWO = 1.128  # Montgomery (2009), Appendix Table VI, n = 2


def in_control_estimates(values, reference=None) -> tuple[float, float]:
    """In-control mean and standard deviation of a series.

    Parameters
    ----------
    values : array_like or Series
        Observations. [unit of the series]
    reference : slice, boolean mask, (start, end) times, or None
        Stretch taken as in control; default the first quarter of the
        observations (at least 10).

    Returns
    -------
    (mean, sigma) : tuple of float
        Mean and sigma = mean moving range / 1.128. [unit of the series]

    References
    ----------
    .. [1] Montgomery, D. C. (2009). Introduction to Statistical Quality Control,
       6th ed., sec. 6.4 (individuals chart, moving range).

    Examples
    --------
    >>> in_control_estimates([1.0, 2.0, 1.0, 2.0, 1.0, 2.0, 1.0, 2.0, 1.0, 2.0])
    (1.5, 0.8865248226950355)
    """
    if isinstance(reference, tuple) and isinstance(values, pd.Series):
        ref = values.loc[reference[0]:reference[1]]
    elif reference is None:
        v = float_values(values, "values")
        ref = v[: max(10, v.size // 4)]
    else:
        ref = values[reference] if not isinstance(values, pd.Series) else values.iloc[reference] \
            if isinstance(reference, slice) else values[np.asarray(reference, dtype=bool)]
    r = float_values(ref, "reference")
    r = r[np.isfinite(r)]
    if r.size < 5:
        raise DataQualityError(f"in-control reference has {r.size} usable points; need at least 5")
    mr = np.abs(np.diff(r))
    sigma = float(mr.mean() / D2_RANGE_OF_TWO)
    if not sigma > 0:
        raise DataQualityError("in-control reference has no variation (moving range zero); give sigma")
    return float(r.mean()), sigma


def ar1_innovations(values: pd.Series, *, max_gap: int = 1, restarts=()) -> tuple[pd.Series, float]:
    """Standardised one-step-ahead innovations of an AR(1) model, for charting autocorrelated data.

    e_t = (x_t - m) - phi (x_{t-1} - m), with m the mean and phi the lag-1
    autocorrelation (Yule-Walker) over pairs of consecutive observations; the
    innovations are divided by their standard deviation. Charting the innovations
    instead of the raw values restores the independence the ARL tables assume.

    Parameters
    ----------
    values : Series
        Observations on a regular UTC grid. [unit of the series] NaN breaks the chain.
    max_gap : int
        Largest index step (in grid rows) still counted as consecutive.
    restarts : sequence of timestamps
        Known events (a configured catalyst change): the first observation at or after one has
        no predecessor (its innovation is NaN), so the chain does not run across it. [UTC]

    Returns
    -------
    (innovations, phi) : tuple of Series [-] and float [-]
        Innovations (NaN where the previous observation is missing) and phi.

    References
    ----------
    .. [1] Alwan, L. C., Roberts, H. V. (1988). J. Business & Economic Statistics 6(1), 87-95.
    .. [2] Montgomery, D. C. (2009). Introduction to Statistical Quality Control, 6th ed., sec. 10.4.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> rng = np.random.default_rng(0)
    >>> e = rng.normal(size=20000)
    >>> x = np.empty_like(e); x[0] = e[0]
    >>> for i in range(1, e.size): x[i] = 0.8 * x[i - 1] + e[i]
    >>> t = pd.date_range("2026-01-01", periods=e.size, freq="h", tz="UTC")
    >>> inn, phi = ar1_innovations(pd.Series(x, index=t))
    >>> round(phi, 2), round(float(inn.std()), 2)
    (0.8, 1.0)
    """
    if not isinstance(values, pd.Series):
        raise KinetraceError("values must be a pandas Series with a UTC DatetimeIndex")
    utc_index(values, "values")
    v = values.to_numpy(dtype=float, na_value=np.nan)
    m = np.nanmean(v)
    d = v - m
    prev = np.r_[np.nan, d[:-1]]
    cut = restart_positions(values.index, restarts)
    prev[cut] = np.nan                                  # no predecessor across a known event
    if max_gap > 1:
        seg = np.searchsorted(cut, np.arange(v.size), side="right")
        prev = pd.Series(prev).groupby(seg).ffill(limit=max_gap - 1).to_numpy()
    pair = np.isfinite(d) & np.isfinite(prev)
    if pair.sum() < 10:
        raise DataQualityError(f"need at least 10 pairs of consecutive observations for AR(1), got {int(pair.sum())}")
    phi = float(np.sum(d[pair] * prev[pair]) / np.sum(d[np.isfinite(d)] ** 2))
    e = np.where(pair, d - phi * prev, np.nan)
    sd = float(np.nanstd(e, ddof=1))
    if not sd > 0:
        raise DataQualityError("AR(1) innovations have no variation")
    return pd.Series(e / sd, index=values.index, name=values.name), phi


@dataclass(frozen=True)
class ChartResult:
    """A drift chart run over one series (see :func:`ewma_alarms`, :func:`cusum_alarms`).

    Attributes
    ----------
    method : str
        ``ewma`` or ``cusum``.
    signal : str
        Name of the series.
    alarms : list of Alarm
    statistic : DataFrame
        Chart statistic per used observation (``z`` or ``upper``/``lower``), [sigma],
        index the observation times.
    settings : dict
        mean, sigma [unit of the series]; lam and L, or k and h [sigma]; arl0 [observations].
    n_skipped : int
        Observations left out because they were NaN.
    """

    method: str
    signal: str
    alarms: list[Alarm]
    statistic: pd.DataFrame = field(repr=False)
    settings: dict
    n_skipped: int


def _prepare(values, mean, sigma, reference, name):
    if not isinstance(values, pd.Series):
        raise KinetraceError(f"{name}: values must be a pandas Series with a UTC DatetimeIndex")
    idx = utc_index(values, name)
    v = values.to_numpy(dtype=float, na_value=np.nan)
    if mean is None or sigma is None:
        m_est, s_est = in_control_estimates(pd.Series(v, index=idx), reference)
        mean = m_est if mean is None else mean
        sigma = s_est if sigma is None else sigma
    if not (np.isfinite(sigma) and sigma > 0):
        raise KinetraceError(f"{name}: sigma must be a positive number, got {sigma!r}")
    ok = np.isfinite(v)
    if ok.sum() < 2:
        raise DataQualityError(f"{name}: fewer than 2 usable observations ({int((~ok).sum())} NaN)")
    return idx[ok], (v[ok] - mean) / sigma, float(mean), float(sigma), int((~ok).sum())


def _segment_ends(idx: pd.DatetimeIndex, restarts, n: int) -> np.ndarray:
    """Positions where a chart starts afresh because of a known event, and ``n``. [-]"""
    return np.r_[restart_positions(idx, restarts), n]


def _mle_change_point(x: np.ndarray, end: int) -> int:
    """Index of the first changed observation in x[0..end] (step in mean, mu0 = 0)."""
    seg = x[: end + 1]
    tail_sum = np.cumsum(seg[::-1])[::-1]  # sum of seg[t..end]
    count = np.arange(seg.size, 0, -1)
    return int(np.argmax(tail_sum**2 / count))


def ewma_alarms(
    values: pd.Series,
    *,
    lam: float = 0.1,
    limit: float | None = None,
    arl0: float = 370.0,
    mean: float | None = None,
    sigma: float | None = None,
    reference=None,
    name: str = "activity",
    limits: str = "exact",
    fir: float | None = None,
    restarts=(),
) -> ChartResult:
    """Two-sided EWMA chart of a series, with change-point and size estimates for each alarm.

    Parameters
    ----------
    values : Series
        Observations with a UTC DatetimeIndex. [unit of the series] NaN rows are skipped and counted.
    lam : float
        EWMA weight. [-]
    limit : float, optional
        Limit width L [sigma of the EWMA]; default solved for ``arl0``.
    arl0 : float
        In-control average run length the limits are set for [observations];
        recomputed for the report when ``limit`` is given.
    mean, sigma : float, optional
        In-control mean and standard deviation [unit of the series]; default
        estimated from ``reference`` (see :func:`in_control_estimates`).
    reference : optional
        In-control stretch for the estimates.
    name : str
        Name of the series in the alarm texts.
    limits : {"exact", "asymptotic"}
        Time-varying exact limits (default) or the asymptotic ones (see :func:`ewma_limits`);
        they start again after each restart. ``L`` is solved for ``arl0`` with the
        asymptotic limits (Markov chain), so the exact limits give a slightly shorter ARL0.
    fir : float, optional
        Fast initial response: fraction of the limits at the first observation after
        each (re)start, e.g. 0.5 (Steiner 1999). [-] It raises the false-alarm rate at
        the start (lambda = 0.1, L = 2.814, f = 0.5: an alarm within 400 in-control
        observations in 67 % of simulated runs instead of 55 %); give a wider ``limit``
        to keep the in-control run length.
    restarts : sequence of timestamps
        Known events (a configured catalyst change): the chart starts afresh at the first
        observation at or after each, as it does after a signal, instead of signalling on the
        event. [UTC]

    Returns
    -------
    ChartResult
        ``statistic`` also holds the half-width of the limits in force (column ``limit``).

    References
    ----------
    .. [1] Lucas, J. M., Saccucci, M. S. (1990). Technometrics 32(1), 1-12.
    .. [2] Samuel, T. R., Pignatiello, J. J., Calvin, J. A. (1998). Quality
       Engineering 10(3), 521-527.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> t = pd.date_range("2026-11-01", periods=200, freq="h", tz="UTC")
    >>> x = pd.Series(np.r_[np.zeros(100), np.full(100, -1.5)], index=t)
    >>> res = ewma_alarms(x, mean=0.0, sigma=1.0, arl0=500.0)
    >>> a = res.alarms[0]
    >>> a.direction, str(a.onset), round(a.size, 2)
    ('down', '2026-11-05 04:00:00+00:00', -1.5)
    """
    if limit is None:
        limit = ewma_limit_for_arl(lam, arl0)
    else:  # report the in-control ARL the given limit really has
        arl0 = ewma_arl(lam, limit)
    idx, x, mu, sd, skipped = _prepare(values, mean, sigma, reference, name)
    half = ewma_limits(x.size, lam, limit, method=limits, fir=fir)  # from each (re)start
    z_all, lim_all = np.empty_like(x), np.empty_like(x)
    alarms: list[Alarm] = []
    start = 0
    ends = _segment_ends(idx, restarts, x.size)
    while start < x.size:
        end = int(ends[np.searchsorted(ends, start, side="right")])     # the next restart (or the end)
        z = ewma_statistic(x[start:end], lam)
        hz_run = half[: z.size]
        hit = np.flatnonzero(np.abs(z) > hz_run)
        stop = end if hit.size == 0 else start + hit[0] + 1
        z_all[start:stop] = z[: stop - start]
        lim_all[start:stop] = hz_run[: stop - start]
        if hit.size == 0:
            start = stop
            continue
        d = hit[0]
        hz = float(hz_run[d])
        seg = x[start:end]
        tau = _mle_change_point(seg, d)
        shift = float(seg[tau : d + 1].mean())
        direction = "up" if z[d] > 0 else "down"
        onset, detected = idx[start + tau], idx[start + d]
        text = (
            f"EWMA of {name} (lambda = {lam:g}) went {'above' if direction == 'up' else 'below'} its "
            f"limit of {hz:.3g} sigma at {when(detected)}. The most likely start of the change is {when(onset)}, "
            f"{span(onset, detected)} earlier; since then the mean is {shift * sd:+.3g} ({shift:+.2f} sigma) "
            f"from the in-control mean {mu:.4g}. Limits set for an in-control average run length of "
            f"{arl0:.0f} observations (L = {limit:.3f})."
        )
        alarms.append(Alarm(name, "ewma", direction, onset, detected, shift * sd, shift, float(z[d]), hz, text))
        start = stop
    stat = pd.DataFrame({"z": z_all, "limit": lim_all}, index=idx)
    settings = {"mean": mu, "sigma": sd, "lam": float(lam), "L": float(limit),
                "limit": float(limit * np.sqrt(lam / (2.0 - lam))), "limits": limits, "fir": fir,
                "arl0": float(arl0)}
    return ChartResult("ewma", name, alarms, stat, settings, skipped)


def cusum_alarms(
    values: pd.Series,
    *,
    shift: float = 1.0,
    k: float | None = None,
    h: float | None = None,
    arl0: float = 370.0,
    mean: float | None = None,
    sigma: float | None = None,
    reference=None,
    name: str = "activity",
    head_start: float = 0.0,
    restarts=(),
) -> ChartResult:
    """Two-sided tabular CUSUM of a series, with onset and size estimates for each alarm.

    Parameters
    ----------
    values : Series
        Observations with a UTC DatetimeIndex. [unit of the series] NaN rows are skipped and counted.
    shift : float
        Shift the chart is tuned to detect; k defaults to shift / 2. [sigma]
    k, h : float, optional
        Reference value and decision interval [sigma]; h defaults to the value
        giving ``arl0`` (two-sided, Markov chain).
    arl0 : float
        In-control average run length [observations]; ignored (and recomputed
        for the report) when ``h`` is given.
    mean, sigma, reference, name
        As in :func:`ewma_alarms`.
    head_start : float
        Fast initial response: C+ and C- start at this value after the start and after
        every restart, 0 <= head_start < h; h/2 is usual (Lucas & Crosier 1982). h is not
        changed by it; the reported ARL0 is that of the chart with the head start. [sigma]
    restarts : sequence of timestamps
        As in :func:`ewma_alarms`: the chart starts afresh (with its head start) at each. [UTC]

    Returns
    -------
    ChartResult

    References
    ----------
    .. [1] Page, E. S. (1954). Biometrika 41, 100-115.
    .. [2] Montgomery, D. C. (2009). Introduction to Statistical Quality Control, 6th ed., sec. 9.1.
    .. [3] Lucas, J. M., Crosier, R. B. (1982). Technometrics 24(3), 199-205.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> t = pd.date_range("2026-11-01", periods=200, freq="h", tz="UTC")
    >>> x = pd.Series(np.r_[np.zeros(100), np.full(100, -1.0)], index=t)
    >>> a = cusum_alarms(x, mean=0.0, sigma=1.0, k=0.5, h=5.0).alarms[0]
    >>> a.direction, str(a.onset), a.size
    ('down', '2026-11-05 04:00:00+00:00', -1.0)
    """
    k = shift / 2.0 if k is None else float(k)
    if h is None:
        h = cusum_limit_for_arl(k, arl0)
    else:  # report the in-control ARL the given interval really has
        arl0 = cusum_arl(k, h)
    head_start = float(head_start)
    if head_start:
        arl0 = cusum_arl(k, h, head_start=head_start)  # raises unless 0 <= head_start < h
    idx, x, mu, sd, skipped = _prepare(values, mean, sigma, reference, name)
    up_all, dn_all = np.empty_like(x), np.empty_like(x)
    alarms: list[Alarm] = []
    start = 0
    ends = _segment_ends(idx, restarts, x.size)
    while start < x.size:
        end = int(ends[np.searchsorted(ends, start, side="right")])     # the next restart (or the end)
        up, dn = cusum_statistic(x[start:end], k, start_upper=head_start, start_lower=head_start)
        hit = np.flatnonzero((up > h) | (dn > h))
        stop = end if hit.size == 0 else start + hit[0] + 1
        up_all[start:stop], dn_all[start:stop] = up[: stop - start], dn[: stop - start]
        if hit.size == 0:
            start = stop
            continue
        d = hit[0]
        is_up = up[d] > h
        stat = up if is_up else dn
        zeros = np.flatnonzero(stat[: d + 1] == 0.0)
        first = zeros[-1] + 1 if zeros.size else 0
        n_run = d - first + 1
        gained = stat[d] - (head_start if zeros.size == 0 else 0.0)  # the head start is no evidence
        size = float((k + gained / n_run) * (1.0 if is_up else -1.0))
        onset, detected = idx[start + first], idx[start + d]
        direction = "up" if is_up else "down"
        text = (
            f"CUSUM of {name} for a {'rise' if is_up else 'fall'} passed its decision interval "
            f"h = {h:.3g} sigma at {when(detected)} after {n_run} observations in a row of "
            f"{'high' if is_up else 'low'} values since {when(onset)} ({span(onset, detected)}). "
            f"Estimated shift {size * sd:+.3g} ({size:+.2f} sigma) from the in-control mean {mu:.4g}. "
            f"Chart set for an in-control average run length of {arl0:.0f} observations (k = {k:.3g} sigma)."
        )
        alarms.append(Alarm(name, "cusum", direction, onset, detected, size * sd, size, float(stat[d]), float(h),
                            text))
        start = stop
    frame = pd.DataFrame({"upper": up_all, "lower": dn_all}, index=idx)
    settings = {"mean": mu, "sigma": sd, "k": k, "h": float(h), "head_start": head_start, "arl0": float(arl0)}
    return ChartResult("cusum", name, alarms, frame, settings, skipped)


_METHODS = {"ewma": ewma_alarms, "cusum": cusum_alarms}


def list_drift_methods() -> list[str]:
    """Names accepted by :func:`detect_drift`.

    Examples
    --------
    >>> list_drift_methods()
    ['ewma', 'cusum']
    """
    return list(_METHODS)


def detect_drift(values: pd.Series, method: str = "cusum", **kwargs) -> ChartResult:
    """Run the drift chart ``method`` (see :func:`list_drift_methods`) on a series.

    Parameters
    ----------
    values : Series
        Observations with a UTC DatetimeIndex. [unit of the series]
    method : str
        ``ewma`` or ``cusum``.
    **kwargs
        Passed to :func:`ewma_alarms` or :func:`cusum_alarms`.

    Returns
    -------
    ChartResult

    References
    ----------
    .. [1] Montgomery, D. C. (2009). Introduction to Statistical Quality Control, 6th ed., ch. 9.

    Examples
    --------
    >>> import pandas as pd
    >>> detect_drift(pd.Series([1.0]), method="shewhart")
    Traceback (most recent call last):
    ...
    kinetrace.errors.KinetraceError: unknown drift method 'shewhart'; allowed: ewma, cusum
    """
    try:
        func = _METHODS[method]
    except (KeyError, TypeError):
        raise KinetraceError(f"unknown drift method {method!r}; allowed: {', '.join(_METHODS)}") from None
    return func(values, **kwargs)
