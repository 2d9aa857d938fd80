"""First back-calculation of a unit's performance from its role frame (pure, vectorised).

Steps, each over the whole time axis at once:

1. component molar flows in and out, ``F_i = Q C_i``;
2. extent rates of reaction from the measured species (least squares on the
   stoichiometric matrix, :func:`kinetrace.chemistry.extents_from_flows`);
   where the measured species do not determine every extent, the main reaction is
   taken to consume all of the key reactant (``rate_basis = "key_reactant"``);
3. concentrations of unmeasured species rebuilt from the extents,
   ``C_i = (F_i,in + sum_j nu_ij xi_j) / Q_out``;
4. conversion ``X = 1 - Q_out C_A / (Q_in C_A,in)`` and the consumption rate of the
   key reactant from the steady-state CSTR design equation ``-r_A = F_A0 X / V``
   (Fogler, Eq. 2-13);
5. the rate of each reaction ``r_j = xi_j / V``, its apparent rate constant from the
   configured rate law at the outlet concentrations and temperature, and that
   constant normalised to the reference temperature by Arrhenius,
   ``k_ref = k exp[(Ea/R)(1/T - 1/T_ref)]``;
6. activity of the catalyst ``a = k_ref / k_ref,fresh`` (Butt & Petersen 1988);
7. production rate of the target product ``Q_out C_P`` against the target.

The design equation holds at steady state only; the ``steady`` column says where
(Cao & Rhinehart 1995 test on feed flow, temperature and outlet key reactant), and
only steady rows should be read as kinetics.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..chemistry import conversion, extents_from_flows, product_yield, selectivity
from ..config import UnitModel
from ..errors import DataQualityError
from ..kinetics import arrhenius, ratelaws
from ..kinetics.steady import detect_steady
from ..reactor import key_reactant_rate, residence_time
from .roles import role_column

#: Output columns and their units (SI). Reaction-specific columns carry ``:<reaction id>``.
COLUMNS: dict[str, str] = {
    "feed_flow": "m3/s", "outlet_flow": "m3/s", "temperature": "K", "volume": "m3",
    "residence_time": "s", "conversion": "-", "key_rate": "mol/(m3 s)",
    "yield": "-", "selectivity": "-",
    "rate": "mol/(m3 s)", "k_apparent": "SI, (mol/m3)^(1-n)/s", "k_ref": "SI, (mol/m3)^(1-n)/s",
    "activity": "-", "production": "mol/s", "production_mass": "kg/s", "target_mass": "kg/s",
    "production_ratio": "-", "steady": "bool", "rate_basis": "text",
}


def _conc_matrix(roles: pd.DataFrame, model: UnitModel, role: str) -> np.ndarray:
    cols = [role_column(role, sp) for sp in model.species]
    return np.column_stack([roles[c].to_numpy(dtype=float) if c in roles else np.full(len(roles), np.nan)
                            for c in cols])


def steady_mask(roles: pd.DataFrame, model: UnitModel, *, min_duration: int = 4,
                critical_value: float = 1.73) -> pd.Series:
    """Steady rows of a unit: Cao & Rhinehart (1995) test on feed flow, temperature and outlet key reactant.

    Parameters
    ----------
    roles : DataFrame
        Role frame on a regular grid.
    model : UnitModel
        The unit.
    min_duration : int
        Shortest steady run kept. [grid steps]
    critical_value : float
        Critical ratio; 1.73 is the 99th percentile of the null distribution for
        (0.2, 0.1, 0.1) (REFERENCES.md, computed).

    Returns
    -------
    Series of bool
    """
    key = [c for c in ("feed_flow", "temperature", role_column("outlet_conc", model.key_reactant)) if c in roles]
    data = roles[key].interpolate(limit=2, limit_area="inside")
    ok = data.notna().all(axis=1)
    if ok.sum() < 10:
        return pd.Series(False, index=roles.index)
    res = detect_steady(data[ok], min_duration=min_duration, critical_value=critical_value)
    return res.mask.reindex(roles.index, fill_value=False).astype(bool)


def back_calculate(roles: pd.DataFrame, model: UnitModel, *, fresh_k_ref: dict[str, float] | None = None,
                   steady: pd.Series | None = None) -> pd.DataFrame:
    """Conversion, rates, apparent and reference rate constants, activity and production.

    Parameters
    ----------
    roles : DataFrame
        Role frame from :func:`kinetrace.pipeline.roles.role_frame`. [SI]
    model : UnitModel
        The unit.
    fresh_k_ref : dict, optional
        Fresh-catalyst k_ref of each reaction [SI]; default from the configured fresh
        period (median over its steady rows), else the rate law's configured k_ref.
    steady : Series of bool, optional
        Steady rows; computed with :func:`steady_mask` if not given.

    Returns
    -------
    DataFrame
        Columns listed in :data:`COLUMNS` (reaction-specific ones as ``name:<reaction>``).
        ``attrs["fresh_basis"]`` says where each fresh k_ref came from.
    """
    for col in ("feed_flow", "outlet_flow", "temperature", "volume"):
        if col not in roles:
            raise DataQualityError(f"unit {model.id}: no {col} data")
    n = len(roles)
    q_in = roles["feed_flow"].to_numpy(dtype=float)
    q_out = roles["outlet_flow"].to_numpy(dtype=float)
    temp = roles["temperature"].to_numpy(dtype=float)
    vol = roles["volume"].to_numpy(dtype=float)
    c_in = _conc_matrix(roles, model, "feed_conc")
    c_out = _conc_matrix(roles, model, "outlet_conc")
    f_in = q_in[:, None] * c_in
    f_out = q_out[:, None] * c_out
    xi = extents_from_flows(f_in, f_out, model.nu)
    ka, kp = model.key_index, model.product_index
    main = 0
    nu_a = model.nu[ka, main]
    basis = np.where(np.isfinite(xi).all(axis=1), "extents", "key_reactant")
    # where the extents are not determined, the main reaction takes all of A consumed
    xi_fallback = np.full_like(xi, np.nan)
    xi_fallback[:, main] = (f_out[:, ka] - f_in[:, ka]) / nu_a
    if xi.shape[1] > 1:
        xi_fallback[:, 1:] = 0.0
    xi = np.where(np.isfinite(xi).all(axis=1, keepdims=True), xi, xi_fallback)
    # rebuild unmeasured outlet concentrations from the extents
    with np.errstate(invalid="ignore", divide="ignore"):
        c_rebuilt = (f_in + xi @ model.nu.T) / q_out[:, None]
    c_use = np.where(np.isfinite(c_out), c_out, c_rebuilt)
    out = pd.DataFrame(index=roles.index)
    out["feed_flow"], out["outlet_flow"], out["temperature"], out["volume"] = q_in, q_out, temp, vol
    out["residence_time"] = residence_time(vol, q_in)
    x = conversion(f_in[:, ka], f_out[:, ka])
    out["conversion"] = x
    out["key_rate"] = key_reactant_rate(f_in[:, ka], x, vol)
    f_p_out = np.where(np.isfinite(f_out[:, kp]), f_out[:, kp], q_out * c_use[:, kp])
    nu_p = model.nu[kp, main]
    out["yield"] = product_yield(f_in[:, ka], f_in[:, kp], f_p_out, nu_a, nu_p)
    out["selectivity"] = selectivity(f_in[:, ka], f_out[:, ka], f_in[:, kp], f_p_out, nu_a, nu_p)
    out["rate_basis"] = basis
    conc = {sp: c_use[:, i] for i, sp in enumerate(model.species)}
    with np.errstate(invalid="ignore", divide="ignore"):
        rates = xi / np.where(vol > 0, vol, np.nan)[:, None]
    if steady is None:
        steady = steady_mask(roles, model)
    out["steady"] = steady.reindex(roles.index, fill_value=False).to_numpy(dtype=bool)
    fresh_basis: dict[str, str] = {}
    fresh_k_ref = dict(fresh_k_ref or {})
    for j, rid in enumerate(model.reaction_ids):
        out[f"rate:{rid}"] = rates[:, j]
        law = model.rate_laws.get(rid)
        if law is None:
            continue
        k_app = ratelaws.apparent_rate_constant(law.method, rates[:, j], conc, temperature=temp, **law.params)
        k_ref = arrhenius.normalise_to_reference(k_app, temp, law.activation_energy, law.reference_temperature)
        out[f"k_apparent:{rid}"] = k_app
        out[f"k_ref:{rid}"] = k_ref
        if rid not in fresh_k_ref:
            fresh_k_ref[rid], fresh_basis[rid] = _fresh_baseline(out, rid, law.k_ref, model.fresh_period)
        else:
            fresh_basis[rid] = "given"
    main_id = model.reaction_ids[main]
    if f"k_ref:{main_id}" in out:
        out["activity"] = out[f"k_ref:{main_id}"] / fresh_k_ref[main_id]
    out["production"] = f_p_out
    out["production_mass"] = f_p_out * model.molar_masses[kp]
    out["target_mass"] = model.target_rate * model.molar_masses[kp]
    out["production_ratio"] = out["production"] / model.target_rate
    out.attrs["fresh_k_ref"] = fresh_k_ref
    out.attrs["fresh_basis"] = fresh_basis
    assert len(out) == n
    return out


def _fresh_baseline(out: pd.DataFrame, rid: str, configured: float, period) -> tuple[float, str]:
    """Median k_ref over the steady rows of the fresh period, else the configured k_ref."""
    if period is not None:
        start, end = (pd.Timestamp(t) for t in period)
        start = start.tz_localize("UTC") if start.tzinfo is None else start.tz_convert("UTC")
        end = end.tz_localize("UTC") if end.tzinfo is None else end.tz_convert("UTC")
        sel = out.loc[(out.index >= start) & (out.index < end)]
        vals = sel.loc[sel["steady"], f"k_ref:{rid}"].dropna()
        if len(vals) >= 3:
            return float(vals.median()), f"median of {len(vals)} steady rows {start:%Y-%m-%d %H:%M} to {end:%Y-%m-%d %H:%M} UTC"
    return float(configured), "configured k_ref of the rate law"
