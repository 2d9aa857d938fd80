"""Balances and sensors: closure over time, reconciliation adjustments, global-test statistic,
flagged sensors with bias estimates and onset."""

import numpy as np
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.charts import trend_chart
from kinedash.display import fmt

st.title("Balances and sensors")
url = ui.store_url()
top = st.columns([1, 4])
with top[0]:
    unit = ui.pick_unit(url)
with top[1]:
    start, end = ui.pick_range(url, unit, default="last 7 days", key="bal_range")

cat = cached.catalog(url, unit)
units_of = dict(zip(cat["variable"], cat["unit_of_measure"]))
closures = sorted(v for v in units_of if v.startswith("closure:"))
adjustments = sorted(v for v in units_of if v.startswith("adjustment:"))
biases = sorted(v for v in units_of if v.startswith("bias:"))
gt = [v for v in ("global_test", "global_test_limit") if v in units_of]
palette = ["#1f6f8b", "#c2571a", "#6a994e", "#7b2cbf", "#bc4749", "#386641"]

st.subheader("Balance closure")
if closures:
    data = cached.chart_series(url, unit, tuple(closures), start, end)
    lines = {v.split(":", 1)[1]: data[v] for v in closures if v in data}
    st.altair_chart(trend_chart(lines, unit=units_of[closures[0]], y_title="relative closure",
                                colours=dict(zip(lines, palette)), envelope=data["bucketed"]), key="ch_closure")
else:
    ui.not_available("Balance closure")

st.subheader("Global test of the reconciliation")
if "global_test" in gt:
    data = cached.chart_series(url, unit, tuple(gt), start, end)
    stat = data.get("global_test")
    s, n, lo, hi = data["stats"].get("global_test", (np.nan, 0, np.nan, np.nan))
    limit = data["stats"].get("global_test_limit")
    lim = limit[0] / limit[1] if limit and limit[1] else np.nan
    st.metric("Largest global-test statistic in range [-]", fmt(hi, ".3g"),
              delta=None if not np.isfinite(lim) else f"limit {lim:.3g}", delta_color="off")
    if stat is not None:
        st.altair_chart(trend_chart({"global test": stat}, unit="-", y_title="chi-square statistic",
                                    colours={"global test": ui.COLOURS["measured"]}, hlines={"limit": lim},
                                    envelope=data["bucketed"]), key="ch_gt")
else:
    ui.not_available("Global-test statistic")

st.subheader("Reconciliation adjustments")
if adjustments:
    tags = [v.split(":", 1)[1] for v in adjustments]
    chosen = st.multiselect("Tags", tags, default=tags[:2], key="bal_tags")
    if chosen:
        data = cached.chart_series(url, unit, tuple(f"adjustment:{t}" for t in chosen), start, end)
        lines = {t: data[f"adjustment:{t}"] for t in chosen if f"adjustment:{t}" in data}
        st.altair_chart(trend_chart(lines, unit="", y_title="adjustment (reconciled - measured)",
                                    colours=dict(zip(lines, palette)), envelope=data["bucketed"]), key="ch_adj")
        rms = {t: data["stats"][f"adjustment:{t}"] for t in chosen if f"adjustment:{t}" in data["stats"]}
        st.caption("Mean adjustment in range: " + "; ".join(
            f"{t} {fmt(s / n if n else np.nan, '.3g', units_of.get('adjustment:' + t, ''))}"
            for t, (s, n, _, _) in rms.items()))
    else:
        st.caption("Pick one or more tags.")
else:
    ui.not_available("Reconciliation adjustments")

st.subheader("Flagged sensors")
alarms = cached.alarms(url, unit)
sensor = alarms[~alarms["variable"].isin(units_of.keys())] if len(alarms) else alarms
if len(sensor):
    st.metric("Open sensor alarms", str(int((sensor["state"] == "open").sum())))
    view = pd.DataFrame({
        "tag": sensor["variable"], "kind": sensor["kind"], "state": sensor["state"],
        "onset (UTC)": sensor["onset"].dt.strftime("%Y-%m-%d %H:%M"),
        "detected (UTC)": sensor["detected"].dt.strftime("%Y-%m-%d %H:%M"),
        "bias estimate": [fmt(m, ".3g", u) for m, u in zip(sensor["magnitude"], sensor["magnitude_unit"])],
        "evidence": sensor["evidence"]})
    st.dataframe(view, hide_index=True, key="bal_alarms")
else:
    st.success("No sensor flagged for this unit.", icon=":material/check_circle:")
if biases:
    data = cached.chart_series(url, unit, tuple(biases), start, end)
    lines = {v.split(":", 1)[1]: data[v] for v in biases if v in data}
    st.altair_chart(trend_chart(lines, unit=units_of[biases[0]], y_title="bias estimate",
                                colours=dict(zip(lines, palette)), envelope=data["bucketed"]), key="ch_bias")
