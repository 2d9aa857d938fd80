"""Balances and sensors: closure over time, reconciliation adjustments, global-test statistic,
flagged sensors with bias estimates and onset."""

import numpy as np
import pandas as pd
import streamlit as st
from scipy.stats import chi2

from kinedash import cached, ui
from kinedash.charts import trend_chart
from kinedash.display import fmt
from kinedash.labels import balance_label, quantity_label
from kinedash.setting_cache import tag_info

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
adjustments = sorted(v for v in units_of if v.startswith(("adjust_z:", "adjustment:")))
biases = sorted(v for v in units_of if v.startswith("bias:"))
gt = [v for v in ("global_test", "global_test_limit", "global_test_dof", "global_test_alarm") if v in units_of]
palette = ["#1f6f8b", "#c2571a", "#6a994e", "#7b2cbf", "#bc4749", "#386641"]

st.subheader("Balance closure")
if closures:
    data = cached.chart_series(url, unit, tuple(closures), start, end)
    lines = {balance_label(v.split(":", 1)[1]): data[v] for v in closures if v in data}
    st.altair_chart(trend_chart(lines, unit=units_of[closures[0]], y_title="relative closure",
                                colours=dict(zip(lines, palette)), envelope=data["bucketed"]), key="ch_closure")
else:
    ui.not_available("Balance closure")

st.subheader("Global test of the reconciliation")
if "global_test" in gt:
    data = cached.chart_series(url, unit, tuple(gt), start, end)
    stat = data.get("global_test")
    s, n, lo, hi = data["stats"].get("global_test", (np.nan, 0, np.nan, np.nan))
    limit, dof = data["stats"].get("global_test_limit"), data["stats"].get("global_test_dof")
    if limit and limit[1]:
        lim, lim_text = limit[0] / limit[1], "stored limit"
    elif dof and dof[1]:
        # chi-square test at alpha = 0.05 (the reconciliation's default), Narasimhan & Jordache (2000), ch. 7
        lim, lim_text = float(chi2.ppf(0.95, dof[0] / dof[1])), "95 % chi-square quantile at the mean dof"
    else:
        lim, lim_text = np.nan, ""
    m = st.columns(2)
    m[0].metric("Largest global-test statistic in range [-]", fmt(hi, ".3g"),
                delta=None if not np.isfinite(lim) else f"limit {lim:.3g}", delta_color="off")
    alarm = data["stats"].get("global_test_alarm")
    m[1].metric("Intervals rejected by the global test", fmt(alarm[0] if alarm else np.nan, ".0f"))
    if stat is not None:
        st.altair_chart(trend_chart({"global test": stat}, unit="-", y_title="chi-square statistic",
                                    colours={"global test": ui.COLOURS["measured"]}, hlines={"limit": lim},
                                    envelope=data["bucketed"]), key="ch_gt")
        if lim_text:
            st.caption(f"Dashed: {lim_text}.")
else:
    ui.not_available("Global-test statistic")

st.subheader("Reconciliation adjustments")
alarms = cached.alarms(url, unit)
tags = tag_info(unit)
sensor_kinds = alarms["kind"].astype(str).str.contains("sensor|bias") if len(alarms) else []
flagged_tags = [t for v in alarms.loc[sensor_kinds & (alarms["state"] == "open"), "variable"] for t in str(v).split(", ")] \
    if len(alarms) else []
if adjustments:
    by_name = {v.split(":", 1)[1]: v for v in adjustments}
    stats = cached.chart_series(url, unit, tuple(adjustments), start, end)["stats"]
    has_data = [q for q, v in by_name.items() if stats.get(v, (0, 0))[1] > 0]
    flagged_roles = [tags[t]["role"] if t in tags else t for t in flagged_tags]
    first = [q for q in dict.fromkeys(flagged_roles) if q in has_data]
    default = (first + [q for q in has_data if q not in first])[:max(2, len(first))]
    options = has_data + [q for q in by_name if q not in has_data]

    def label(q):
        who = next((t for t, i in tags.items() if i["role"] == q), None)
        words = quantity_label(q) + (f" ({who})" if who else "")
        return words + (" - flagged" if q in first else "") + ("" if q in has_data else " - no value in range")

    chosen = st.multiselect("Measurements", options, default=default, format_func=label, key="bal_tags",
                            help="Flagged sensors come first; measurements without a value in the range are last.")
    if chosen:
        data = cached.chart_series(url, unit, tuple(by_name[t] for t in chosen), start, end)
        lines = {quantity_label(t): data[by_name[t]] for t in chosen if by_name[t] in data}
        z = all(by_name[t].startswith("adjust_z:") for t in chosen)
        st.altair_chart(trend_chart(lines, unit="", y_title="standardised adjustment" if z else "adjustment",
                                    colours=dict(zip(lines, palette)), envelope=data["bucketed"]), key="ch_adj")
        means = {t: data["stats"][by_name[t]] for t in chosen if by_name[t] in data["stats"]}
        st.caption("Mean adjustment in range: " + "; ".join(
            f"{quantity_label(t)} {fmt(s / n if n else np.nan, '.3g', units_of.get(by_name[t], ''))}"
            for t, (s, n, _, _) in means.items()))
    else:
        st.caption("Pick one or more measurements.")
else:
    ui.not_available("Reconciliation adjustments")

st.subheader("Flagged sensors")
known = set(cached.quality(url, unit)["tag"]) | set(tags)
if len(alarms):   # alarms on a sensor: a sensor kind, or a variable that is one of the unit's tags
    on_tag = alarms["variable"].map(lambda v: any(t in known for t in str(v).split(", ")))
    sensor = alarms[alarms["kind"].str.contains("sensor|bias") | on_tag]
else:
    sensor = alarms
if len(sensor):
    st.metric("Open sensor alarms", str(int((sensor["state"] == "open").sum())))
    view = pd.DataFrame({
        "sensor": [", ".join(tags.get(t, {}).get("label", t) for t in str(v).split(", ")) for v in sensor["variable"]],
        "finding": sensor["kind"].astype(str).str.replace("_", " "), "state": sensor["state"],
        "onset (UTC)": sensor["onset"].dt.strftime("%Y-%m-%d %H:%M"),
        "detected (UTC)": sensor["detected"].dt.strftime("%Y-%m-%d %H:%M"),
        "bias estimate": [fmt(m, ".3g", u) for m, u in zip(sensor["magnitude"], sensor["magnitude_unit"])],
        "evidence": sensor["evidence"]})
    st.dataframe(view, hide_index=True, key="bal_alarms")
else:
    st.success("No sensor flagged for this unit.", icon=":material/check_circle:")
if biases:
    data = cached.chart_series(url, unit, tuple(biases), start, end)
    lines = {tags.get(v.split(":", 1)[1], {}).get("label", v.split(":", 1)[1]): data[v] for v in biases if v in data}
    st.altair_chart(trend_chart(lines, unit=units_of[biases[0]], y_title="bias estimate",
                                colours=dict(zip(lines, palette)), envelope=data["bucketed"]), key="ch_bias")
