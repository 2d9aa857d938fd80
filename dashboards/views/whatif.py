"""What-if within the safe limits, with its cautions."""

import altair as alt
import numpy as np
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.display import fmt, to_display

st.title("What-if within the safe limits")
st.warning(ui.CAUTIONS, icon=":material/warning:")
url = ui.store_url()
unit = ui.pick_unit(url)
w = cached.whatif(url, unit)
if not len(w):
    ui.not_available(f"What-if settings of {unit}")
    st.stop()
levers = list(w["lever"])
lever = st.radio("Lever", levers, horizontal=True, key="wi_lever")
r = w[w["lever"] == lever].iloc[0]
cur, u = to_display(r["current_value"], r["unit_of_measure"])
lo, _ = to_display(r["safe_low"], r["unit_of_measure"])
hi, _ = to_display(r["safe_high"], r["unit_of_measure"])
prop = r["proposed_value"]
inside = np.isfinite(prop) and r["safe_low"] <= prop <= r["safe_high"]
p, _ = to_display(prop, r["unit_of_measure"]) if inside else (np.nan, u)
m = st.columns(3)
m[0].metric(f"Current {lever} [{u}]", fmt(cur, ".4g"))
m[1].metric(f"Setting that restores the target [{u}]", fmt(p, ".4g") if r["restores_target"] else "none within limits")
m[2].metric(f"Safe limits [{u}]", f"{fmt(lo, '.4g')} to {fmt(hi, '.4g')}")
if np.isfinite(prop) and not inside:
    st.error(f"The stored setting for {lever} lies outside the safe limits and is not shown.")
st.caption(f"As of {ui.day_text(r['as_of'])}. {r['note']}")
marks = pd.DataFrame({"what": ["current"] + (["proposed"] if np.isfinite(p) else []),
                      "value": [cur] + ([p] if np.isfinite(p) else [])})
pad = 0.05 * (hi - lo) if hi > lo else 0.01 * max(abs(hi), 1.0)
rng = alt.Chart(pd.DataFrame({"lo": [lo], "hi": [hi]})).mark_bar(height=18, color="#dcedc8").encode(
    x=alt.X("lo:Q", title=f"{lever} [{u}]", scale=alt.Scale(domain=[lo - pad, hi + pad])),
    x2="hi:Q")
pts = alt.Chart(marks).mark_tick(thickness=3, size=30).encode(
    x="value:Q", color=alt.Color("what:N", title=None, scale=alt.Scale(domain=["current", "proposed"],
                                                                      range=[ui.COLOURS["target"], ui.COLOURS["fit"]])),
    tooltip=["what:N", alt.Tooltip("value:Q", format=".4g")])
st.altair_chart((rng + pts).properties(height=90), key="ch_wi")
st.caption("Green: the configured safe operating range of the lever.")
table = pd.DataFrame({
    "lever": w["lever"],
    "current": [fmt(to_display(v, uom)[0], ".4g", to_display(v, uom)[1]) for v, uom in zip(w["current_value"], w["unit_of_measure"])],
    "proposed": [fmt(to_display(v, uom)[0], ".4g", to_display(v, uom)[1]) if np.isfinite(v) and a <= v <= b else "none"
                 for v, uom, a, b in zip(w["proposed_value"], w["unit_of_measure"], w["safe_low"], w["safe_high"])],
    "restores target": w["restores_target"], "note": w["note"]})
st.dataframe(table, hide_index=True, key="wi_table")
