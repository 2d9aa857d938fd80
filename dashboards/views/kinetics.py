"""Kinetics: fitted parameters with intervals, Arrhenius plot from steady windows, rate-law comparison."""

import altair as alt
import numpy as np
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.arrhenius import guide_line
from kinedash.display import fmt, to_display

st.title("Kinetics")
url = ui.store_url()
top = st.columns([1, 4])
with top[0]:
    unit = ui.pick_unit(url)
with top[1]:
    start, end = ui.pick_range(url, unit, default="last 90 days", key="kin_range")

st.subheader("Fitted parameters")
params = cached.parameters(url, unit)
if len(params):
    shown = []
    for r in params.itertuples():
        v, u = to_display(r.value, r.unit_of_measure)
        lo, _ = to_display(r.ci_low, r.unit_of_measure)
        hi, _ = to_display(r.ci_high, r.unit_of_measure)
        se, _ = to_display(r.std_error, r.unit_of_measure) if r.unit_of_measure != "K" else (r.std_error, u)
        level = fmt(100 * r.ci_level, ".0f") + " %" if np.isfinite(r.ci_level) else "not available"
        shown.append({"parameter": r.name, "value": fmt(v, ".4g"), "std. error": fmt(se, ".2g"),
                      "interval": f"{fmt(lo, '.4g')} to {fmt(hi, '.4g')}" if np.isfinite(r.ci_low) else "not available",
                      "level": level, "unit": u, "method": r.method, "as of": ui.day_text(r.as_of)})
    st.dataframe(pd.DataFrame(shown), hide_index=True, key="kin_params")
else:
    ui.not_available("Fitted parameters")

st.subheader("Arrhenius plot from steady windows")
cat = cached.catalog(url, unit)
rxns = sorted(v.split(":", 1)[1] for v in cat["variable"] if v.startswith("k_apparent:") and not v.endswith("_measured"))
if not rxns:
    ui.not_available("Apparent rate constants")
else:
    rxn = st.selectbox("Reaction", rxns, key="kin_rxn")
    pts = cached.steady_points(url, unit, f"k_apparent:{rxn}", start, end)
    if len(pts) < 2:
        st.info(f"No steady window of {unit} in this range (or fewer than two steady periods): "
                "the Arrhenius plot needs steady operation.", icon=":material/waves:")
    else:
        a, b, ea = guide_line(pts["inv_t"], pts["ln_k"])
        stored = params[params["name"] == f"activation_energy:{rxn}"] if len(params) else params
        m = st.columns(3)
        m[0].metric("Steady periods plotted", str(len(pts)))
        m[1].metric("Slope of the guide line, -Ea/R [K]", fmt(b, ".4g"))
        m[2].metric("Ea of the stored fit [kJ/mol]",
                    fmt(stored["value"].iloc[0] / 1000 if len(stored) else np.nan, ".1f"))
        line_x = np.array([pts["inv_t"].min(), pts["inv_t"].max()])
        plot = pts.reset_index()[["ts", "inv_t", "ln_k", "temperature"]].assign(
            t_c=lambda d: d["temperature"] - 273.15, inv_t_k=lambda d: 1000 * d["inv_t"])
        pts_chart = alt.Chart(plot).mark_circle(size=28, opacity=0.8).encode(
            color=alt.Color("ts:T", title="time", scale=alt.Scale(range=["#b8d4e0", ui.COLOURS["measured"]])),
            x=alt.X("inv_t_k:Q", title="1000 / T [1/K]", scale=alt.Scale(zero=False)),
            y=alt.Y("ln_k:Q", title=f"ln k_apparent ({rxn})", scale=alt.Scale(zero=False)),
            tooltip=[alt.Tooltip("ts:T", title="bucket start"), alt.Tooltip("t_c:Q", title="T [degC]", format=".2f"),
                     alt.Tooltip("ln_k:Q", format=".4f")])
        guide = alt.Chart(pd.DataFrame({"inv_t_k": 1000 * line_x, "ln_k": a + b * line_x})).mark_line(
            color=ui.COLOURS["fit"], strokeDash=[5, 3]).encode(x="inv_t_k:Q", y="ln_k:Q")
        st.altair_chart((pts_chart + guide).properties(height=300), key="ch_arrh")
        st.caption(f"Each point: mean over a time bucket in which every result row was steady. Dashed: "
                   f"least-squares guide through the points (Ea about {fmt(ea / 1000, '.1f')} kJ/mol); "
                   "the fitted parameters above come from the store. Colour: time; over a long range catalyst "
                   "decay moves k too, so a short range shows the temperature effect best.")

st.subheader("Rate-law comparison")
if len(params) and params["method"].nunique() > 1:
    crit = params[params["name"].str.contains("aic", case=False)]
    if len(crit):
        crit = crit.assign(law=crit["name"].str.split(":").str[-1])
        st.altair_chart(alt.Chart(crit).mark_bar(color=ui.COLOURS["measured"]).encode(
            x=alt.X("value:Q", title="AICc (lower is better)"), y=alt.Y("law:N", sort="x", title="rate law"),
            tooltip=["law:N", alt.Tooltip("value:Q", format=".1f")]).properties(height=120), key="ch_aicc")
        best = crit.loc[crit["value"].idxmin(), "law"]
        st.caption(f"Lowest AICc: {best}.")
        st.dataframe(crit.assign(delta=crit["value"] - crit["value"].min())[["law", "value", "delta"]]
                     .rename(columns={"value": "AICc", "delta": "AICc - lowest"}).sort_values("AICc"),
                     hide_index=True, key="kin_laws")
    verdict = params.loc[params["name"].str.startswith("rate_law_best"), "method"]
    if len(verdict):
        st.info(verdict.iloc[0], icon=":material/balance:")
else:
    ui.not_available("Rate-law comparison", "the store holds parameters of one rate law only")
