"""Morning verdict: every unit's production against target, activity, forecast, alarms, data quality."""

import numpy as np
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.display import fmt, quality_kinds

st.title("Morning verdict")
url = ui.store_url()
units = cached.units(url)
if not units:
    ui.not_available("Results", "the store holds no unit yet; run `kinetrace check`")
    st.stop()

# the verdict of every unit first: the same sentence as the check's output and the report
for _unit, state, sentence in cached.verdicts(url):
    (st.success if state == "on target" else st.warning)(f"**{state}** — {sentence}")

period = st.radio("Production over", ["last day", "last 7 days"], horizontal=True, key="glance_period")
n_days = 1 if period == "last day" else 7
daily = cached.daily(url)
forecasts = cached.forecasts(url)
open_alarms = cached.alarms(url, state="open")
quality = cached.quality(url)

cols = st.columns(min(len(units), 3))
for i, unit in enumerate(units):
    with cols[i % len(cols)].container(border=True):
        st.subheader(unit)
        d = daily[daily["unit_id"] == unit].tail(n_days)
        if len(d):
            prod, target = d["production_kg"].sum() / n_days / 1000.0, d["target_kg"].sum() / n_days / 1000.0
            ratio = 100.0 * prod / target if target > 0 else np.nan
            st.metric(f"{unit} produced, mean of {period} [t/d]", fmt(prod, ".2f"),
                      delta=f"{ratio - 100:+.1f} % against target" if np.isfinite(ratio) else None,
                      delta_color="normal")
            st.caption(f"target {fmt(target, '.2f', 't/d')}; days {d['day'].iloc[0]} to {d['day'].iloc[-1]}")
        else:
            ui.not_available("Production against target", "no daily production rows")
        last = cached.watermark(url, unit)
        cat = cached.catalog(url, unit)
        if last is not None and "activity" in set(cat["variable"]):
            end = pd.Timestamp(last) + pd.Timedelta("1us")
            a = cached.series(url, unit, ("activity",), end - pd.Timedelta(days=8), end)["activity"].dropna()
            now = a[a.index >= end - pd.Timedelta(days=1)].mean()
            before = a[(a.index < end - pd.Timedelta(days=7))].mean()
            per_week = now - before if np.isfinite(before) else np.nan
            st.metric(f"{unit} catalyst activity, last 24 h mean [-]", fmt(now, ".3f"),
                      delta=None if not np.isfinite(per_week) else f"{per_week:+.3f} in 7 days",
                      delta_color="normal")
        else:
            ui.not_available("Catalyst activity")
        f = forecasts[forecasts["unit_id"] == unit]
        if len(f):
            row = f.iloc[-1]
            miss = ui.day_text(row["miss_expected"]) if pd.notna(row["miss_expected"]) else "none in horizon"
            st.metric(f"{unit} expected first day below target", miss)
            span = (f"interval {ui.day_text(row['miss_earliest'])} to {ui.day_text(row['miss_latest'])}; "
                    if pd.notna(row["miss_earliest"]) else "")
            st.caption(span + str(row["statement"]))
        else:
            ui.not_available("Forecast")
        n_open = int((open_alarms["unit_id"] == unit).sum())
        q = quality[quality["unit_id"] == unit]
        if len(q):
            latest = q[q["period_start"] == q["period_start"].max()]
            kinds = quality_kinds(latest["measure"])
            good = latest.loc[latest["measure"] == "good", "count"].sum()
            read = latest.loc[latest["measure"] == "rows_read", "count"].sum() \
                if (latest["measure"] == "rows_read").any() else good + latest.loc[kinds == "rule", "count"].sum()
            share = 100.0 * good / read if read else np.nan
        else:
            share = np.nan
        c1, c2 = st.columns(2)
        if len(q):
            c2.caption(f"period from {latest['period_start'].iloc[0]:%Y-%m-%d %H:%M} UTC")
        c1.metric(f"{unit} open alarms", str(n_open))
        c2.metric(f"{unit} good readings [%]", fmt(share, ".1f"))

runs = cached.runs(url)
if len(runs):
    r = runs.iloc[-1]
    st.caption(f"Newest run {r['run_id']} ({r['status']}), window {r['window_start']} to {r['window_end']}.")
