"""Self-calibration step of the daily check: the rate-law parameters the data say, used downstream.

1. The steady history (new rows and stored ones) is cut into stretches of at most 12 h inside
   steady windows and inside one catalyst charge, and averaged (rates from the dynamic balances,
   reconciled outlet concentrations, temperature, time).
2. Charges restart at each configured catalyst change; a charge starting at a change, or the
   charge holding the configured fresh period, starts at activity 1; a charge that went on
   stream before the data starts at a fitted activity.
3. :func:`kinetrace.kinetics.calibration.calibrate` estimates every rate law and the activity
   history together; what cannot be determined is held at its configured value, and said.
4. :func:`fitted_model` gives the unit with the fitted laws (fresh k_ref = fitted k_ref): the
   back-calculation is re-run with it, so k_ref(t), activity, trend, charts, forecast, what-if
   and the shortfall attribution all use one parameter set. :func:`rederive` recomputes the
   rate constants of stored history rows with it.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..config import UnitModel
from ..config.model import RateLawModel
from ..errors import KinetraceError
from ..kinetics import arrhenius, ratelaws
from ..kinetics.calibration import Calibration, LawSpec, calibrate
from ..kinetics.steady import steady_windows
from .roles import role_column

#: Longest stretch averaged into one point of the fit. [rows of the grid]
STRETCH_ROWS = 12
#: Shortest stretch kept. [rows]
MIN_STRETCH_ROWS = 3


@dataclass
class CalibrationOutcome:
    """What the calibration step found for one unit."""

    calibration: Calibration | None
    model: UnitModel | None            # the unit with the fitted laws, or None (configured values used)
    rows: pd.DataFrame = field(default_factory=pd.DataFrame)   # parameter rows for the store
    problems: list[str] = field(default_factory=list)

    @property
    def statement(self) -> str:
        """Which parameter set the results use, in words."""
        if self.model is None:
            return "configured rate-law parameters (" + ("; ".join(self.problems) or "no calibration") + ")"
        c = self.calibration
        held = int((c.parameters["status"] == "held").sum())
        return (f"rate-law parameters estimated from {c.n_stretches} steady stretches with the activity "
                f"history ({c.decay_method} decay)" + (f"; {held} held at configured values" if held else ""))


def _species_of(law: RateLawModel) -> list[str]:
    return sorted(set(law.params.get("orders", {})) | set(law.params.get("adsorption", {}) or {})
                  | set(law.params.get("reverse_orders", {}) or {}))


def _utc(t) -> pd.Timestamp:
    ts = pd.Timestamp(t)
    return ts.tz_localize("UTC") if ts.tzinfo is None else ts.tz_convert("UTC")


def charges(times: pd.DatetimeIndex, model: UnitModel) -> tuple[np.ndarray, np.ndarray, dict[int, bool], list]:
    """Catalyst charge, time on stream and known-fresh flags of each time.

    Parameters
    ----------
    times : DatetimeIndex
        Times (UTC).
    model : UnitModel
        Its ``catalyst_changes`` and ``fresh_period``.

    Returns
    -------
    (charge index [int], time on stream [s], {charge: starts fresh}, charge start times)
    """
    changes = sorted(_utc(c) for c in model.catalyst_changes)
    marks = pd.DatetimeIndex(changes) if changes else pd.DatetimeIndex([], tz="UTC")
    charge = marks.searchsorted(times, side="right") if len(marks) else np.zeros(len(times), dtype=int)
    first_start = _utc(model.fresh_period[0]) if model.fresh_period else (times[0] if len(times) else None)
    starts = [first_start, *changes]
    origin = pd.DatetimeIndex([starts[c] for c in charge]) if len(times) else pd.DatetimeIndex([], tz="UTC")
    tos = np.clip((times - origin).total_seconds().to_numpy(dtype=float), 0.0, None)
    fresh = {0: model.fresh_period is not None, **{i + 1: True for i in range(len(changes))}}
    return np.asarray(charge, dtype=int), tos, fresh, starts


def dynamic_rates(series: pd.DataFrame, model: UnitModel) -> dict[str, np.ndarray]:
    """Rates of reaction from the dynamic balances, r_j = xi_j / V with F_in - F_out - d(V C)/dt = nu xi.

    The accumulation d(V C_i)/dt of each reconciled outlet concentration by a Savitzky-Golay
    derivative (Savitzky & Golay 1964) over 5 rows; extents by least squares on the measured
    species (:func:`kinetrace.chemistry.extents_from_flows`). Where they are not determined, the
    steady rates (``rate:<rxn>``) are kept. Near steady state the two agree; after a set-point step
    the dynamic ones stay right while the steady ones lag. [mol/(m^3 s)]
    """
    from ..chemistry import extents_from_flows
    from .derivatives import smoothed_derivative

    n = len(series)
    out = {rid: series[f"rate:{rid}"].to_numpy(dtype=float) for rid in model.reaction_ids if f"rate:{rid}" in series}
    needed = ("feed_flow", "outlet_flow", "volume")
    if n < 5 or any(c not in series for c in needed):
        return out

    def conc(role):
        return np.column_stack([series[c].to_numpy(dtype=float) if (c := f"reconciled:{role_column(role, sp)}") in series
                                else np.full(n, np.nan) for sp in model.species])

    q_in, q_out, vol = (series[c].to_numpy(dtype=float) for c in needed)
    c_in, c_out = conc("feed_conc"), conc("outlet_conc")
    dt = float(np.median(np.diff(series.index.asi8))) / 1e9
    acc = smoothed_derivative(vol[:, None] * c_out, dt)
    with np.errstate(invalid="ignore", divide="ignore"):
        xi = extents_from_flows(q_in[:, None] * c_in, q_out[:, None] * c_out + acc, model.nu)
        rates = xi / vol[:, None]
    for j, rid in enumerate(model.reaction_ids):
        if rid in out:
            out[rid] = np.where(np.isfinite(rates[:, j]), rates[:, j], out[rid])
    return out


def stretch_means(series: pd.DataFrame, model: UnitModel) -> pd.DataFrame:
    """Means over steady stretches (<= 12 rows, one charge) of rates, concentrations and temperature.

    Parameters
    ----------
    series : DataFrame
        Back-calculated series with ``steady``, ``running``, ``temperature`` [K], ``rate:<rxn>``
        [mol/(m^3 s)] and ``reconciled:outlet_conc:<species>`` [mol/m^3]; the rates averaged are those
        of the dynamic balances (:func:`dynamic_rates`).
    model : UnitModel

    Returns
    -------
    DataFrame
        One row per stretch: ``time`` (mid, UTC), ``temperature``, ``rate:<rxn>``, species columns,
        ``charge``, ``time_on_stream`` [s], ``rows``.
    """
    steady = series["steady"].astype(bool).to_numpy() & (series.get("running", pd.Series(1.0, index=series.index))
                                                          .to_numpy(dtype=float) > 0)
    charge, tos, _, _ = charges(series.index, model)
    # a window never spans a charge change
    cut = np.r_[False, charge[1:] != charge[:-1]]
    w = steady_windows(pd.Series(steady & ~cut, index=series.index), min_duration=MIN_STRETCH_ROWS)
    group = np.full(len(series), -1)
    n_groups = 0
    for a, b in zip(w["start_pos"], w["stop_pos"]):
        k = np.arange(b - a) // STRETCH_ROWS
        group[a:b] = n_groups + k
        n_groups += int(k.max()) + 1
    cols = {"temperature": series["temperature"].to_numpy(dtype=float),
            "time": series.index.asi8.astype(float) / 1e9, "charge": charge.astype(float),
            "time_on_stream": tos}
    for rid, r in dynamic_rates(series, model).items():
        if rid in model.rate_laws:
            cols[f"rate:{rid}"] = r
    for sp in {s for law in model.rate_laws.values() for s in _species_of(law)}:
        c = series.get(f"reconciled:{role_column('outlet_conc', sp)}")
        if c is not None:
            cols[sp] = c.to_numpy(dtype=float)
    frame = pd.DataFrame(cols)
    frame["group"] = group
    frame = frame[frame["group"] >= 0]
    means = frame.groupby("group").mean()
    means["rows"] = frame.groupby("group").size()
    means = means[means["rows"] >= MIN_STRETCH_ROWS]
    means["charge"] = means["charge"].round().astype(int)
    means["time"] = pd.to_datetime(means["time"], unit="s", utc=True)
    return means.reset_index(drop=True)


def _spec(law: RateLawModel) -> LawSpec:
    return LawSpec(law.method, law.k_ref, law.activation_energy, law.reference_temperature, law.params,
                   hold=law.hold, fit_orders=law.fit_orders, uncertainty=law.uncertainty, prior=law.prior)


def calibrate_unit(series: pd.DataFrame, model: UnitModel) -> CalibrationOutcome:
    """Jointly estimate the unit's rate laws and activity history from its steady stretches.

    Parameters
    ----------
    series : DataFrame
        The unit's back-calculated history (new and stored rows), see :func:`stretch_means`. [SI]
    model : UnitModel
        The unit with its configured (starting) values.

    Returns
    -------
    CalibrationOutcome
        ``model`` is None where the calibration could not be done (reason in ``problems``).
    """
    if not model.rate_laws or "steady" not in series:
        return CalibrationOutcome(None, None, problems=["no rate law or no steady flags"])
    means = stretch_means(series, model)
    laws, problems = {}, []
    for rid, law in model.rate_laws.items():
        missing = [sp for sp in _species_of(law) if sp not in means]
        if f"rate:{rid}" not in means or missing:
            problems.append(f"reaction {rid}: no reconciled concentration of {', '.join(missing)}; configured values used"
                            if missing else f"reaction {rid}: no rates; configured values used")
            continue
        laws[rid] = _spec(law)
    if not laws:
        return CalibrationOutcome(None, None, problems=problems)
    _, _, fresh, _ = charges(series.index, model)
    try:
        cal = calibrate({rid: means[f"rate:{rid}"].to_numpy() for rid in laws},
                        {sp: means[sp].to_numpy() for sp in means.columns if sp in model.species},
                        means["temperature"].to_numpy(), means["time_on_stream"].to_numpy(),
                        means["charge"].to_numpy(), laws, fresh_charges=fresh,
                        catalysed=model.catalysed_reactions, decay_methods=model.decay_law,
                        times=means["time"].astype("int64").to_numpy(dtype=float))
    except KinetraceError as exc:
        return CalibrationOutcome(None, None, problems=problems + [str(exc)])
    fitted = fitted_model(model, cal)
    return CalibrationOutcome(cal, fitted, store_rows(cal, model), problems + list(cal.messages))


def fitted_model(model: UnitModel, cal: Calibration) -> UnitModel:
    """The unit with the calibrated rate laws (reactions not calibrated keep their configured law)."""
    laws = dict(model.rate_laws)
    for rid, fit in cal.laws.items():
        old = laws[rid]
        params = {k: (dict(v) if isinstance(v, dict) else v) for k, v in old.params.items()}
        params["orders"] = dict(fit["orders"])
        if "adsorption" in params:
            params["adsorption"] = dict(fit["adsorption"])
        laws[rid] = dataclasses.replace(old, k_ref=fit["k_ref"], activation_energy=fit["activation_energy"],
                                        params=params, source="fitted")
    return dataclasses.replace(model, rate_laws=laws)


_NAMES = {"k_ref": "k_ref_fitted", "activation_energy": "activation_energy"}


def store_rows(cal: Calibration, model: UnitModel) -> pd.DataFrame:
    """Parameter rows for the results store: each with its status, configured value and reason."""
    rows = []
    for r in cal.parameters.to_dict("records"):
        if r["reaction"]:
            name = f"{_NAMES.get(r['name'], r['name'])}:{r['reaction']}"
            unit = r["unit_of_measure"]
        else:
            name = f"calibration_{r['name']}"
            unit = r["unit_of_measure"]
        how = (f"held at the configured value: {r['reason']}" if r["status"] == "held" else
               f"{r['status']} jointly with the activity history ({cal.decay_method} decay) over "
               f"{cal.n_stretches} steady stretches; 95 % profile-likelihood interval")
        if np.isfinite(r["configured"]):
            how += f"; configured {r['configured']:.4g}"
        rows.append({"name": name, "value": r["value"], "std_error": r["std_error"], "ci_low": r["ci_low"],
                     "ci_high": r["ci_high"], "ci_level": r["ci_level"], "unit_of_measure": unit, "method": how})
    rows.append({"name": "parameter_set", "value": 1.0, "unit_of_measure": "-",
                 "method": "fitted in this run: rate constants, activity, forecast and what-if use these values"})
    for m, row in cal.decay_candidates.iterrows():
        rows.append({"name": f"calibration_qaicc:{m}", "value": float(row["aicc"]), "unit_of_measure": "-",
                     "method": f"QAICc of the {m} decay family in the joint fit"})
    return pd.DataFrame(rows)


def parameter_uncertainty(series: pd.DataFrame, model: UnitModel, cal: Calibration | None) -> dict[str, np.ndarray]:
    """Standard uncertainty of each row's k_ref from the uncertainty of the rate-law parameters. [SI of k]

    Every parameter k_ref(t) depends on (Ea, adsorption constants, orders): an estimated one with
    its standard error from the calibration, a held one with its configured standard uncertainty.
    One-sided finite difference of k_ref in each (delta method, JCGM 100:2008 eq. 10), combined in
    quadrature (parameters taken as independent). Without a calibration every parameter counts as
    held at its configured value.
    """
    out = {}
    for rid, law in model.rate_laws.items():
        if f"k_ref:{rid}" not in series:
            continue
        names = ["activation_energy", *(f"K_{s}" for s in law.params.get("adsorption", {}) or {}),
                 *(f"order_{s}" for s in law.fit_orders)]
        sd = {n: (law.uncertainty.get("activation_energy", 20e3) if n == "activation_energy" else
                  law.uncertainty.get("adsorption", np.log(2.0)) if n.startswith("K_") else
                  law.uncertainty.get("order", 0.5)) for n in names}
        if cal is not None and rid in cal.laws:
            p = cal.parameters[(cal.parameters["reaction"] == rid)].set_index("name")
            for n in names:
                if n in p.index and p.loc[n, "status"] != "held":
                    se, v = float(p.loc[n, "std_error"]), float(p.loc[n, "value"])
                    sd[n] = se / v if n.startswith("K_") and v > 0 else se
        conc = {sp: series.get(f"reconciled:{role_column('outlet_conc', sp)}") for sp in _species_of(law)}
        if any(v is None for v in conc.values()):
            continue
        conc = {k: v.to_numpy(dtype=float) for k, v in conc.items()}
        rate = series[f"rate:{rid}"].to_numpy(dtype=float)
        temp = series["temperature"].to_numpy(dtype=float)
        base = series[f"k_ref:{rid}"].to_numpy(dtype=float)
        var = np.zeros(len(series))
        for name, u in sd.items():
            ea, params = law.activation_energy, {k: (dict(v) if isinstance(v, dict) else v) for k, v in law.params.items()}
            if name == "activation_energy":
                ea = ea + u
            elif name.startswith("K_"):
                params["adsorption"][name[2:]] *= np.exp(u)
            else:
                params["orders"][name[6:]] += u
            with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
                k = ratelaws.apparent_rate_constant(law.method, rate, conc, temperature=temp, **params)
                k = arrhenius.normalise_to_reference(k, temp, ea, law.reference_temperature)
            var += np.nan_to_num((np.asarray(k, dtype=float) - base) ** 2)
        out[rid] = np.sqrt(var)
    return out


def rederive(series: pd.DataFrame, model: UnitModel, fresh_k_ref: dict[str, float]) -> pd.DataFrame:
    """Rate constants and activity of stored rows recomputed with ``model``'s laws.

    ``k_apparent:<rxn>``, ``k_ref:<rxn>`` from ``rate:<rxn>``, the reconciled outlet
    concentrations and the temperature (as :func:`kinetrace.pipeline.backcalc.back_calculate`);
    ``activity`` = k_ref / fresh k_ref of the main reaction. Rows without the concentrations
    keep their values.
    """
    out = series.copy()
    temp = out["temperature"].to_numpy(dtype=float)
    running = out.get("running", pd.Series(1.0, index=out.index)).to_numpy(dtype=float) > 0
    for rid, law in model.rate_laws.items():
        conc = {sp: out.get(f"reconciled:{role_column('outlet_conc', sp)}") for sp in _species_of(law)}
        if f"rate:{rid}" not in out or any(v is None for v in conc.values()):
            continue
        conc = {k: v.to_numpy(dtype=float) for k, v in conc.items()}
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            k_app = ratelaws.apparent_rate_constant(law.method, out[f"rate:{rid}"].to_numpy(dtype=float), conc,
                                                    temperature=temp, **law.params)
        k_app = np.where(running, np.asarray(k_app, dtype=float), np.nan)
        k_ref = arrhenius.normalise_to_reference(k_app, temp, law.activation_energy, law.reference_temperature)
        ok = np.all([np.isfinite(v) for v in conc.values()], axis=0)
        out[f"k_apparent:{rid}"] = np.where(ok, k_app, out.get(f"k_apparent:{rid}", np.nan))
        out[f"k_ref:{rid}"] = np.where(ok, k_ref, out.get(f"k_ref:{rid}", np.nan))
    main = model.main_reaction
    if f"k_ref:{main}" in out and main in fresh_k_ref:
        out["activity"] = out[f"k_ref:{main}"] / fresh_k_ref[main]
    return out
