"""Points of an Arrhenius plot (ln k against 1/T) from steady stretches, read from the store, and
the test whether their temperature span can show the temperature effect at all.

Over a long range the apparent rate constant falls with catalyst decay as well as moving with
temperature, so a line through ln k_apparent against 1/T mixes the two. Each point here is
therefore the bucket mean of k_apparent divided by the fitted decay law a(t) (``activity_fit``,
the smooth trend, not the row-by-row activity, which is itself derived with the fitted Ea and
would put every point on that Ea's line by construction). The dashboard draws no line of its
own: the slope shown is the stored joint fit's Ea (:mod:`kinetrace.kinetics.calibration`),
-Ea/R by the Arrhenius law k = A exp(-Ea / (R T)).

References
----------
.. [1] Arrhenius, S. (1889). Z. Phys. Chem. 4, 226-248 (k = A exp(-Ea/RT)).
.. [2] CODATA 2018 (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010): molar gas
   constant R = 8.314462618 J/(mol K), exact.
.. [3] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 21 (a CSTR with a
   slowly decaying catalyst: k(t) = a(t) k, so k / a isolates the temperature effect).
"""

from __future__ import annotations

import inspect
from dataclasses import dataclass

import numpy as np
import pandas as pd

from kinetrace.kinetics.calibration import calibrate
from kinetrace.store import Store

from .source import _key_ids, bucket_stats

#: Molar gas constant, exact since the 2019 SI redefinition. [J/(mol K)]
R_GAS = 8.314462618
#: Fewest steady points an Arrhenius plot is drawn from. [-]
MIN_POINTS = 5
#: The temperature effect the fitted Ea predicts over the span must exceed the points' scatter
#: about that line by this factor (signal to noise of the plot; common practice, no source). [-]
MIN_SIGNAL_TO_SCATTER = 4.0

#: Smallest temperature span of steady points that can determine Ea: the joint fit's own
#: threshold (:func:`kinetrace.kinetics.calibration.calibrate`, ``min_temperature_span``). [K]
MIN_SPAN = float(inspect.signature(calibrate).parameters["min_temperature_span"].default)

_EMPTY = ["k", "activity_fit", "k_corrected", "temperature", "inv_t", "ln_k"]


def steady_points(store: Store, unit: str, k_variable: str, start, end, n_buckets: int = 400) -> pd.DataFrame:
    """Activity-corrected bucket means of k and the mean T over buckets in which every row is steady.

    Parameters
    ----------
    store : Store
    unit : str
    k_variable : str
        E.g. ``"k_apparent:addition"``. [1/s or the unit's rate-constant unit]
    start, end : Timestamp
        Range. [UTC]
    n_buckets : int
        Time buckets (each gives at most one point). [-]

    Returns
    -------
    DataFrame
        Index bucket start (UTC); ``k`` (bucket mean of k_apparent) [unit of k],
        ``activity_fit`` (bucket mean of the fitted decay law) [-], ``k_corrected`` = k / a
        [unit of k], ``temperature`` [K], ``inv_t`` [1/K], ``ln_k`` (ln of k_corrected) [-];
        empty when no bucket is wholly steady or the store holds no fitted decay law.
    """
    keys = _key_ids(store, unit, [k_variable, "temperature", "steady", "activity_fit"])
    if len(keys) < 4:
        return pd.DataFrame(columns=_EMPTY)
    b = {v: bucket_stats(store, kid, start, end, n_buckets) for v, kid in keys.items()}
    mean = {v: f["total"] / f["count"] for v, f in b.items()}
    ok = b["steady"]["lo"] >= 1.0
    idx = ok[ok].index
    for v in (k_variable, "temperature", "activity_fit"):
        idx = idx.intersection(mean[v].index)
    f = pd.DataFrame({"k": mean[k_variable].loc[idx], "activity_fit": mean["activity_fit"].loc[idx],
                      "temperature": mean["temperature"].loc[idx]})
    f = f[(f["k"] > 0) & (f["temperature"] > 0) & (f["activity_fit"] > 0)]
    f = f.assign(k_corrected=f["k"] / f["activity_fit"])
    return f.assign(inv_t=1.0 / f["temperature"], ln_k=np.log(f["k_corrected"]))


@dataclass(frozen=True)
class SpanCheck:
    """Whether a set of steady points can show the temperature effect (see :func:`span_check`).

    Attributes
    ----------
    supported : bool
    span_k : float
        Temperature span of the points. [K]
    signal : float
        Change of ln k the Ea predicts across the span, Ea/R (1/T_min - 1/T_max). [-]
    scatter : float
        Standard deviation of the points about the line of slope -Ea/R through their mean. [-]
    reason : str
        The verdict in words.
    """

    supported: bool
    span_k: float
    signal: float
    scatter: float
    reason: str


