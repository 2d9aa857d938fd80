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
(steady inputs by the Cao & Rhinehart 1995 test, and a small accumulation term; see
:func:`steady_mask`), and
only steady rows should be read as kinetics.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..chemistry import conversion, extents_from_flows, product_yield, selectivity
from ..config import UnitModel
from ..errors import DataQualityError
from ..kinetics import arrhenius, ratelaws
from ..kinetics.activity import fresh_baseline
from ..kinetics.steady import detect_steady, steady_windows
from ..reactor import key_reactant_rate, residence_time
from .derivatives import smoothed_derivative
from .roles import role_column

#: Output columns and their units (SI). Reaction-specific columns carry ``:<reaction id>``.
COLUMNS: dict[str, str] = {
    "feed_flow": "m3/s", "outlet_flow": "m3/s", "temperature": "K", "volume": "m3",
    "residence_time": "s", "conversion": "-", "key_rate": "mol/(m3 s)",
    "yield": "-", "selectivity": "-",
    "rate": "mol/(m3 s)", "k_apparent": "SI, (mol/m3)^(1-n)/s", "k_ref": "SI, (mol/m3)^(1-n)/s",
    "activity": "-", "production": "mol/s", "production_mass": "kg/s", "target_mass": "kg/s",
    "production_ratio": "-", "steady": "bool", "rate_basis": "text", "running": "-",
    "flowsheet_flow": "m3/s", "flowsheet_conc": "mol/m3", "flowsheet_extent": "mol/s",   # network_step
    "analyzer_bias": "-", "analyzer_bias_sd": "-", "analyzer_bias_rate": "1/d",          # analyzer_step
    "analyzer_bias_rate_sd": "1/d", "analyzer_corrected": "-", "analyzer_lab_diff": "-",
    "analyzer_lab_diff_sd": "-",
}


def _conc_matrix(roles: pd.DataFrame, model: UnitModel, role: str) -> np.ndarray:
    cols = [role_column(role, sp) for sp in model.species]
    return np.column_stack([roles[c].to_numpy(dtype=float) if c in roles else np.full(len(roles), np.nan)
                            for c in cols])


def restart_positions(index: pd.DatetimeIndex, events, step: float) -> np.ndarray:
    """Positions of the first interval of ``index`` that ends after each event (the interval
    holding the event starts the new stretch). [rows]

    Parameters
    ----------
    index : DatetimeIndex
        Interval starts (UTC), sorted.
    events : sequence of timestamps
        Event times (UTC; a time without a zone is UTC).
    step : float
        Interval length. [s]

    Returns
    -------
    ndarray of int
        Sorted, unique; ``len(index)`` for an event after the last interval.

    >>> idx = pd.date_range("2027-01-01", periods=6, freq="h", tz="UTC")
    >>> restart_positions(idx, ["2027-01-01 02:00", "2027-01-01 03:30Z"], 3600.0).tolist()
    [2, 3]
    """
    if not len(events) or not len(index):
        return np.zeros(0, dtype=int)
    ends = (index + pd.Timedelta(seconds=step)).as_unit("ns").asi8
    ev = np.array([_utc(e).value for e in events], dtype=np.int64)
    return np.unique(np.searchsorted(ends, ev, side="right"))


