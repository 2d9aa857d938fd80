"""Kinetics: the stored joint fit's parameters with intervals, the Arrhenius plot of activity-corrected
rate constants over steady stretches (only when their temperature span can show the temperature
effect), and the model comparisons as AICc differences and Akaike weights."""

import numpy as np
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.arrhenius import fit_lines, span_check
from kinedash.display import fmt
from kinedash.evidence import comparison_table
from kinedash.figures import arrhenius_figure, weight_bars
from kinetrace.report.names import engineering, parameter_label

st.title("Kinetics")
url = ui.store_url()
top = st.columns([1, 4])
with top[0]:
    unit = ui.pick_unit(url)
with top[1]:
    start, end = ui.pick_range(url, unit, default="last 90 days", key="kin_range")

params = cached.parameters(url, unit)
if len(params):
    params = params[params["as_of"] == params["as_of"].max()] if "as_of" in params else params


def status(method: str) -> str:
    m = str(method or "")
    if m.startswith("held at the configured value"):
        return m.split("; configured")[0]
    if m.startswith(("estimated", "fitted")) or "jointly" in m:
        return "estimated from the data"
    return m.split(";")[0]


st.subheader("Fitted parameters")
if len(params):
    shown = []
    for r in params.itertuples():
        label = parameter_label(r.name)
        if label is None:
            continue
        v, u = engineering(r.name, r.value, r.unit_of_measure)
        lo, _ = engineering(r.name, r.ci_low, r.unit_of_measure)
        hi, _ = engineering(r.name, r.ci_high, r.unit_of_measure)
        level = f"{100 * r.ci_level:.0f} %" if np.isfinite(r.ci_level) else ""
        shown.append({"parameter": label, "value": fmt(v, ".4g"), "unit": "" if u in ("-", "") else u,
                      "interval": (f"{fmt(lo, '.4g')} to {fmt(hi, '.4g')} ({level})" if np.isfinite(r.ci_low)
                                   else "not available"),
                      "how": status(r.method)})
    if shown:
        st.dataframe(pd.DataFrame(shown), hide_index=True, key="kin_params")
    else:
        ui.not_available("Fitted parameters")
else:
    ui.not_available("Fitted parameters")

st.subheader("Arrhenius plot of the steady stretches")
cat = cached.catalog(url, unit)
rxns = sorted(v.split(":", 1)[1] for v in cat["variable"] if v.startswith("k_apparent:") and not v.endswith("_measured"))
if not rxns:
    ui.not_available("Apparent rate constants")
else:
    rxn = st.selectbox("Reaction", rxns, key="kin_rxn") if len(rxns) > 1 else rxns[0]
    ea_rows = params[params["name"] == f"activation_energy:{rxn}"] if len(params) else params
    ea = ea_rows.iloc[0] if len(ea_rows) else None
    pts = cached.steady_points(url, unit, f"k_apparent:{rxn}", start, end)
    m = st.columns(3)
    m[0].metric("Steady periods in range", str(len(pts)))
    m[1].metric(f"Ea of the joint fit ({rxn}) [kJ/mol]", fmt(ea["value"] / 1000 if ea is not None else np.nan, ".1f"))
    m[2].metric("Its 95 % interval [kJ/mol]",
                f"{ea['ci_low'] / 1000:.1f} to {ea['ci_high'] / 1000:.1f}"
                if ea is not None and np.isfinite(ea["ci_low"]) and np.isfinite(ea["ci_high"]) else "not available")
    if ea is not None:
        st.caption(f"Ea: {status(ea['method'])}.")
    if len(pts) == 0:
        st.info(f"No steady window of {unit} in this range (or no fitted decay law to correct for activity): "
                "the Arrhenius plot needs steady operation.", icon=":material/waves:")
    elif ea is None:
        ui.not_available(f"Activation energy of {rxn}", "the store holds no joint fit of this reaction")
    else:
        check = span_check(pts["inv_t"], pts["ln_k"], float(ea["value"]))
        held = str(ea["method"]).startswith("held at the configured value")
        if held and check.supported:      # the joint fit could not determine Ea from the data: no plot either
            check = type(check)(False, check.span_k, check.signal, check.scatter,
                                "the joint fit could not determine Ea from the data (" + status(ea["method"]) + ")")
        if not check.supported:
            st.info(f"No Arrhenius plot for {unit} in this range: {check.reason}. The activation energy above is "
                    "the joint fit's; a wider temperature range of steady operation would test it.",
                    icon=":material/thermostat:")
        else:
            plot = pts.reset_index()[["ts", "inv_t", "ln_k", "temperature"]].assign(
                t_c=lambda d: d["temperature"] - 273.15, inv_t_k=lambda d: 1000 * d["inv_t"])
            lines = fit_lines(pts["inv_t"], pts["ln_k"], float(ea["value"]), float(ea["ci_low"]),
                              float(ea["ci_high"]), label="joint fit, Ea")
            st.altair_chart(arrhenius_figure(plot, lines, f"ln(k_apparent / a) of {rxn}"), key="ch_arrh", height=420)
            st.caption(f"Each point: one time bucket in which every result row was steady; k_apparent divided by "
                       f"the fitted catalyst decay law a(t), so decay does not pass for a temperature effect. "
                       f"Lines: slope -Ea/R of the stored joint fit and of the ends of its interval, through the "
                       f"points' centre ({check.reason}). Temperatures "
                       f"{plot['t_c'].min():.1f} to {plot['t_c'].max():.1f} degC.")

st.subheader("Model comparison")
groups = {"rate law": ("ratelaw_aicc:", "AICc"), "catalyst decay family": ("calibration_qaicc:", "QAICc")}
drawn = 0
for what, (prefix, crit) in groups.items():
    rows = params[params["name"].str.startswith(prefix)] if len(params) else params
    if len(rows) < 2:
        continue
    drawn += 1
    t = comparison_table(rows["name"].str.split(":", n=1).str[1].str.replace("_", " "), rows["value"])
    st.markdown(f"**{what.capitalize()}** ({crit})")
    st.altair_chart(weight_bars(t, what), key=f"ch_w_{prefix.rstrip(':')}",
                    height=34 * len(t) + 70)
    st.dataframe(pd.DataFrame({what: t["candidate"], f"{crit} difference to the best": t["delta"].round(1),
                               "Akaike weight": t["weight"].round(3), "support": t["support"]}),
                 hide_index=True, key=f"kin_w_{prefix.rstrip(':')}")
if drawn:
    verdict = params.loc[params["name"].str.startswith("rate_law_best"), "method"]
    if len(verdict):
        st.info(verdict.iloc[0], icon=":material/rule:")
    st.caption("Difference to the best: the candidate's criterion minus the lowest; Akaike weight "
               "exp(-difference/2) normalised over the candidates, the share of support for each "
               "(Burnham & Anderson 2002, sec. 2.6 and 2.9). Up to 2: substantial support; above 10: essentially none.")
else:
    ui.not_available("Model comparison", "the store holds the criterion of one candidate only")
