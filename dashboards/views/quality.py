"""Data quality: per tag counts by screening rule (readable names, flagged tags first), and gaps."""

import altair as alt
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.display import quality_kinds
from kinedash.labels import RULE_HELP, RULES, rule_label
from kinedash.setting_cache import tag_info

st.title("Data quality")
url = ui.store_url()
unit = ui.pick_unit(url)
q = cached.quality(url, unit)
if not len(q):
    ui.not_available(f"Data-quality counts of {unit}")
    st.stop()
periods = sorted(q["period_start"].unique(), reverse=True)
labels = [pd.Timestamp(p).strftime("%Y-%m-%d %H:%M") for p in periods]
choice = st.selectbox("Period starting (UTC)", labels, key="dq_period")
p0 = periods[labels.index(choice)]
sel = q[q["period_start"] == p0]
st.caption(f"Period {pd.Timestamp(p0):%Y-%m-%d %H:%M} to {sel['period_end'].iloc[0]:%Y-%m-%d %H:%M} UTC.")
kinds = quality_kinds(sel["measure"])
counts = sel[kinds == "rule"]
flagged = int(counts["count"].sum())
good = int(sel.loc[sel["measure"] == "good", "count"].sum())
read = sel.loc[sel["measure"] == "rows_read", "count"].sum() if (sel["measure"] == "rows_read").any() else good + flagged
m = st.columns(3)
m[0].metric("Readings screened", f"{int(read)}")
m[1].metric("Readings flagged", f"{flagged}")
m[2].metric("Flagged share [%]", f"{100.0 * flagged / read:.2f}" if read else "not available")
tags = tag_info(unit)
name_of = {t: tags.get(t, {}).get("label", t) for t in sel["tag"].unique()}
table = sel[kinds != "interval"].pivot_table(index="tag", columns="measure", values="count", aggfunc="sum",
                                             fill_value=0)
rule_cols = [c for c in table.columns if c not in ("rows_read", "good")]
flagged_by_tag = table[rule_cols].sum(axis=1) if rule_cols else table.iloc[:, 0] * 0
order = flagged_by_tag.sort_values(ascending=False, kind="stable").index        # flagged tags first
used = [c for c in rule_cols if table[c].sum() > 0]
shown = table.loc[order, [c for c in ("rows_read", "good") if c in table] + used]
shown.insert(0, "flagged", flagged_by_tag.loc[order])
shown = shown.rename(columns=rule_label).rename(index=name_of)
shown.index.name = "tag"
helps = {RULES.get(m, m): RULE_HELP[m] for m in RULE_HELP}
st.dataframe(shown, key="dq_table", column_config={
    "tag": st.column_config.TextColumn(width="large"),
    **{c: st.column_config.NumberColumn(c, help=helps.get(c), width="small") for c in shown.columns}})
st.caption("Readings per tag: read, good, and flagged by each screening rule (hover a header for its meaning).")
quiet = [rule_label(c) for c in rule_cols if c not in used]
if quiet:
    st.caption("No reading of this period was flagged as: " + "; ".join(quiet) + ".")
bad = counts[counts["count"] > 0].assign(rule=lambda d: d["measure"].map(rule_label),
                                         tag_name=lambda d: d["tag"].map(name_of))
if len(bad):
    st.altair_chart(alt.Chart(bad).mark_bar().encode(
        x=alt.X("count:Q", title="readings flagged"),
        y=alt.Y("tag_name:N", title=None, sort=[name_of[t] for t in order], axis=alt.Axis(labelLimit=420)),
        color=alt.Color("rule:N", title="rule", legend=alt.Legend(orient="bottom", labelLimit=320),
                        scale=alt.Scale(range=["#c2571a", "#1f6f8b", "#6a994e", "#7b2cbf", "#bc4749", "#386641"])),
        tooltip=[alt.Tooltip("tag_name:N", title="tag"), "rule:N", "count:Q"]).properties(
        height=40 + 28 * bad["tag"].nunique()), key="ch_dq")
else:
    st.success("No reading flagged in this period.", icon=":material/check_circle:")
st.subheader("Grid intervals and gaps")
gaps = sel[kinds == "interval"]
if len(gaps):
    g = gaps.pivot_table(index="tag", columns="measure", values="count", aggfunc="sum", fill_value=0)
    if "missing_intervals" in g:
        g = g.sort_values("missing_intervals", ascending=False, kind="stable")
    g = g.rename(columns=rule_label).rename(index=name_of)
    g.index.name = "tag"
    st.dataframe(g, key="dq_gaps", column_config={
        "tag": st.column_config.TextColumn(width="large"),
        **{c: st.column_config.NumberColumn(c, help=helps.get(c), width="small") for c in g.columns}})
    st.caption("Grid intervals per tag: with a usable value, without one, carried forward from an earlier "
               "sample, or with flagged values only.")
else:
    ui.not_available("Gap counts")
