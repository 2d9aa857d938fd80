"""Kinetics step of the daily check: the band of k_ref(t), and the rate law fitted to the history.

* **Band of k_ref.** The standard uncertainty of each interval's k_ref follows from the
  reconciled extent rate, outlet concentrations and temperature by the delta method
  (JCGM 100:2008, GUM eq. 13; :func:`kinetrace.kinetics.uncertainty.delta_method`), inputs
  taken as independent; ``k_ref_low:<rxn>`` and ``k_ref_high:<rxn>`` are k_ref -/+ 1.96 u.
* **Rate-law fit.** Over the steady windows (cut into stretches of at most 12 h and averaged),
  the rate of the main reaction divided by the catalyst activity trend (so that slow decay does
  not read as a temperature effect) is fitted by nonlinear least squares in the reference-
  temperature form (:func:`kinetrace.kinetics.estimation.fit_rate_law`): k_ref, Ea and, for a
  saturating law, the adsorption constants; 95 % intervals from the Jacobian. The configured law
  and one alternative (first-order power law beside a saturating law, and the reverse) are
  compared by AICc with a plain-language verdict (:func:`~kinetrace.kinetics.estimation.compare_models`).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..config import UnitModel
from ..errors import KinetraceError
from ..kinetics import arrhenius, ratelaws
from ..kinetics.estimation import compare_models, fit_rate_law
from ..kinetics.steady import steady_windows
from ..kinetics.uncertainty import delta_method
from .roles import role_column


def k_ref_band(series: pd.DataFrame, model: UnitModel, roles: pd.DataFrame, *,
               extra_sd: dict[str, np.ndarray] | None = None) -> pd.DataFrame:
    """Standard uncertainty and 95 % band of k_ref of every reaction with a rate law.

    Parameters
    ----------
    series : DataFrame
        Back-calculated series with the reconciliation columns (``extent_sd:<rxn>``,
        ``sd:outlet_conc:<sp>``). [SI]
    model : UnitModel
        The unit.
    roles : DataFrame
        Role frame used (for the temperature uncertainty ``sigma:temperature``). [SI]
    extra_sd : dict, optional
        Reaction id -> a further standard uncertainty of each row's k_ref, combined in
        quadrature (the configured uncertainty of parameters held at their configured value). [SI of k]

    Returns
    -------
    DataFrame
        ``k_ref_sd:<rxn>``, ``k_ref_low:<rxn>``, ``k_ref_high:<rxn>``. [SI of k]
    """
    out = pd.DataFrame(index=series.index)
    temp = series["temperature"].to_numpy(dtype=float)
    vol = series["volume"].to_numpy(dtype=float)
    sig_t = roles["sigma:temperature"].reindex(series.index).to_numpy(dtype=float) \
        if "sigma:temperature" in roles else np.zeros(len(series))
    for rid, law in model.rate_laws.items():
        if f"k_ref:{rid}" not in series or f"extent_sd:{rid}" not in series:
            continue
        species = sorted(set(law.params.get("orders", {})) | set(law.params.get("adsorption", {}))
                         | set(law.params.get("reverse_orders", {})))
        values = {"rate": series[f"rate:{rid}"].to_numpy(dtype=float), "temperature": temp}
        sds = {"rate": series[f"extent_sd:{rid}"].to_numpy(dtype=float) / vol, "temperature": sig_t}
        for sp in species:
            c = series.get(f"reconciled:{role_column('outlet_conc', sp)}")
            if c is None:
                continue
            values[f"c_{sp}"] = c.to_numpy(dtype=float)
            sd = series.get(f"sd:{role_column('outlet_conc', sp)}")
            sds[f"c_{sp}"] = np.zeros(len(series)) if sd is None else np.nan_to_num(sd.to_numpy(dtype=float))
        if any(f"c_{sp}" not in values for sp in species):
            continue

        def k_ref_of(rate, temperature, _law=law, _species=species, **conc):
            c = {sp: conc[f"c_{sp}"] for sp in _species}
            k = ratelaws.apparent_rate_constant(_law.method, rate, c, temperature=temperature, **_law.params)
            return arrhenius.normalise_to_reference(k, temperature, _law.activation_energy, _law.reference_temperature)

        ok = np.all([np.isfinite(v) for v in values.values()], axis=0) & (series["running"].to_numpy() > 0)
        sd_k = np.full(len(series), np.nan)
        if ok.any():
            _, s = delta_method(k_ref_of, {k: v[ok] for k, v in values.items()},
                                {k: np.nan_to_num(v[ok]) for k, v in sds.items()})
            sd_k[ok] = s
        if extra_sd and rid in extra_sd:
            sd_k = np.hypot(sd_k, extra_sd[rid])
        k = series[f"k_ref:{rid}"].to_numpy(dtype=float)
        out[f"k_ref_sd:{rid}"] = sd_k
        out[f"k_ref_low:{rid}"] = k - 1.96 * sd_k
        out[f"k_ref_high:{rid}"] = k + 1.96 * sd_k
    return out


def _alternatives(law) -> dict[str, dict]:
    """The configured law and one alternative to compare it with (method, fixed params, fitted K)."""
    orders = dict(law.params.get("orders", {}))
    cands = {law.method: {"params": dict(law.params), "fit_adsorption": tuple(law.params.get("adsorption", {}))}}
    if law.method == "saturating":
        cands["power_law"] = {"params": {"orders": orders}, "fit_adsorption": ()}
    elif law.method == "power_law" and len(orders) == 1:
        sp = next(iter(orders))
        cands["saturating"] = {"params": {"orders": orders, "adsorption": {sp: 1e-4}}, "fit_adsorption": (sp,)}
    return cands


#: Smallest temperature span of the steady stretches for Ea to be estimated from them. [K]
MIN_TEMPERATURE_SPAN = 1.0


def _fit_at_fixed_ea(means: pd.DataFrame, law, rid: str, species: list[str]) -> pd.DataFrame:
    """Least squares of ln k_ref and the adsorption constants with Ea held at its configured value.

    Residuals ln r - ln r_model; covariance s^2 (J'J)^-1 at the solution (Bates & Watts 1988).
    """
    from scipy import optimize, stats

    ads = list(law.params.get("adsorption", {}))
    conc = {sp: means[sp].to_numpy() for sp in species}
    temp = means["temperature"].to_numpy()
    rate = means["rate"].to_numpy()
    good = rate > 0
    factor = arrhenius.at_temperature(1.0, temp, law.activation_energy, law.reference_temperature)

    def model(theta):
        params = dict(law.params)
        if ads:
            params["adsorption"] = {sp: float(np.exp(v)) for sp, v in zip(ads, theta[1:])}
        g = ratelaws.driving_force(law.method, conc, temperature=temp, **params)
        return theta[0] + np.log(factor * g)

    x0 = np.array([np.log(law.k_ref)] + [np.log(law.params["adsorption"][sp]) for sp in ads])
    sol = optimize.least_squares(lambda th: (np.log(rate) - model(th))[good], x0)
    n, p = int(good.sum()), len(x0)
    s2 = float(sol.fun @ sol.fun) / max(n - p, 1)
    cov = s2 * np.linalg.pinv(sol.jac.T @ sol.jac)
    q = stats.t.ppf(0.975, max(n - p, 1))
    method = f"{law.method}, least squares over {n} steady stretches, activity-corrected, Ea held at configured value"
    out = []
    k_unit = law.k_unit
    for i, (name, unit) in enumerate([(f"k_ref_fitted:{rid}", k_unit)] + [(f"K_{sp}:{rid}", "m3/mol") for sp in ads]):
        se = float(np.sqrt(max(cov[i, i], 0.0)))
        v = float(np.exp(sol.x[i]))
        # log-parameter: value times exp(+-q se), and the standard error by the delta method
        out.append({"name": name, "value": v, "std_error": v * se, "ci_low": v * np.exp(-q * se),
                    "ci_high": v * np.exp(q * se), "ci_level": 0.95, "unit_of_measure": unit, "method": method})
    return pd.DataFrame(out)


def fit_history(series: pd.DataFrame, model: UnitModel, activity_trend: pd.Series | None):
    """Fit the main reaction's rate law over the steady history; see the module docstring.

    Returns
    -------
    (DataFrame of parameter rows for the store, ModelComparison or None, list of problems)
    """
    rid = model.reaction_ids[0]
    law = model.rate_laws.get(rid)
    problems: list[str] = []
    if law is None or "steady" not in series:
        return pd.DataFrame(), None, ["no rate law or no steady flags"]
    steady = series["steady"].astype(bool) & (series.get("running", 1.0) > 0)
    w = steady_windows(steady, min_duration=3)
    rows = []
    for a, b in zip(w["start_pos"], w["stop_pos"]):
        for i in range(a, b, 12):
            j = min(i + 12, b)
            if j - i >= 3:
                rows.append((i, j))
    if len(rows) < 5:
        return pd.DataFrame(), None, [f"only {len(rows)} steady stretches: too few to fit the rate law"]
    trend = activity_trend.reindex(series.index).to_numpy(dtype=float) if activity_trend is not None else np.ones(len(series))
    species = sorted(set(law.params.get("orders", {})) | set(law.params.get("adsorption", {})))
    cols = {"rate": series[f"rate:{rid}"].to_numpy(dtype=float) / trend,
            "temperature": series["temperature"].to_numpy(dtype=float)}
    for sp in species:
        c = series.get(f"reconciled:{role_column('outlet_conc', sp)}")
        if c is None:
            return pd.DataFrame(), None, [f"no reconciled concentration of {sp}"]
        cols[sp] = c.to_numpy(dtype=float)
    data = pd.DataFrame(cols)
    means = pd.DataFrame([data.iloc[i:j].mean() for i, j in rows]).dropna()
    t_ref = law.reference_temperature
    span = float(means["temperature"].max() - means["temperature"].min()) if len(means) else 0.0
    if span < MIN_TEMPERATURE_SPAN:
        problems.append(f"the steady stretches span {span:.1f} K only (< {MIN_TEMPERATURE_SPAN:g} K): "
                        "Ea cannot be estimated; it is held at its configured value")
        return _fit_at_fixed_ea(means, law, rid, species), None, problems
    fits = {}
    for method, spec in _alternatives(law).items():
        try:
            fits[method] = fit_rate_law(means["rate"], {sp: means[sp] for sp in species if sp in means},
                                        means["temperature"], method, reference_temperature=t_ref,
                                        fit_adsorption=spec["fit_adsorption"],
                                        initial={"k_ref": law.k_ref, "activation_energy": law.activation_energy},
                                        law_params=spec["params"])
        except KinetraceError as exc:
            problems.append(f"{method}: {exc}")
    if law.method not in fits:
        return pd.DataFrame(), None, problems
    comparison = compare_models(fits) if len(fits) > 1 else None
    fit = fits[law.method]
    out = []
    names = {"k_ref": (f"k_ref_fitted:{rid}", law.k_unit), "activation_energy": (f"activation_energy:{rid}", "J/mol")}
    for key, value in fit.estimates.items():
        name, unit = names.get(key, (f"{key}:{rid}", "m3/mol"))
        lo, hi = fit.ci95[key]
        out.append({"name": name, "value": value, "std_error": fit.standard_errors[key], "ci_low": lo, "ci_high": hi,
                    "ci_level": 0.95, "unit_of_measure": unit,
                    "method": f"{fit.method}, least squares over {fit.n} steady stretches, activity-corrected"})
    if comparison is not None:
        out.append({"name": f"rate_law_best:{rid}", "value": float(comparison.distinguishable),
                    "unit_of_measure": "-", "method": comparison.verdict})
        for law_name, fitted in fits.items():
            out.append({"name": f"ratelaw_aicc:{law_name}", "value": float(fitted.aicc), "unit_of_measure": "-",
                        "method": f"AICc of {law_name} for reaction {rid} over {fitted.n} steady stretches"})
    return pd.DataFrame(out), comparison, problems
