"""Points of an Arrhenius plot (ln k against 1/T) from steady windows, read from the store.

The dashboard does not refit the kinetics: the fitted parameters come from the store.
The straight line drawn through the points is a least-squares guide only, whose slope is
-Ea/R by the Arrhenius law k = A exp(-Ea / (R T)).

References
----------
.. [1] Arrhenius, S. (1889). Z. Phys. Chem. 4, 226-248 (k = A exp(-Ea/RT)).
.. [2] CODATA 2018 (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010): molar gas
   constant R = 8.314462618 J/(mol K), exact.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from kinetrace.store import Store

from .source import _key_ids, bucket_stats

#: Molar gas constant, exact since the 2019 SI redefinition. [J/(mol K)]
R_GAS = 8.314462618


def steady_points(store: Store, unit: str, k_variable: str, start, end, n_buckets: int = 400) -> pd.DataFrame:
    """Bucket means of k and T over buckets in which every row is steady.

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
        Index bucket start (UTC); ``k`` [unit of k], ``temperature`` [K], ``inv_t`` [1/K],
        ``ln_k`` [ln of k in its unit]; empty when no bucket is wholly steady.
    """
    keys = _key_ids(store, unit, [k_variable, "temperature", "steady"])
    if len(keys) < 3:
        return pd.DataFrame(columns=["k", "temperature", "inv_t", "ln_k"])
    b = {v: bucket_stats(store, kid, start, end, n_buckets) for v, kid in keys.items()}
    k = b[k_variable]["total"] / b[k_variable]["count"]
    t = b["temperature"]["total"] / b["temperature"]["count"]
    ok = b["steady"]["lo"] >= 1.0
    f = pd.DataFrame({"k": k, "temperature": t}).loc[ok[ok].index.intersection(k.index).intersection(t.index)]
    f = f[(f["k"] > 0) & (f["temperature"] > 0)]
    return f.assign(inv_t=1.0 / f["temperature"], ln_k=np.log(f["k"]))


def guide_line(inv_t, ln_k) -> tuple[float, float, float]:
    """Least-squares line ln k = a + b (1/T) through the points, and Ea = -b R.

    Parameters
    ----------
    inv_t : array_like
        Reciprocal temperatures. [1/K]
    ln_k : array_like
        Natural log of the rate constant. [-]

    Returns
    -------
    (float, float, float)
        Intercept a [-], slope b [K], apparent activation energy Ea [J/mol]; NaN with
        fewer than two distinct temperatures.

    >>> t = np.array([330.0, 340.0, 350.0])
    >>> a, b, ea = guide_line(1 / t, np.log(1e3) - 58000.0 / (R_GAS * t))
    >>> round(ea)
    58000
    """
    x = np.asarray(inv_t, dtype=float)
    y = np.asarray(ln_k, dtype=float)
    if len(x) < 2 or np.ptp(x) == 0:
        return np.nan, np.nan, np.nan
    xm, ym = x.mean(), y.mean()
    slope = float(np.sum((x - xm) * (y - ym)) / np.sum((x - xm) ** 2))
    return float(ym - slope * xm), slope, -slope * R_GAS
