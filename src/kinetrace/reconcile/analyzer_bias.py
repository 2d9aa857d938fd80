"""An online analyzer's bias tracked against the laboratory: state-space model and change detection.

Measurement model. The analyzer reads ``y_a(t) = c(t) (1 + b(t)) + e_a`` and a lab result,
taken at its sampling time t_i, reads ``y_l(t_i) = c(t_i) + e_l``. The concentration c is
common to both and cancels in the relative difference at the sampling times,

    z_i = yhat_a(t_i) / y_l(t_i) - 1 = b(t_i) + eps_i,   Var eps_i = s_a^2 g_i + s_l^2,

where ``yhat_a(t_i)`` is a local linear fit of the analyzer's grid readings within
``half_window`` of the sampling time (its variance factor g_i = 1/n + (t_i - tbar)^2 / Sxx)
and s_a, s_l are the relative uncertainties of one analyzer reading and one lab result.
So the state recursion need only run over the lab samples (a few a day), not over every
analyzer reading: the analyzer's many readings enter through their local fit, which is the
least-squares aggregate of them at the sampling time; the concentration itself is not a
state because it cancels.

The bias is a local linear trend (Durbin & Koopman 2012, Sec. 3.2.1): state (b, b'), b' the
rate per day, integrated-random-walk disturbances over the uneven spacing, filtered by the
Kalman filter and smoothed by the Rauch-Tung-Striebel smoother (:mod:`.state_space`). A lab
result belongs to its sampling time but is known only once reported (``result_delay``): the
filtered state at sample i is the estimate published at ``t_i + delay``; the smoothed one
uses every result.

Change detection: the window-limited GLR of a step and of a ramp (:mod:`.ramp_step`,
Basseville & Nikiforov 1993) runs on the standardised differences while the analyzer is in
control, and after a change on the recursive residuals of the line fitted since the change
(independent N(0, 1) under the line model: Brown, Durbin & Evans 1975), so that a further
change (a recalibration, say) is found too. Each change point starts a segment, classified
by comparing a step (constant bias) with a ramp continuing from the bias before the onset
(one parameter each, so the better fit decides); a segment whose bias and rate are both
indistinguishable from zero is in control again (recalibrated). The change points enter the
filter as interventions (a large state disturbance at the onset, Durbin & Koopman 2012,
Sec. 3.2.5 and 7.5), so the track follows them at once.

References
----------
.. [1] Durbin, J., Koopman, S. J. (2012). Time Series Analysis by State Space Methods, 2nd ed.
   Oxford University Press.
.. [2] Rauch, H. E., Tung, F., Striebel, C. T. (1965). AIAA J. 3(8), 1445-1450.
.. [3] Basseville, M., Nikiforov, I. V. (1993). Detection of Abrupt Changes. Prentice Hall.
.. [4] Brown, R. L., Durbin, J., Evans, J. M. (1975). Techniques for testing the constancy of
   regression relationships over time. J. R. Statist. Soc. B 37(2), 149-192.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .ramp_step import GLR_THRESHOLD, GLR_WINDOW, first_alarm, glr_step_ramp
from .state_space import kalman_smoother

DAY = 86400.0
#: Bias level and rate disturbances of the trend model: the bias may wander by about 0.03 % in a
#: day and its rate by 0.02 %/d in a day when nothing happens (common practice, no source: a
#: calibrated analyzer holds its calibration to a few tenths of a percent over weeks). [-/sqrt(d)],
#: [1/d / sqrt(d)]
LEVEL_NOISE = 3e-4
RATE_NOISE = 2e-4
#: Interventions at a change point: standard deviation added to the level and to the rate. [-], [1/d]
STEP_INTERVENTION = 0.2
RATE_INTERVENTION = 0.05
#: Chi-square margin by which a step must beat a ramp to be called a step. Soon after a slow drift
#: begins, a step at a later onset fits a few lab samples almost as well; calling a drift a step
#: understates the error to come, calling a step a drift brings the lab check forward, so near-ties
#: go to the drift (a prior odds of e = exp(2/2) to 1; a design choice, no source). [-]
DRIFT_MARGIN = 2.0
#: Fewest lab samples after a change that can show a drift (two points always lie on a ramp). [-]
MIN_DRIFT_SAMPLES = 3
#: |estimate| / standard error below which a segment's bias and rate count as zero. [-]
ZERO_Z = 3.0


@dataclass(frozen=True)
class BiasSegment:
    """One stretch between change points of an analyzer's bias against the lab.

    Attributes
    ----------
    kind : {"in control", "step", "drift"}
    onset : Timestamp
        Estimated start (a drift: the last lab sample before it; a step: midway between the
        samples around it). [UTC]
    alarm : Timestamp or None
        When the change became known (report time of the sample that raised it). [UTC]
    first, last : int
        Lab sample indices of the segment. [-]
    bias, bias_sd : float
        Bias at the segment's last sample, by the segment's fit. [-, fraction of reading]
    rate, rate_sd : float
        Drift rate (NaN for a step). [1/d]
    """

    kind: str
    onset: pd.Timestamp
    alarm: pd.Timestamp | None
    first: int
    last: int
    bias: float
    bias_sd: float
    rate: float = float("nan")
    rate_sd: float = float("nan")


@dataclass
class BiasTrack:
    """Bias of one analyzer against the lab.

    Attributes
    ----------
    samples : DataFrame
        One row per lab sample (index: sampling time, UTC): ``lab`` [SI], ``analyzer`` (local fit)
        [SI], ``z`` and ``z_sd`` (relative difference) [-], ``reported`` [UTC], ``filtered_bias``,
        ``filtered_bias_sd`` [-], ``filtered_rate``, ``filtered_rate_sd`` [1/d], ``smoothed_bias``,
        ``smoothed_bias_sd`` [-], ``smoothed_rate``, ``smoothed_rate_sd`` [1/d].
    segments : list of BiasSegment
    """

    samples: pd.DataFrame
    segments: list = field(default_factory=list)

    @property
    def faults(self) -> list:
        """Segments in which the analyzer is off (step or drift)."""
        return [s for s in self.segments if s.kind != "in control"]

    def on_grid(self, index: pd.DatetimeIndex) -> pd.DataFrame:
        """Smoothed bias and rate on a time grid, and where the analyzer is to be corrected.

        Linear between lab samples, held before the first, extrapolated by the last rate after
        the last. Columns ``bias`` [-], ``bias_sd`` [-], ``rate`` [1/d], ``rate_sd`` [1/d],
        ``corrected`` (1 inside a step or drift segment) [-].
        """
        s = self.samples
        out = pd.DataFrame(index=index, dtype=float)
        if s.empty:
            for c in ("bias", "bias_sd", "rate", "rate_sd", "corrected"):
                out[c] = np.nan if c != "corrected" else 0.0
            return out
        tg = _days(index)
        ts = _days(s.index)
        b, bsd = s["smoothed_bias"].to_numpy(), s["smoothed_bias_sd"].to_numpy()
        r, rsd = s["smoothed_rate"].to_numpy(), s["smoothed_rate_sd"].to_numpy()
        after = np.clip(tg - ts[-1], 0.0, None)
        out["bias"] = np.interp(tg, ts, b) + r[-1] * after
        out["bias_sd"] = np.sqrt(np.interp(tg, ts, bsd) ** 2 + (rsd[-1] * after) ** 2)
        out["rate"] = np.interp(tg, ts, r)
        out["rate_sd"] = np.interp(tg, ts, rsd)
        flag = np.zeros(len(index))
        for k, seg in enumerate(self.segments):
            if seg.kind == "in control":
                continue
            lo = _days(pd.DatetimeIndex([seg.onset]))[0]
            nxt = self.segments[k + 1] if k + 1 < len(self.segments) else None
            hi = ts[nxt.first] if nxt is not None else np.inf
            flag[(tg > lo) & (tg < hi)] = 1.0
        out["corrected"] = flag
        return out


def _days(index) -> np.ndarray:
    return (pd.DatetimeIndex(index).as_unit("ns").asi8 / 1e9) / DAY


def lab_comparisons(analyzer: pd.Series, lab_times, lab_values, *, analyzer_sigma: float, lab_sigma: float,
                    half_window: float = 6 * 3600.0, estimate_noise: bool = True) -> pd.DataFrame:
    """Relative differences between the analyzer (local linear fit) and each lab result.

    Parameters
    ----------
    analyzer : Series
        Analyzer interval means on a regular grid, labelled by the interval's start (NaN where
        not valid), UTC index. [SI]
    lab_times : DatetimeIndex
        Sampling times of the lab results. [UTC]
    lab_values : array_like
        Lab results. [SI, as ``analyzer``]
    analyzer_sigma, lab_sigma : float
        Relative standard uncertainty of one analyzer reading and of one lab result. [-]
    half_window : float
        Analyzer readings within this time of the sampling time enter the local fit. [s]
    estimate_noise : bool
        Replace ``analyzer_sigma`` by the pooled scatter of the grid values about their local
        lines (at least a tenth of ``analyzer_sigma``): a grid value is a mean of several readings.

    Returns
    -------
    DataFrame
        Index: sampling times; ``lab``, ``analyzer`` [SI], ``z``, ``z_sd`` [-], ``n_readings`` [-].
        Samples without three analyzer readings around them get NaN ``z``.
    """
    idx = analyzer.index
    lab_times = pd.DatetimeIndex(lab_times)
    lab = np.asarray(lab_values, dtype=float)
    if len(idx) < 2:
        raise ValueError("the analyzer series needs at least two grid rows")
    step = (idx[1] - idx[0]).total_seconds()
    k = int(half_window // step)
    y = analyzer.to_numpy(dtype=float)
    pos = idx.get_indexer(lab_times.floor(pd.Timedelta(seconds=step)))
    offs = np.arange(-k, k + 1)
    rows = pos[:, None] + offs[None, :]
    inside = (pos[:, None] >= 0) & (rows >= 0) & (rows < len(y))
    vals = np.where(inside, y[np.clip(rows, 0, len(y) - 1)], np.nan)
    ok = np.isfinite(vals)
    # an analyzer's grid value is the mean of its readings in the interval: it stands at the
    # interval's midpoint (hours from the start of the sample's grid interval)
    x = np.where(ok, (offs[None, :] + 0.5) * step / 3600.0, 0.0)
    n = ok.sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        xbar = x.sum(axis=1) / n
        ybar = np.where(ok, vals, 0.0).sum(axis=1) / n
        dx = np.where(ok, x - xbar[:, None], 0.0)
        sxx = (dx * dx).sum(axis=1)
        slope = np.where(sxx > 0, (dx * np.where(ok, vals - ybar[:, None], 0.0)).sum(axis=1) / sxx, 0.0)
        x0 = ((lab_times - lab_times.floor(pd.Timedelta(seconds=step))).total_seconds().to_numpy() / 3600.0)
        est = ybar + slope * (x0 - xbar)
        g = 1.0 / n + np.where(sxx > 0, (x0 - xbar) ** 2 / sxx, 0.0)
        z = est / lab - 1.0
    usable = (n >= 3) & np.isfinite(z) & (lab > 0)
    if estimate_noise:
        # the scatter of the interval means about their local lines, pooled over the samples
        # (relative to the local level): the noise of one grid value, which averaging over the
        # interval makes smaller than the configured per-reading uncertainty; never below a tenth of it
        with np.errstate(divide="ignore", invalid="ignore"):
            fit = ybar[:, None] + slope[:, None] * (x - xbar[:, None])
            rel = np.where(ok & usable[:, None], (vals - fit) / fit, 0.0)
        dof = float(np.where(usable, n - 2, 0).sum())
        if dof >= 20:
            analyzer_sigma = max(float(np.sqrt((rel * rel).sum() / dof)), 0.1 * analyzer_sigma)
    # the local line can miss a fast change of the process (a set-point step): the scatter of the
    # window's readings about it beyond their noise is added as the line's own error at the
    # sampling time (a lack-of-fit variance; Draper & Smith 1998, Sec. 2.1)
    with np.errstate(divide="ignore", invalid="ignore"):
        fit = ybar[:, None] + slope[:, None] * (x - xbar[:, None])
        own = np.where(ok, (vals - fit) / fit, 0.0)
        local = (own * own).sum(axis=1) / np.maximum(n - 2, 1)
    lack = np.clip(local - analyzer_sigma ** 2, 0.0, None)
    z = np.where(usable, z, np.nan)
    z_sd = np.sqrt(analyzer_sigma ** 2 * g + lack + lab_sigma ** 2)
    return pd.DataFrame({"lab": lab, "analyzer": np.where(usable, est, np.nan), "z": z,
                         "z_sd": np.where(usable, z_sd, np.nan), "n_readings": n}, index=lab_times)


def _line_fit(t, z, w):
    """Weighted least-squares line through (t, z): level at t[-1], slope, and their covariance."""
    sw, st, stt = w.sum(), (w * t).sum(), (w * t * t).sum()
    sz, stz = (w * z).sum(), (w * t * z).sum()
    det = sw * stt - st * st
    if det <= 0 or sw <= 0:
        return sz / sw if sw > 0 else np.nan, 0.0, np.array([[1.0 / sw if sw > 0 else np.inf, 0.0], [0.0, 0.0]])
    slope = (sw * stz - st * sz) / det
    inter = (sz - slope * st) / sw
    cov = np.array([[stt, -st], [-st, sw]]) / det          # of (intercept at t=0, slope)
    jac = np.array([[1.0, t[-1]], [0.0, 1.0]])
    return inter + slope * t[-1], slope, jac @ cov @ jac.T


def _recursive_residuals(t, z, sd, m, start):
    """Standardised one-step prediction errors of the WLS line fitted to samples m..j-1, j >= start."""
    n = z.size
    u = np.full(n, np.nan)
    ok = np.isfinite(z)
    w = np.where(ok, 1.0 / np.where(ok, sd, 1.0) ** 2, 0.0)
    z0 = np.where(ok, z, 0.0)
    c = [np.concatenate([[0.0], np.cumsum(a[m:])]) for a in (w, w * t, w * t * t, w * z0, w * t * z0)]
    j = np.arange(max(start, m + 1), n)
    if j.size == 0:
        return u
    sw, st, stt, sz, stz = (ci[j - m] for ci in c)
    det = sw * stt - st * st
    with np.errstate(divide="ignore", invalid="ignore"):
        line = det > 1e-12 * np.maximum(sw * stt, 1e-300)
        slope = np.where(line, (sw * stz - st * sz) / np.where(line, det, 1.0), 0.0)
        inter = np.where(sw > 0, (sz - slope * st) / sw, np.nan)
        pred = inter + slope * t[j]
        var_pred = np.where(line, (stt - 2 * t[j] * st + t[j] ** 2 * sw) / np.where(line, det, 1.0), 1.0 / sw)
        u[j] = (z[j] - pred) / np.sqrt(sd[j] ** 2 + var_pred)
    return u


def _changes(t, z, sd, *, threshold, window, max_changes=20):
    """Change points (onset index, alarm index) by the sequential GLR (module docstring)."""
    found = []
    base = None                       # onset of the current segment; None: in control, bias 0
    start = 0
    for _ in range(max_changes):      # one pass per change found (a few), not per sample
        u = z / sd if base is None else _recursive_residuals(t, z, sd, base, start)
        stat = glr_step_ramp(u, t, window=window, start=start)
        a = first_alarm(stat, threshold, start)
        if a is None:
            break
        onset = int(stat.ramp_onset[a] if stat.ramp[a] > stat.step[a] else stat.step_onset[a])
        found.append((onset, a))
        base, start = onset, a + 1
    return found


def _refine_onset(t, z, sd, onset, last, window):
    """The first change's onset re-estimated with every sample up to the segment's end: the onset
    of whichever of a step and a ramp explains the standardised differences better (GLR at the
    segment's last sample, onsets within ``window`` samples before the alarm's onset)."""
    lo = max(0, onset - window)
    stat = glr_step_ramp(z[lo:last + 1] / sd[lo:last + 1], t[lo:last + 1], window=last + 1 - lo,
                         ends=[last - lo])
    best = stat.ramp_onset[0] if stat.ramp[0] + DRIFT_MARGIN > stat.step[0] else stat.step_onset[0]
    return int(lo + best)


def _classify(t, z, sd, first, last, prev_bias, lo):
    """Kind and size of one segment (samples ``first..last``), the samples ``lo..first-1`` before it
    standing at ``prev_bias``: a step (constant bias from ``first``) against a ramp from
    ``prev_bias`` whose onset tau is fitted on an hourly grid between the fourth sample before
    ``first`` and ``first`` itself (a broken-stick regression, WLS; the GLR's onset is only
    known to a sampling interval). Returns (kind, bias at ``last``, its sd, rate, rate sd, tau).
    """
    sl = slice(lo, last + 1)
    tt, zz, ss = t[sl], z[sl], sd[sl]
    ok = np.isfinite(zz)
    seg = (np.arange(lo, last + 1) >= first) & ok
    pre = ~seg & ok
    w = np.where(ok, 1.0 / np.where(ok, ss, 1.0) ** 2, 0.0)
    zz = np.where(ok, zz, 0.0)
    if not seg.any():
        return "in control", 0.0, np.inf, np.nan, np.nan, t[first]
    chi_pre = float((w * (zz - prev_bias) ** 2)[pre].sum())
    ws = w[seg]
    level = float((ws * zz[seg]).sum() / ws.sum())
    level_sd = float(1.0 / np.sqrt(ws.sum()))
    chi_step = chi_pre + float((ws * (zz[seg] - level) ** 2).sum())
    t_lo = t[max(first - 4, lo)] if first > lo else t[first] - 1.0
    taus = np.arange(t_lo, t[first], 1.0 / 24.0)
    taus = taus if taus.size else np.array([t[first] - 1.0 / 24.0])
    x = np.clip(tt[None, :] - taus[:, None], 0.0, None)                    # (tau, sample) [d]
    wx = w[None, :] * x
    sxx = (wx * x).sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        rates = np.where(sxx > 0, (wx * (zz - prev_bias)[None, :]).sum(axis=1) / sxx, 0.0)
    chi = (w[None, :] * (zz[None, :] - prev_bias - rates[:, None] * x) ** 2 * ok[None, :]).sum(axis=1)
    b = int(np.argmin(chi))
    tau, rate, chi_ramp = float(taus[b]), float(rates[b]), float(chi[b])
    rate_sd = float(1.0 / np.sqrt(sxx[b])) if sxx[b] > 0 else np.inf
    if (seg.sum() >= MIN_DRIFT_SAMPLES and chi_ramp < chi_step + DRIFT_MARGIN
            and abs(rate) >= ZERO_Z * rate_sd):
        span = tt[seg][-1] - tau
        return "drift", prev_bias + rate * span, rate_sd * span, rate, rate_sd, tau
    if abs(level) < ZERO_Z * level_sd:
        return "in control", level, level_sd, np.nan, np.nan, t[first]
    return "step", level, level_sd, np.nan, np.nan, t[first]


def track_bias(comparisons: pd.DataFrame, *, result_delay: float = 0.0, analysis_delay: float = 0.0,
               threshold: float = GLR_THRESHOLD, window: int = GLR_WINDOW, as_of=None) -> BiasTrack:
    """Bias of an analyzer against the lab over time: change points, segments, filter and smoother.

    Parameters
    ----------
    comparisons : DataFrame
        :func:`lab_comparisons` output. [-]
    result_delay : float
        Time from sampling to the lab result being reported. [s]
    analysis_delay : float
        Further wait before the comparison can be made (the analyzer readings after the sampling
        time that enter the local fit). [s]
    threshold, window
        GLR decision threshold [-] and window [samples] (:mod:`.ramp_step`).
    as_of : Timestamp, optional
        Time of the run: a sample not yet reported then (or whose analyzer readings after it are
        not all in) is left out. [UTC]

    Returns
    -------
    BiasTrack

    References
    ----------
    .. [1] Durbin & Koopman (2012), Sec. 3.2 (local linear trend), 4.3-4.4 (filter, smoother).
    .. [2] Basseville & Nikiforov (1993), Sec. 2.4 (GLR).
    """
    comp = comparisons.loc[np.isfinite(comparisons["z"].to_numpy(dtype=float))]
    s = comp.copy()
    s["reported"] = s.index + pd.Timedelta(seconds=max(result_delay, analysis_delay))
    if as_of is not None:
        s = s.loc[s["reported"] <= pd.Timestamp(as_of)]
    if len(s) == 0:
        for c in ("filtered_bias", "filtered_bias_sd", "filtered_rate", "filtered_rate_sd",
                  "smoothed_bias", "smoothed_bias_sd", "smoothed_rate", "smoothed_rate_sd"):
            s[c] = pd.Series(dtype=float)
        return BiasTrack(s, [])
    t = _days(s.index)
    z = s["z"].to_numpy(dtype=float)
    sd = s["z_sd"].to_numpy(dtype=float)
    # the configured uncertainties are checked against the data: the spread of successive differences
    # (insensitive to a slow drift or a single step; von Neumann et al. 1941) widens them if larger,
    # so that the false-alarm rate of the GLR holds when the sigmas are set too tight
    if z.size >= 30:
        d = np.diff(z)
        spread = 1.4826 * np.median(np.abs(d - np.median(d))) / np.sqrt(2.0)
        ratio = spread / float(np.median(sd))
        if ratio > 1.3:       # beyond the scatter of the estimate from 30 samples (common practice, no source)
            sd = sd * ratio
            s["z_sd"] = sd
    changes = _changes(t, z, sd, threshold=threshold, window=window)
    segments = [BiasSegment("in control", s.index[0], None, 0, (changes[0][0] - 1) if changes else len(t) - 1,
                            0.0, 0.0)]
    # the bias before the first change: the in-control mean (a lab and an analyzer never agree
    # exactly), so that a drift is measured from where the analyzer stood
    prev_bias = 0.0
    if changes and changes[0][0] >= 6:
        w0 = 1.0 / sd[: changes[0][0]] ** 2
        prev_bias = float((w0 * z[: changes[0][0]]).sum() / w0.sum())
    for k, (onset, alarm) in enumerate(changes):
        last = changes[k + 1][0] - 1 if k + 1 < len(changes) else len(t) - 1
        if k == 0:
            onset = _refine_onset(t, z - prev_bias, sd, onset, last, window)
        lo = segments[-1].first if k == 0 else max(changes[k - 1][0], onset - 6)
        kind, bias, bias_sd, rate, rate_sd, tau = _classify(t, z, sd, onset, last, prev_bias, lo)
        if kind == "drift":
            when = pd.Timestamp(round(tau * DAY), unit="s", tz="UTC")
        else:
            when = s.index[onset] - (s.index[onset] - s.index[onset - 1]) / 2 if onset > 0 else s.index[0]
        segments.append(BiasSegment(kind, when, s["reported"].iloc[alarm], onset, last, bias, bias_sd, rate, rate_sd))
        prev_bias = bias if kind != "in control" else 0.0
    if segments[0].last < segments[0].first:
        segments = segments[1:]
    s = _filter(s, t, z, sd, segments)
    return BiasTrack(s, segments)


def _filter(s, t, z, sd, segments):
    """Local linear trend filter and smoother with interventions at the change points."""
    n = t.size
    dt = np.append(np.diff(t), 0.0)
    tr = np.tile(np.eye(2), (n, 1, 1))
    tr[:, 0, 1] = dt
    q = np.zeros((n, 2, 2))
    q[:, 0, 0] = LEVEL_NOISE ** 2 * dt + RATE_NOISE ** 2 * dt ** 3 / 3.0
    q[:, 0, 1] = q[:, 1, 0] = RATE_NOISE ** 2 * dt ** 2 / 2.0
    q[:, 1, 1] = RATE_NOISE ** 2 * dt
    for seg in segments:
        if seg.first == 0:
            continue
        i = seg.first - 1          # disturbance entering between the last sample before and the onset
        if seg.kind == "drift":
            q[i, 1, 1] += RATE_INTERVENTION ** 2
        else:                      # a step, or back in control after a recalibration
            q[i, 0, 0] += STEP_INTERVENTION ** 2
            q[i, 1, 1] += RATE_INTERVENTION ** 2
    p0 = np.diag([STEP_INTERVENTION ** 2, (10 * RATE_NOISE) ** 2])
    res = kalman_smoother(z, [1.0, 0.0], tr, q, sd ** 2, [0.0, 0.0], p0)
    out = s.copy()
    for name, mean, cov in (("filtered", res.filtered, res.filtered_cov), ("smoothed", res.smoothed, res.smoothed_cov)):
        out[f"{name}_bias"] = mean[:, 0]
        out[f"{name}_bias_sd"] = np.sqrt(cov[:, 0, 0])
        out[f"{name}_rate"] = mean[:, 1]
        out[f"{name}_rate_sd"] = np.sqrt(cov[:, 1, 1])
    return out


__all__ = ["BiasSegment", "BiasTrack", "lab_comparisons", "track_bias"]
