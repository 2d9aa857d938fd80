"""Reactor trends with their operating context: full-width panels on one shared time axis (site local
time): conversion; k_ref in engineering units with its band; activity with the fitted decay law, its
band and the forecast drawn on to the crossing date; production against target; then temperature,
feed flow against plan and the liquid volume from the level. The stretches the unit was not steady
are shaded (and those it was down, darker); catalyst changes, alarm onsets and the forecast crossing
are marked, each with a tooltip. Everything is read from the store (and the plan and catalyst
changes from the plant configuration); nothing is recomputed here.
"""

import numpy as np
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.display import fmt, to_display
from kinedash.morning import local_stamp
from kinedash.source import windows_of
from kinedash.trends import TimeFrame, complement, panel, projection
from kinetrace.report.names import engineering, parameter_label
from kinetrace.report.verdict import alarm_words
from kinetrace.units import UnitError, convert

#: Longest reach of the time axis beyond the last result to show a forecast crossing. [d]
MAX_REACH_DAYS = 400

st.title("Reactor trends")
url = ui.store_url()
tz, production_unit = cached.site_settings()
top = st.columns([1, 4])
with top[0]:
    unit = ui.pick_unit(url)
with top[1]:
    start, end = ui.pick_range(url, unit)

cat = cached.catalog(url, unit)
have = set(cat["variable"])
units_of = dict(zip(cat["variable"], cat["unit_of_measure"]))
rxns = sorted(v.split(":", 1)[1] for v in have if v.startswith("k_ref:") and not v.endswith("_measured"))
rxn = st.selectbox("Reaction", rxns, key="trend_rxn") if len(rxns) > 1 else (rxns[0] if rxns else None)
k = f"k_ref:{rxn}" if rxn else "k_ref"
k_lo = next((v for v in (f"k_ref_low:{rxn}", "k_ref_low") if v in have), f"k_ref_low:{rxn}")
k_hi = next((v for v in (f"k_ref_high:{rxn}", "k_ref_high") if v in have), f"k_ref_high:{rxn}")
level_var = "level" if "level" in have else "volume"
wanted = ("conversion", k, k_lo, k_hi, "activity", "activity_fit", "activity_band_low", "activity_band_high",
          "production_mass", "target_mass", "steady", "running", "temperature", "feed_flow", level_var)
c_a, c_b = st.columns(2)
steady_only = c_a.toggle("k_ref and activity from steady operation only", value=True, key="trend_steady_only",
                         help="Hides values back-calculated while the unit was not steady (start-ups, upsets).")
reach = c_b.toggle("Time axis reaches the forecast crossing", value=end - start >= pd.Timedelta(days=30),
                   key="trend_reach", help="Extends every panel's time axis to the stored crossing of the activity "
                   "needed (on by default for ranges of 30 days and more, where the data keep most of the width).")
data = cached.chart_series(url, unit, wanted, start, end,
                           follow=((k_lo, k), (k_hi, k), ("activity_band_low", "activity_fit"),
                                   ("activity_band_high", "activity_fit")),
                           steady_only=(k, k_lo, k_hi, "activity") if steady_only else ())
stats = data["stats"]
if not stats or all(n == 0 for _, n, _, _ in stats.values()):
    ui.not_available(f"Results of {unit} from {local_stamp(start, tz)} to {local_stamp(end, tz)}",
                     "nothing stored in this range")
    st.stop()


def mean(var):
    s, n, _, _ = stats.get(var, (np.nan, 0, np.nan, np.nan))
    return s / n if n else np.nan


# ---- the unit's k_ref in engineering units (the store keeps SI; its parameter row names the unit)
params = cached.parameters(url, unit)
p_units = dict(zip(params["name"], params["unit_of_measure"])) if len(params) else {}
k_si = units_of.get(k, "")
if not k_si or k_si.startswith("SI"):
    k_si = next((p_units[n] for n in (f"k_ref_fitted:{rxn}", f"k_ref:{rxn}", "k_ref") if n in p_units), k_si)
k_factor, k_shown = engineering(k, 1.0, k_si) if k_si else (1.0, "")
k_name = parameter_label(k) or "apparent rate constant at the reference temperature"
try:
    prod_factor, prod_shown = float(convert(1.0, "kg/s", production_unit)), production_unit
except UnitError:
    prod_factor, prod_shown = 3600.0, "kg/h"

