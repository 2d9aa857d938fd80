"""Closure check: how well the raw data close each balance, per time step."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .gross_errors import sidak_critical_value
from .results import Reconciliation


def closure_table(result: Reconciliation, index=None, alpha: float = 0.05) -> pd.DataFrame:
    """Per-step closure of every balance as a long table.

    The imbalance of a balance is evaluated at the raw measurements, with unmeasured
    quantities (e.g. extents) at their estimates; for a balance without unmeasured
    terms it is exactly the raw imbalance ``A y - b``. Its expected standard deviation
    follows from the measurement uncertainties; ``standardized`` is their ratio, which
    is standard normal when the data hold no gross error. ``flagged`` marks
    ``|standardized|`` above the Sidak-corrected two-sided critical value for the
    balances of one step.

    Parameters
    ----------
    result : Reconciliation
    index : array_like (T,), optional
        Labels of the steps (e.g. time stamps); default 0..T-1.
    alpha : float
        Family-wise level of significance per step. [-]

    Returns
    -------
    pandas.DataFrame
        Columns ``step, balance, imbalance`` [constraint units], ``sd`` [constraint units],
        ``relative`` (imbalance / throughput) [-], ``standardized`` [-], ``flagged``.

    References
    ----------
    .. [1] Narasimhan, S., Jordache, C. (2000). Data Reconciliation and Gross Error
       Detection, Ch. 7 (constraint residuals and their covariance). Gulf.

    Examples
    --------
    >>> from kinetrace.reconcile import reconcile_linear
    >>> r = reconcile_linear([10.0, 6.0, 3.0], 1.0, [[1.0, -1.0, -1.0]], constraint_names=["node"])
    >>> closure_table(r)[["balance", "imbalance", "relative"]].round(4).to_dict("records")
    [{'balance': 'node', 'imbalance': 1.0, 'relative': 0.1034}]
    """
    T, m = result.imbalance.shape
    index = np.arange(T) if index is None else np.asarray(index)
    names = list(result.constraint_names) if result.constraint_names else [f"balance[{i}]" for i in range(m)]
    z = result.standardized_imbalance
    crit = float(sidak_critical_value(alpha, m))
    return pd.DataFrame({
        "step": np.repeat(index, m),
        "balance": np.tile(np.array(names, dtype=object), T),
        "imbalance": result.imbalance.ravel(),
        "sd": result.imbalance_sd.ravel(),
        "relative": result.relative_imbalance.ravel(),
        "standardized": z.ravel(),
        "flagged": (np.abs(np.nan_to_num(z)) > crit).ravel(),
    })
