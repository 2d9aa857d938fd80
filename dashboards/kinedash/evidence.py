"""Model comparison by information criteria: differences to the best and Akaike weights.

For candidates with criterion values AIC_i (or AICc, QAICc), Delta_i = AIC_i - min AIC and the
Akaike weight w_i = exp(-Delta_i / 2) / sum_j exp(-Delta_j / 2), the weight of evidence that
candidate i is the best of the set [1]_. Delta up to about 2: substantial support; 4-7:
considerably less; above 10: essentially none [1]_.

References
----------
.. [1] Burnham, K. P., Anderson, D. R. (2002). Model Selection and Multimodel Inference: A
   Practical Information-Theoretic Approach, 2nd ed. Springer, sec. 2.6 (differences) and
   2.9 (Akaike weights).
"""

from __future__ import annotations

import numpy as np
import pandas as pd


def akaike_weights(criterion) -> tuple[np.ndarray, np.ndarray]:
    """Differences to the lowest criterion value and Akaike weights.

    Parameters
    ----------
    criterion : array_like
        AIC, AICc or QAICc of each candidate (lower is better); NaN candidates get NaN. [-]

    Returns
    -------
    (ndarray, ndarray)
        Delta_i [-] and w_i [-] (the finite weights sum to 1).

    >>> d, w = akaike_weights([-412.3, -398.7])
    >>> d.round(1).tolist(), w.round(4).tolist()
    ([0.0, 13.6], [0.9989, 0.0011])
    """
    c = np.asarray(criterion, dtype=float)
    ok = np.isfinite(c)
    delta = np.full(c.shape, np.nan)
    w = np.full(c.shape, np.nan)
    if ok.any():
        delta[ok] = c[ok] - c[ok].min()
        e = np.exp(-0.5 * delta[ok])
        w[ok] = e / e.sum()
    return delta, w


def support_words(delta: float) -> str:
    """Burnham & Anderson's (2002, sec. 2.6) reading of a difference Delta to the best candidate.

    >>> support_words(0.0), support_words(5.0), support_words(12.0)
    ('best supported', 'considerably less support', 'essentially no support')
    """
    if not np.isfinite(delta):
        return "not available"
    if delta == 0:
        return "best supported"
    if delta <= 2:
        return "substantial support"
    if delta <= 7:
        return "considerably less support"
    if delta <= 10:
        return "little support"
    return "essentially no support"


def comparison_table(names, criterion) -> pd.DataFrame:
    """Candidates sorted best first: ``candidate``, ``criterion``, ``delta``, ``weight``, ``support``."""
    d, w = akaike_weights(criterion)
    t = pd.DataFrame({"candidate": list(names), "criterion": np.asarray(criterion, dtype=float),
                      "delta": d, "weight": w})
    t["support"] = [support_words(x) for x in t["delta"]]
    return t.sort_values("delta", kind="stable").reset_index(drop=True)
