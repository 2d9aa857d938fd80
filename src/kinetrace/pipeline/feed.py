"""Feed composition of the monitoring model: the reconciled analysed feed where there is one.

The forecast, the what-if and the expected yield of the shortfall attribution run the unit's
steady-state model at the present operating point; its feed is the reconciled feed composition
over the same window as the operating point (median of the last ``hours`` rows where the species
was analysed), and the configured specification only for species that are not analysed.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..config import UnitModel
from .roles import role_column

#: Series column saying where a species' feed concentration was analysed (1) or specified (0).
ANALYSED = "feed_analysed:{}"


def analysed_flags(roles: pd.DataFrame, model: UnitModel) -> pd.DataFrame:
    """``feed_analysed:<sp>`` columns (1.0 analysed, 0.0 specification) of each row of a role frame."""
    out = pd.DataFrame(index=roles.index)
    for sp in model.species:
        nominal = roles.get(f"nominal:{role_column('feed_conc', sp)}")
        if nominal is not None:
            out[ANALYSED.format(sp)] = 1.0 - nominal.fillna(True).astype(float).to_numpy()
    return out


def monitoring_feed(series: pd.DataFrame, model: UnitModel, *, hours: int = 24):
    """Feed composition for the monitoring model, the key reactant's feed series and a statement.

    Parameters
    ----------
    series : DataFrame
        Back-calculated series with ``reconciled:feed_conc:<sp>`` [mol/m^3] and ``feed_analysed:<sp>``.
    model : UnitModel
    hours : int
        Rows at the end whose median is taken (the operating-point window).

    Returns
    -------
    (dict species -> [mol/m^3], Series of the key reactant's feed [mol/m^3] or None, str)
    """
    feed = {sp: float(v) for sp, v in model.feed.items()}
    measured = []
    last = series.iloc[-hours:]
    for sp in model.species:
        col, flag = f"reconciled:{role_column('feed_conc', sp)}", ANALYSED.format(sp)
        if col not in last or flag not in last:
            continue
        ok = (last[flag] > 0.5) & last[col].notna()
        if ok.sum() >= 3:
            feed[sp] = float(last.loc[ok, col].median())
            measured.append(sp)
    key = model.key_reactant
    col, flag = f"reconciled:{role_column('feed_conc', key)}", ANALYSED.format(key)
    key_series = None
    if col in series and flag in series:
        spec = model.feed.get(key, np.nan)
        key_series = series[col].where(series[flag] > 0.5, spec).fillna(spec)
    spec_only = [sp for sp in model.species if sp not in measured and sp in model.feed]
    text = ("feed composition: " + (f"analysed {', '.join(measured)} (reconciled, median of the last {hours} h)"
                                    if measured else "no analysis")
            + (f"; specification for {', '.join(spec_only)}" if spec_only else ""))
    return feed, key_series, text
