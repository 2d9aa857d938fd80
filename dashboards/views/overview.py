"""Morning verdict: per unit, worst first, the verdict sentence of the check and the report with a
status mark, 30 days of production against target and of activity against the activity needed,
the open alarms by name with how long they have been open, and the forecast said once.

Everything comes from the store through the report's own gathering (:func:`kinetrace.report.collect`):
the page computes nothing of the pipeline. Times are the site's local time.
"""

import numpy as np
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.charts import spark_activity, spark_production
from kinedash.display import fmt, quality_kinds
from kinedash.morning import decline_words, forecast_words, how_long, local_stamp, run_words, status_badge
from kinetrace.report.verdict import STATES, alarm_words

#: Days of the sparklines. [d]
SPARK_DAYS = 30

st.title("Morning verdict")
url = ui.store_url()
units = cached.units(url)
if not units:
    ui.not_available("Results", "the store holds no unit yet; run `kinetrace check`")
    st.stop()
content = cached.morning(url)
if content is None:
    ui.not_available("The verdict", "the store holds no daily production rows yet; run `kinetrace check`")
    st.stop()
tz = content.tz
st.caption(run_words(cached.runs(url), tz) + f" Times in the site's time zone ({tz}).")

reports = sorted(content.units, key=lambda u: (STATES.index(u.status) if u.status in STATES else 0,
                                               not (u.verdict is not None and u.verdict.attention), u.unit))
need = [u.unit for u in reports if u.verdict is not None and u.verdict.attention]
st.markdown(f"**{len(need)} of {len(reports)} units need attention**" + (f": {', '.join(need)}." if need else "."))

period = st.radio("Production over", ["last day", "last 7 days"], horizontal=True, key="glance_period")
n_days = 1 if period == "last day" else 7
daily = cached.daily(url)
quality = cached.quality(url)

for u in reports:
    unit, v = u.unit, u.verdict
    with st.container(border=True):
        state = v.state if v is not None else u.status
        head = v.headline[len(v.state):].strip() if v is not None else ""
        st.markdown(f'{status_badge(state)}&nbsp;&nbsp;<span style="font-size:1.45rem;font-weight:700">{unit}</span>'
                    f'&nbsp;&nbsp;<span style="font-size:1.15rem">{head}</span>', unsafe_allow_html=True)
        if v is not None:
            st.markdown(v.sentence)
        c_left, c_facts = st.columns([10, 4])
        c_prod, c_act = c_left.columns(2)
        rows = daily[daily["unit_id"] == unit]
        if v is not None:
            rows = rows[rows["day"] <= v.day]
        end = content.span[1]
        dom = (end - pd.Timedelta(days=SPARK_DAYS), end)
        with c_prod:
            st.caption(f"Production per day, last {SPARK_DAYS} days, against target (dashed) [t/d]: "
                       "square on target, triangle below")
            if len(rows):
                st.altair_chart(spark_production(rows.tail(SPARK_DAYS), domain=dom, tz=tz), key=f"spark_prod_{unit}")
            else:
                ui.not_available("Production against target", "no daily production rows")
        with c_act:
            needed = u.forecast.get("activity_needed") if u.forecast else None
            st.caption("Catalyst activity, hourly, against the activity needed (dashed) [-]")
            if u.trend is not None and len(u.trend):
                st.altair_chart(spark_activity(u.trend, needed=needed, domain=dom, tz=tz), key=f"spark_act_{unit}")
            else:
                ui.not_available("Catalyst activity")
        with c_left:
            ref = u.watermark if u.watermark is not None and not pd.isna(u.watermark) else content.span[1]
            if len(u.alarms_open):
                lines = [f"- {alarm_words(a)}: open {how_long(a['detected'], ref)} "
                         f"(detected {local_stamp(a['detected'], tz)})" for a in u.alarms_open.to_dict("records")]
                st.markdown(f"**Open alarms ({len(lines)}):**\n" + "\n".join(lines))
            else:
                st.markdown("**Open alarms:** none")
        with c_facts:
            d = rows.tail(n_days)
            if len(d):
                prod, target = d["production_kg"].sum() / n_days / 1000.0, d["target_kg"].sum() / n_days / 1000.0
                ratio = 100.0 * prod / target if target > 0 else np.nan
                st.metric(f"{unit} produced, mean of {period} [t/d]", fmt(prod, ".2f"),
                          delta=f"{ratio - 100:+.1f} % against target {target:.2f} t/d" if np.isfinite(ratio)
                          else None, delta_color="normal")
            fc_text = forecast_words(v, u.forecast, tz)
            st.markdown(f"**First day below target:** {fc_text}")
            params = u.parameters.set_index("name") if len(u.parameters) else pd.DataFrame()
            if u.forecast:
                kd_name = next((n for n in ("decay_kd", "decay:kd") if n in params.index), None)
                kd = params.loc[kd_name, "value"] if kd_name else None
                method = params.loc[kd_name, "method"] if kd_name else ""
                words = decline_words(kd, str(method))
                st.caption(f"Catalyst activity {fmt(u.forecast.get('activity_now'), '.3f')} against "
                           f"{fmt(u.forecast.get('activity_needed'), '.3f')} needed"
                           + (f"; {words}" if words else "") + ".")
            q = quality[quality["unit_id"] == unit]
            if len(q):
                latest = q[q["period_start"] == q["period_start"].max()]
                kinds = quality_kinds(latest["measure"])
                good = latest.loc[latest["measure"] == "good", "count"].sum()
                read = latest.loc[latest["measure"] == "rows_read", "count"].sum() \
                    if (latest["measure"] == "rows_read").any() else good + latest.loc[kinds == "rule", "count"].sum()
                share = 100.0 * good / read if read else np.nan
                st.caption(f"Good readings {fmt(share, '.1f', '%')} of the period from "
                           f"{local_stamp(latest['period_start'].iloc[0], tz)}; last result "
                           f"{local_stamp(u.watermark, tz)}.")