# ---- the context every panel shows
steady = data.get("steady")
windows = windows_of(steady["lo"]) if steady is not None else None
frames_read = [f for f in data.values() if isinstance(f, pd.DataFrame) and len(f)]
data_start = min((f.index[0] for f in frames_read), default=start)
data_end = max((f.index[-1] for f in frames_read), default=end)
unsteady = complement(windows, max(start, data_start), min(end, data_end)) if windows is not None else None
down = windows_of(1.0 - data["running"]["hi"]) if "running" in data else None
fc = cached.forecasts(url, unit)
frow = fc.iloc[-1] if len(fc) else None
ahead = frow is not None and pd.notna(frow["miss_expected"]) and frow["miss_expected"] > data_end
axis_end = end
if reach and ahead:
    far = frow["miss_latest"] if pd.notna(frow["miss_latest"]) else frow["miss_expected"]
    if far - data_end <= pd.Timedelta(days=MAX_REACH_DAYS):
        axis_end = far + 0.03 * (far - start)
events = []
for a in cached.alarms(url, unit).to_dict("records"):
    if pd.notna(a["onset"]):
        closed = f"closed {local_stamp(a['closed'], tz)}" if a["state"] == "closed" else "open"
        events.append({"t": a["onset"], "kind": "alarm onset",
                       "label": f"{alarm_words(a)} ({closed}); {a.get('evidence') or ''}".rstrip("; ")})
for t in cached.unit_context(unit)["catalyst_changes"]:
    events.append({"t": t, "kind": "catalyst change", "label": "catalyst change (plant configuration)"})
if ahead:
    events.append({"t": frow["miss_expected"], "kind": "expected crossing",
                   "label": f"activity expected to fall below the need ({frow['activity_needed']:.3f})"})
frame = TimeFrame(start, axis_end, tz, unsteady=unsteady, down=down,
                  events=pd.DataFrame(events, columns=["t", "kind", "label"]))

m = st.columns(4)
m[0].metric("Mean conversion in range [-]", fmt(mean("conversion"), ".4f"))
m[1].metric(f"Mean k_ref{'' if rxn is None else ' (' + rxn + ')'} [{k_shown or 'SI'}]", fmt(mean(k) * k_factor, ".4g"))
m[2].metric("Mean catalyst activity in range [-]", fmt(mean("activity"), ".4f"))
prod_ratio = 100.0 * mean("production_mass") / mean("target_mass") if mean("target_mass") > 0 else np.nan
m[3].metric("Production against target in range [%]", fmt(prod_ratio, ".1f"))
span = "buckets of the range (mean line, min/max envelope)" if data["bucketed"] else "samples (LTTB-thinned)"
n_unsteady = 0 if unsteady is None else len(unsteady)
st.caption(f"{unit}, {local_stamp(start, tz)} to {local_stamp(min(end, data_end), tz)}; charts show {span}"
           + ("; k_ref and activity from steady rows only" if steady_only and "steady" in data else "") + ". "
           f"Shaded sand: not steady ({n_unsteady} stretch{'es' * (n_unsteady != 1)}); shaded slate: unit down. "
           "Green line: catalyst change; red dashed: alarm onset; orange dotted: expected crossing of the activity "
           "needed. Point at a shading or a line for its details.")
if steady is None:
    ui.not_available("Steady windows")
elif windows is not None and len(windows) == 0:
    st.info(f"No steady window of {unit} in this range: k_ref and activity are taken from steady operation only.",
            icon=":material/waves:")

env = data["bucketed"]
C = ui.COLOURS

st.markdown("**Conversion of the key reactant**")
if "conversion" in data:
    st.altair_chart(panel({"conversion": data["conversion"]}, frame=frame, y_title="conversion [-]",
                          colours={"conversion": C["measured"]}, envelope=env), key="ch_conv")
else:
    ui.not_available("Conversion")

st.markdown(f"**{k_name[0].upper() + k_name[1:]}, with its uncertainty band [{k_shown or 'SI'}]**")
if k in data:
    band = (data[k_lo], data[k_hi], "uncertainty band") if k_lo in data and k_hi in data else None
    st.altair_chart(panel({"k_ref": data[k]}, frame=frame, y_title=f"k_ref [{k_shown or 'SI'}]", factor=k_factor,
                          colours={"k_ref": C["measured"], "uncertainty band": C["band"]}, band=band,
                          envelope=env, y_format=".3~g"), key="ch_kref")
    if band is None:
        st.caption("k_ref band: not available yet.")
else:
    ui.not_available("k_ref")

