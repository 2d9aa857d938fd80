"""Data quality: per tag counts by screening rule, and gaps."""

import altair as alt
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.display import quality_kinds

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
table = sel[kinds != "interval"].pivot_table(index="tag", columns="measure", values="count", aggfunc="sum",
                                             fill_value=0)
st.dataframe(table, key="dq_table")
bad = counts[counts["count"] > 0]
if len(bad):
    st.altair_chart(alt.Chart(bad).mark_bar().encode(
        x=alt.X("count:Q", title="readings flagged"), y=alt.Y("tag:N", title=None),
        color=alt.Color("measure:N", title="rule",
                        scale=alt.Scale(range=["#c2571a", "#1f6f8b", "#6a994e", "#7b2cbf", "#bc4749", "#386641"])),
        tooltip=["tag:N", "measure:N", "count:Q"]).properties(height=40 + 28 * bad["tag"].nunique()),
        key="ch_dq")
else:
    st.success("No reading flagged in this period.", icon=":material/check_circle:")
st.subheader("Gaps")
gaps = sel[kinds == "interval"]
if len(gaps):
    st.dataframe(gaps.pivot_table(index="tag", columns="measure", values="count", aggfunc="sum", fill_value=0),
                 key="dq_gaps")
else:
    ui.not_available("Gap counts")