def span_check(inv_t, ln_k, activation_energy: float) -> SpanCheck:
    """Can these points show a temperature effect of the size ``activation_energy`` predicts?

    The plot is drawn when there are at least :data:`MIN_POINTS` points spanning at least
    :data:`MIN_SPAN` (the joint fit's threshold) and the change of ln k
    that Ea predicts across their temperature span is at least :data:`MIN_SIGNAL_TO_SCATTER`
    times the points' scatter about that line; otherwise the span says nothing about Ea.

    Parameters
    ----------
    inv_t : array_like
        Reciprocal temperatures. [1/K]
    ln_k : array_like
        ln of the activity-corrected rate constant. [-]
    activation_energy : float
        Ea of the stored fit. [J/mol]

    Returns
    -------
    SpanCheck

    >>> t = np.array([340.0, 342.0, 344.0, 346.0, 348.0, 350.0])
    >>> span_check(1 / t[:2], np.zeros(2), 58000.0).supported
    False
    >>> span_check(1 / t, -58000.0 / (R_GAS * t) + 0.001 * np.array([1, -1, 1, -1, 1, -1]), 58000.0).supported
    True
    >>> span_check(1 / (343.0 + 0.4 * np.arange(6)), np.zeros(6), 58000.0).reason[:36]
    'the steady periods span 2.0 K only ('
    """
    x = np.asarray(inv_t, dtype=float)
    y = np.asarray(ln_k, dtype=float)
    ok = np.isfinite(x) & np.isfinite(y)
    x, y = x[ok], y[ok]
    if len(x) < MIN_POINTS or not np.isfinite(activation_energy):
        return SpanCheck(False, float(np.ptp(1 / x)) if len(x) else np.nan, np.nan, np.nan,
                         f"{len(x)} steady period(s) in this range; the plot needs at least {MIN_POINTS}")
    span = float(np.ptp(1.0 / x))
    slope = -activation_energy / R_GAS
    signal = abs(slope) * float(np.ptp(x))
    resid = y - slope * x
    scatter = float(np.std(resid - resid.mean(), ddof=1))
    if span < MIN_SPAN:
        return SpanCheck(False, span, signal, scatter,
                         f"the steady periods span {span:.1f} K only (the joint fit needs {MIN_SPAN:g} K to "
                         "determine Ea); a slope read from them would mostly show noise and catalyst decay")
    if signal >= MIN_SIGNAL_TO_SCATTER * scatter and signal > 0:
        return SpanCheck(True, span, signal, scatter,
                         f"the {span:.1f} K span moves ln k by {signal:.3f}, {signal / max(scatter, 1e-300):.0f} "
                         "times the points' scatter")
    return SpanCheck(False, span, signal, scatter,
                     f"the steady periods span {span:.1f} K only: the temperature effect across it "
                     f"(ln k moves by {signal:.3f} at the fitted Ea) is not clear of the points' scatter "
                     f"({scatter:.3f}); a slope read from them would mostly show noise and catalyst decay")


def fit_lines(inv_t, ln_k, activation_energy: float, ci_low: float = np.nan, ci_high: float = np.nan,
              label: str = "fitted Ea") -> pd.DataFrame:
    """Lines of slope -Ea/R through the points' centroid, for Ea and the ends of its interval.

    Parameters
    ----------
    inv_t, ln_k : array_like
        The points. [1/K], [-]
    activation_energy, ci_low, ci_high : float
        Stored Ea and its interval. [J/mol]

    Returns
    -------
    DataFrame
        ``inv_t_k`` (1000/T [1/K]), ``ln_k``, ``line`` (label), two rows per line.

    >>> f = fit_lines([1 / 350, 1 / 340], [0.0, 1.0], 58000.0)
    >>> round(float(np.diff(f["ln_k"])[0] / np.diff(f["inv_t_k"] / 1000)[0] * -R_GAS))
    58000
    """
    x = np.asarray(inv_t, dtype=float)
    y = np.asarray(ln_k, dtype=float)
    xm, ym = x.mean(), y.mean()
    ends = np.array([x.min(), x.max()])
    rows = []
    for name, ea in ((f"{label} {activation_energy / 1000:.1f} kJ/mol", activation_energy),
                     (f"interval end {ci_low / 1000:.1f} kJ/mol", ci_low),
                     (f"interval end {ci_high / 1000:.1f} kJ/mol", ci_high)):
        if not np.isfinite(ea):
            continue
        rows.append(pd.DataFrame({"inv_t_k": 1000 * ends, "ln_k": ym - ea / R_GAS * (ends - xm), "line": name}))
    return pd.concat(rows, ignore_index=True)
