"""Variance inflation of autocorrelated residuals, for the calibration's intervals (kinetics.calibration)."""

from __future__ import annotations

import numpy as np


def variance_inflation(resid_by_rxn, order_by_rxn, batch: int = 10) -> tuple[float, float]:
    """Variance inflation of autocorrelated residuals, and their pooled lag-1 autocorrelation.

    The larger of the AR(1) factor (1 + rho)/(1 - rho) (effective sample size, common practice)
    and the batch-means factor b var(batch means)/var(e) over batches of ``batch`` successive
    residuals (Law, A. M. (2007). Simulation Modeling and Analysis, 4th ed., sec. 9.5.3; from
    memory), each reaction's residuals in time order; at least 1, at most 25. [-]
    """
    num = den = bm = bn = 0.0
    for rid, e in resid_by_rxn.items():
        e = e[np.argsort(order_by_rxn[rid], kind="stable")]
        if e.size <= 3:
            continue
        e = e - e.mean()
        num += float(e[1:] @ e[:-1])
        den += float(e @ e)
        nb = e.size // batch
        if nb >= 5:
            means = e[: nb * batch].reshape(nb, batch).mean(axis=1)
            bm += batch * float(means @ means) / nb * e.size
            bn += float(e @ e) / e.size * e.size
    rho = num / den if den > 0 else 0.0
    ar = (1 + rho) / (1 - rho) if rho < 1 else 25.0
    batch_factor = bm / bn if bn > 0 else 1.0
    return float(np.clip(max(ar, batch_factor), 1.0, 25.0)), float(rho)