def steady_mask(roles: pd.DataFrame, model: UnitModel, key_rate, *, max_accumulation: float = 0.02,
                method: str = "drift_variance", window: int = 6, critical_value: float = 1.73,
                min_duration: int = 3, derivative_window: int = 5, events=None) -> pd.Series:
    """Rows where the steady-state design equation may be trusted.

    Two conditions, both needed:

    1. the inputs are steady: feed flow and temperature (and volume, where it varies) pass a
       steady-state test, by default the windowed drift-and-variance test over ``window``
       intervals (slope t-test and variance ratio, :mod:`kinetrace.kinetics.steady`);
       ``method="cao_rhinehart"`` uses the Cao & Rhinehart (1995) filtered variance-ratio
       test at ``critical_value`` (1.73 is the null 99th percentile for l1 = 0.2, l2 = l3 = 0.1,
       REFERENCES.md). On hourly means the filtered variances of the latter remember a step
       for days (0.9^n), far longer than a reactor of a few hours' residence time needs to
       settle, so the windowed test, which forgets after ``window`` intervals, is the default;
    2. the accumulation term the steady-state design equation leaves out is small:
       ``|dC_A/dt + (C_A/V) dV/dt| <= max_accumulation * (-r_A)``, with the derivatives from a
       Savitzky-Golay filter (Savitzky & Golay 1964) over ``derivative_window`` rows. The
       design equation's relative error in the rate is about this ratio, so it bounds the
       error of k directly.

    The variance-ratio test alone is not used on the outlet concentration: hourly averages
    of an analyzer are smooth enough that slow feed-composition wander makes R large although
    the reactor is in quasi-steady state (autocorrelated data, as Cao & Rhinehart caution).

    Parameters
    ----------
    roles : DataFrame
        Role frame on a regular grid. [SI]
    model : UnitModel
        The unit.
    key_rate : array_like
        -r_A from the design equation. [mol/(m^3 s)]
    max_accumulation : float
        Largest allowed accumulation as a fraction of the rate. [-]
    method : str
        ``drift_variance`` or ``cao_rhinehart``.
    window : int
        Window of the drift-and-variance test. [grid steps]
    critical_value : float
        Critical ratio of the variance-ratio test. [-]
    min_duration : int
        Shortest steady run kept. [rows]
    derivative_window : int
        Savitzky-Golay window. [rows]
    events : sequence of timestamps, optional
        Times at which the steady-state test starts afresh; default every configured event of
        the unit (``model.event_times``: catalyst changes, shutdowns, restarts, feed changes ...).
        The interval holding an event is the first of the new stretch, so the first ``window``
        intervals after it are never steady (common practice, no source: a known upset ends a
        steady window whatever the test says).

    Returns
    -------
    Series of bool
    """
    idx = roles.index
    false = pd.Series(False, index=idx)
    if len(roles) < max(10, derivative_window):
        return false
    inputs = ["feed_flow", "temperature"]
    if model.fixed_volume is None and "volume" in roles:
        inputs.append("volume")
    data = roles[inputs].interpolate(limit=2, limit_area="inside")
    ok = data.notna().all(axis=1)
    if ok.sum() < 10:
        return false
    dt = float((idx[1] - idx[0]).total_seconds())
    restarts = restart_positions(data.index[ok], model.event_times if events is None else events, dt)
    if method == "cao_rhinehart":
        res = detect_steady(data[ok], method=method, min_duration=1, critical_value=critical_value, max_gap=2,
                            restarts=restarts)
    else:
        res = detect_steady(data[ok], method=method, min_duration=1, max_gap=2, window=window, restarts=restarts)
    inputs_steady = res.mask.reindex(idx, fill_value=False).to_numpy(dtype=bool)
    ca = roles[role_column("outlet_conc", model.key_reactant)].to_numpy(dtype=float)
    vol = roles["volume"].to_numpy(dtype=float)
    dca = smoothed_derivative(ca, dt, derivative_window)
    dv = smoothed_derivative(vol, dt, derivative_window)
    with np.errstate(invalid="ignore", divide="ignore"):
        acc = np.abs(dca + ca / vol * dv) / np.abs(np.asarray(key_rate, dtype=float))
    good = inputs_steady & (acc <= max_accumulation)
    # the variance-ratio test is causal and lags the start of a transient: looking back over the
    # record, a row counts as steady only when its neighbours do too (erosion by one row)
    good = good & np.concatenate([[False], good[:-1]]) & np.concatenate([good[1:], [False]])
    cut = restart_positions(idx, model.event_times if events is None else events, dt)
    good[cut[cut < len(idx)]] = False        # no steady run spans an event
    runs = steady_windows(pd.Series(good, index=idx), min_duration=min_duration)
    mask = np.zeros(len(idx), dtype=bool)
    for start, stop in zip(runs["start_pos"], runs["stop_pos"]):
        mask[start:stop] = True
    return pd.Series(mask, index=idx)


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
        steady = steady_mask(roles, model, out["key_rate"].to_numpy())
    out["steady"] = steady.reindex(roles.index, fill_value=False).to_numpy(dtype=bool)
    # rate constants mean nothing while the unit is (nearly) stopped or where the conversion is
    # outside (0, 1): there they are left out (NaN), not reported as numbers
    running = (q_in >= 0.5 * model.feed_flow_limits[0]) & (x > 0) & (x < 1)
    out["running"] = running.astype(float)
    fresh_basis: dict[str, str] = {}
    fresh_k_ref = dict(fresh_k_ref or {})
    for j, rid in enumerate(model.reaction_ids):
        out[f"rate:{rid}"] = rates[:, j]
        law = model.rate_laws.get(rid)
        if law is None:
            continue
        k_app = ratelaws.apparent_rate_constant(law.method, rates[:, j], conc, temperature=temp, **law.params)
        k_app = np.where(running, k_app, np.nan)
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
    """Median k_ref over the steady rows of the fresh period (at least 3), else the configured k_ref.

    The median is :func:`kinetrace.kinetics.activity.fresh_baseline` (``method="period"``).
    """
    if period is not None:
        start, end = (_utc(t) for t in period)
        mask = (out.index >= start) & (out.index < end) & out["steady"].to_numpy(dtype=bool)
        k = out[f"k_ref:{rid}"]
        if k[mask].notna().sum() >= 3:
            base = fresh_baseline(k, period=mask)
            return base.value, (f"median of {base.n_used} steady rows {start:%Y-%m-%d %H:%M} to "
                                f"{end:%Y-%m-%d %H:%M} UTC")
    return float(configured), "configured k_ref of the rate law"


def _utc(t) -> pd.Timestamp:
    """A time as a tz-aware UTC Timestamp; a naive time is taken as UTC."""
    ts = pd.Timestamp(t)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")
