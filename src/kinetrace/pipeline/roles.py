"""From per-tag readings to one value per measured quantity ("role") of a unit.

A unit may have several tags for the same quantity (an online analyzer and the
laboratory for the outlet methyl acrylate, say). Online tags (continuous and
analyzer) come first: where more than one is valid at a time step they are
combined by the inverse-variance weighted mean, the minimum-variance unbiased
combination of independent measurements (Taylor, J. R. 1997, An Introduction to
Error Analysis, 2nd ed., Sec. 7.2), whose standard deviation comes with it.
Laboratory tags fill the time steps where no online value is valid: a lab result
is carried forward for hours, so beside a live analyzer it is the staler value.
A lab result carried over n intervals is one observation, not n: its standard
deviation is multiplied by sqrt(n) in each of them, so that, summed over the
intervals, it weighs in the balances as one sample does.
(Reconciliation, downstream, weighs all of them against the balances.)

Role columns of the frame returned by :func:`role_frame` (all SI):

=====================  =============  =====================================
column                 unit           meaning
=====================  =============  =====================================
``feed_flow``          m^3/s          volumetric feed flow Q_in
``outlet_flow``        m^3/s          volumetric outlet flow Q_out
``temperature``        K              reactor temperature
``level``              - (fraction)   level, where a level tag exists
``volume``             m^3            liquid volume (fixed or from level)
``feed_conc:<sp>``     mol/m^3        feed concentration of species <sp>
``outlet_conc:<sp>``   mol/m^3        outlet (= reactor) concentration
``sigma:<column>``     as column      standard uncertainty of the value
``nominal:feed_conc:<sp>`` bool       True where the configured feed value was used
=====================  =============  =====================================
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..config import ROLE_KIND, UnitModel, tag_sigma


def role_column(role: str, species: str | None) -> str:
    """Column name of a role, e.g. ``role_column("outlet_conc", "MA") == "outlet_conc:MA"``.

    >>> role_column("feed_flow", None), role_column("outlet_conc", "MA")
    ('feed_flow', 'outlet_conc:MA')
    """
    return role if species is None else f"{role}:{species}"


def _tag_sigma_array(tag, values: np.ndarray, level_span: float | None = None) -> np.ndarray:
    """Standard uncertainty of each reading of a tag, in the SI unit of its values.

    A level's ``"x %"`` is x % of span (common practice, no source: level transmitters are
    specified in % of calibrated span): for a level in % that is an absolute x/100 of the
    fraction; for a level in a length unit, x/100 of ``level_span`` (the level range of the
    unit's volume table [m]), or x % of reading where there is no table. An absolute level
    sigma is in the tag's kind: a length (``"5 mm"``) for a length unit, a fraction for %.
    """
    if tag.sigma is None:
        # a tag without a stated uncertainty gets 1 % of reading, so that it can still be combined
        # (common practice, no source: a typical process-instrument uncertainty)
        return np.maximum(0.01 * np.abs(values), 1e-12)
    kind = ROLE_KIND[tag.role]
    if kind == "level":
        percent_level = tag.unit.strip() in ("%", "percent")
        if tag.sigma.strip().endswith("%"):
            x = float(tag.sigma.strip()[:-1]) / 100.0
            if percent_level:
                return np.full(values.shape, x)        # "0.5 %" of span: an absolute 0.005 of the fraction
            if level_span is not None and level_span > 0:
                return np.full(values.shape, x * level_span)
            return x * np.abs(values)
        kind = "dimensionless" if percent_level else "length"
    rel, absolute = tag_sigma(tag, kind)
    return rel * np.abs(values) + absolute


def _run_lengths(v: np.ndarray) -> np.ndarray:
    """Length of the run of identical consecutive values each element belongs to (NaN: 1).

    >>> _run_lengths(np.array([1.0, 1.0, 1.0, 2.0, np.nan, 3.0, 3.0])).tolist()
    [3, 3, 3, 1, 1, 2, 2]
    """
    n = len(v)
    if n == 0:
        return np.ones(0, dtype=int)
    change = np.ones(n, dtype=bool)
    change[1:] = ~((v[1:] == v[:-1]) & np.isfinite(v[1:]))
    starts = np.flatnonzero(change)
    lengths = np.diff(np.append(starts, n))
    return np.repeat(lengths, lengths)


def _combine(tags, values: pd.DataFrame, valid: pd.DataFrame, level_span: float | None = None
             ) -> tuple[np.ndarray, np.ndarray]:
    """Inverse-variance weighted mean of the valid readings of several tags, and its sigma."""
    num = np.zeros(len(values))
    den = np.zeros(len(values))
    for tag in tags:
        v = values[tag.tag].to_numpy(dtype=float)
        ok = valid[tag.tag].to_numpy(dtype=bool) & np.isfinite(v)
        s = _tag_sigma_array(tag, v, level_span)
        if tag.sampling == "lab":
            s = s * np.sqrt(_run_lengths(v))
        # a relative uncertainty of a zero reading (a stopped flow) is not zero: floor it at a
        # thousandth of the tag's typical magnitude
        typical = np.nanmedian(np.abs(v[ok])) if ok.any() else 0.0
        s = np.maximum(s, 1e-3 * typical if typical > 0 else 1e-12)
        w = np.where(ok, 1.0 / np.where(ok, s, 1.0) ** 2, 0.0)
        num += np.where(ok, w * np.nan_to_num(v), 0.0)
        den += w
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(den > 0, num / den, np.nan), np.where(den > 0, 1.0 / np.sqrt(den), np.nan)


def role_frame(values: pd.DataFrame, valid: pd.DataFrame, volume: pd.Series, model: UnitModel) -> pd.DataFrame:
    """Combine per-tag SI values into one column per role (see module docstring).

    Parameters
    ----------
    values : DataFrame
        Per-tag values on the time grid, SI. [SI per tag]
    valid : DataFrame of bool
        Same shape; False where a value must not be used.
    volume : Series
        Liquid volume on the grid. [m^3]
    model : UnitModel
        The unit.

    Returns
    -------
    DataFrame
        Role columns and their uncertainties on the same index.
    """
    out: dict[str, np.ndarray] = {}
    groups: dict[str, list] = {}
    table = model.level_table
    level_span = float(table[-1, 0] - table[0, 0]) if table is not None and len(table) > 1 else None   # [SI]
    for tag in model.tags:
        if tag.tag in values.columns and not tag.role.startswith("stream_"):  # flowsheet meters: network_step
            groups.setdefault(role_column(tag.role, tag.species), []).append(tag)
    for col, tags in groups.items():
        value = np.full(len(values), np.nan)
        sigma = np.full(len(values), np.nan)
        # online instruments first; the laboratory fills the gaps (its values are carried
        # forward for hours, so where an online reading exists it is the fresher one)
        for rank in (0, 1):
            ranked = [t for t in tags if (t.sampling == "lab") == bool(rank)]
            if not ranked:
                continue
            v_r, s_r = _combine(ranked, values, valid, level_span)
            fill = ~np.isfinite(value) & np.isfinite(v_r)
            value = np.where(fill, v_r, value)
            sigma = np.where(fill, s_r, sigma)
        out[col] = value
        out[f"sigma:{col}"] = sigma
    out["volume"] = volume.reindex(values.index).to_numpy(dtype=float)
    for sp in model.species:
        col = role_column("feed_conc", sp)
        nominal = model.feed.get(sp)
        if nominal is None:
            continue
        measured = out.get(col, np.full(len(values), np.nan))
        use_nominal = ~np.isfinite(measured)
        out[col] = np.where(use_nominal, nominal, measured)
        # the nominal feed composition is a specification, not a measurement: 2 % of value
        # (common practice, no source)
        # (a species specified absent from the feed is known exactly: sigma 0)
        sig_nom = 0.02 * abs(nominal)
        out[f"sigma:{col}"] = np.where(use_nominal, sig_nom, out.get(f"sigma:{col}", np.full(len(values), sig_nom)))
        out[f"nominal:{col}"] = use_nominal
    return pd.DataFrame(out, index=values.index)