st.markdown("**Catalyst activity, fitted decay law, its band and the forecast to the crossing**")
if "activity" in data:
    lines = {"activity": data["activity"]}
    if "activity_fit" in data:
        lines["decay law fit"] = data["activity_fit"]
    band = (data["activity_band_low"], data["activity_band_high"], "prediction band") \
        if "activity_band_low" in data and "activity_band_high" in data else None
    needed = float(frow["activity_needed"]) if frow is not None and pd.notna(frow["activity_needed"]) else np.nan
    if ahead and "activity_fit" in data and len(data["activity_fit"]):
        fit = data["activity_fit"]["value"].dropna()
        if len(fit):
            lines["forecast"] = projection(fit.index[-1], float(fit.iloc[-1]), needed, frow["miss_expected"])
        if band is not None:
            for edge, when, name in ((band[0], frow["miss_earliest"], "band, early edge"),
                                     (band[1], frow["miss_latest"], "band, late edge")):
                e = edge["value"].dropna()
                if len(e):
                    lines[name] = projection(e.index[-1], float(e.iloc[-1]), needed, when)
    colours = {"activity": C["measured"], "decay law fit": C["fit"], "forecast": C["fit"],
               "band, early edge": C["band"], "band, late edge": C["band"], "prediction band": C["band"]}
    st.altair_chart(panel(lines, frame=frame, y_title="activity [-]", colours=colours, band=band,
                          hlines={"activity needed for the target": needed},
                          dashed=("forecast", "band, early edge", "band, late edge"), envelope=env,
                          y_format=".2f"), key="ch_act")
    if "activity_fit" not in data:
        st.caption("Fitted decay law: not available yet.")
    if frow is not None:
        when = ""
        if ahead:
            when = f" Expected crossing {local_stamp(frow['miss_expected'], tz, False)}"
            if pd.notna(frow["miss_earliest"]) and pd.notna(frow["miss_latest"]) \
                    and frow["miss_earliest"] != frow["miss_latest"]:
                when += (f" (interval {local_stamp(frow['miss_earliest'], tz, False)} to "
                         f"{local_stamp(frow['miss_latest'], tz, False)})")
            when += "."
        said = str(frow["statement"]).rstrip()
        said += "" if said.endswith(".") else "."
        st.caption(f"Forecast of {local_stamp(frow['as_of'], tz)}: {said}{when}"
                   + (" Beyond the last result the forecast and the band's edges are drawn from the last fitted "
                      "values to the stored crossing dates (straight in ln a)." if ahead else ""))
else:
    ui.not_available("Catalyst activity")

st.markdown(f"**Production against target [{prod_shown}]**")
if "production_mass" in data:
    lines = {"production": data["production_mass"]}
    if "target_mass" in data:
        lines["target"] = data["target_mass"]
    st.altair_chart(panel(lines, frame=frame, y_title=f"production [{prod_shown}]", factor=prod_factor,
                          colours={"production": C["measured"], "target": C["target"]}, dashed=("target",),
                          envelope=env), key="ch_prod")
    st.caption(f"Mean production in range {fmt(mean('production_mass') * prod_factor, '.2f', prod_shown)}.")
else:
    ui.not_available("Production")

st.markdown("**Operating context: temperature, feed flow against plan, liquid volume**")
if "temperature" in data:
    v0, t_unit = to_display(0.0, "K")
    st.altair_chart(panel({"temperature": data["temperature"]}, frame=frame, y_title=f"temperature [{t_unit}]",
                          offset=v0, colours={"temperature": "#7a3b69"}, envelope=env, height=160), key="ch_temp")
else:
    ui.not_available("Temperature")
if "feed_flow" in data:
    plan = cached.unit_context(unit)["plan_feed_flow"]
    st.altair_chart(panel({"feed flow": data["feed_flow"]}, frame=frame, y_title="feed flow [m3/h]", factor=3600.0,
                          colours={"feed flow": "#2f5d50"}, hlines={"plan feed flow": plan}, envelope=env,
                          height=160), key="ch_feed")
    if plan is None:
        st.caption("No plan feed rate in the plant configuration.")
else:
    ui.not_available("Feed flow")
if level_var in data:
    lv_unit = units_of.get(level_var, "")
    title = "level [%]" if level_var == "level" else f"liquid volume [{lv_unit or 'm3'}]"
    st.altair_chart(panel({level_var: data[level_var]}, frame=frame, y_title=title,
                          colours={level_var: "#5c6b73"}, envelope=env, height=160, axis_title=True), key="ch_level")
else:
    ui.not_available("Level")
if data["missing"]:
    st.caption("Not in the store for this unit yet: " + ", ".join(sorted(data["missing"])) + ".")
