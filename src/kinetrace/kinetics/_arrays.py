"""Input handling shared by the kinetics functions.

Scalars, numpy arrays and pandas Series are accepted everywhere. Results have
the broadcast shape of the inputs; a 0-d result is returned as ``float`` and a
result whose length matches the first Series among the inputs is returned as a
Series with that index (and the given name).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd


def first_index(*values: Any) -> pd.Index | None:
    """Index of the first pandas Series (or DataFrame) among ``values``, else None."""
    for v in values:
        if isinstance(v, (pd.Series, pd.DataFrame)):
            return v.index
    return None


def as_float_array(value: Any) -> np.ndarray:
    """``value`` as a float ndarray (Series lose their index; NaN kept)."""
    if isinstance(value, pd.Series):
        return value.to_numpy(dtype=float, na_value=np.nan)
    return np.asarray(value, dtype=float)


def wrap(result: np.ndarray, index: pd.Index | None, name: str | None = None) -> Any:
    """Return ``result`` as float (0-d), Series (length of ``index``) or ndarray."""
    result = np.asarray(result, dtype=float)
    if result.ndim == 0:
        return float(result)
    if index is not None and result.ndim == 1 and len(index) == result.shape[0]:
        return pd.Series(result, index=index, name=name)
    return result
