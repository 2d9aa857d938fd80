"""Reactor trends: conversion, k_ref with its band, activity with the fitted decay law and
forecast band, production against target; steady windows shaded."""

import numpy as np
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.charts import trend_chart
from kinedash.display import fmt, to_display
from kinedash.source import windows_of

st.title("Reactor trends")
url = ui.store_url()
top = st.columns([1, 4])
with top[0]:
    unit = ui.pick_unit(url)
with top[1]:
    start, end = ui.pick_range(url, unit)

cat = cached.catalog(url, unit)
have = set(cat["variable"])
rxns = sorted(v.split(":", 1)[1] for v in have if v.startswith("k_ref:") and not v.endswith("_measured"))
rxn = st.selectbox("Reaction", rxns, key="trend_rxn") if len(rxns) > 1 else (rxns[0] if rxns else None)
k = f"k_ref:{rxn}" if rxn else "k_ref"
k_lo = next((v for v in (f"k_ref_low:{rxn}", "k_ref_low") if v in have), f"k_ref_low:{rxn}")
k_hi = next((v for v in (f"k_ref_high:{rxn}", "k_ref_high") if v in have), f"k_ref_high:{rxn}")
wanted = ("conversion", k, k_lo, k_hi, "activity", "activity_fit", "activity_band_low", "activity_band_high",
          "production_mass", "target_mass", "steady")
steady_only = st.toggle("k_ref and activity from steady operation only", value=True, key="trend_steady_only",
                        help="Hides values back-calculated while the unit was not steady (start-ups, upsets).")
data = cached.chart_series(url, unit, wanted, start, end,
                           follow=((k_lo, k), (k_hi, k), ("activity_band_low", "activity_fit"),
                                   ("activity_band_high", "activity_fit")),
                           steady_only=(k, k_lo, k_hi, "activity") if steady_only else ())
stats = data["stats"]
if not stats or all(n == 0 for _, n, _, _ in stats.values()):
    ui.not_available(f"Results of {unit} from {start:%Y-%m-%d %H:%M} to {end:%Y-%m-%d %H:%M} UTC",
                     "nothing stored in this range")
    st.stop()


def mean(var):
    s, n, _, _ = stats.get(var, (np.nan, 0, np.nan, np.nan))
    return s / n if n else np.nan


steady = data.get("steady")
windows = windows_of(steady["lo"]) if steady is not None else None
prod_ratio = 100.0 * mean("production_mass") / mean("target_mass") if mean("target_mass") > 0 else np.nan
m = st.columns(4)
m[0].metric("Mean conversion in range [-]", fmt(mean("conversion"), ".4f"))
k_unit = dict(zip(cat["variable"], cat["unit_of_measure"])).get(k, "") or "SI"
m[1].metric(f"Mean k_ref{'' if rxn is None else ' (' + rxn + ')'} [{k_unit}]", fmt(mean(k), ".4g"))
m[2].metric("Mean catalyst activity in range [-]", fmt(mean("activity"), ".4f"))
if steady_only and "steady" in data:
    st.caption("k_ref and activity: steady rows only" + (" (wholly steady buckets)" if data["bucketed"] else "") + ".")
m[3].metric("Production against target in range [%]", fmt(prod_ratio, ".1f"))
span = "buckets of the range (mean line, min/max envelope)" if data["bucketed"] else "samples (LTTB-thinned)"
st.caption(f"{unit}, {start:%Y-%m-%d %H:%M} to {end:%Y-%m-%d %H:%M} UTC; charts show {span}. "
           "Shaded: steady windows.")
if steady is None:
    ui.not_available("Steady windows")
elif windows is not None and len(windows) == 0:
    st.info(f"No steady window of {unit} in this range: k_ref and activity are taken from steady operation only.",
            icon=":material/waves:")

env = data["bucketed"]
c1, c2 = st.columns(2)
with c1:
    st.markdown("**Conversion of the key reactant**")
    if "conversion" in data:
        st.altair_chart(trend_chart({"conversion": data["conversion"]}, unit="-", y_title="conversion",
                                    colours={"conversion": ui.COLOURS["measured"]}, windows=windows,
                                    envelope=env), key="ch_conv")
    else:
        ui.not_available("Conversion")
with c2:
    st.markdown("**Apparent rate constant at reference temperature**")
    if k in data:
        band = (data[k_lo], data[k_hi], "uncertainty band") if k_lo in data and k_hi in data else None
        st.altair_chart(trend_chart({"k_ref": data[k]}, unit=k_unit, y_title="k_ref",
                                    colours={"k_ref": ui.COLOURS["measured"], "uncertainty band": ui.COLOURS["band"]},
                                    band=band, windows=windows, envelope=env), key="ch_kref")
        if band is None:
            st.caption("k_ref band: not available yet.")
    else:
        ui.not_available("k_ref")
c3, c4 = st.columns(2)
with c3:
    st.markdown("**Catalyst activity, fitted decay law and forecast band**")
    fc = cached.forecasts(url, unit)
    frow = fc.iloc[-1] if len(fc) else None
    if "activity" in data:
        lines = {"activity": data["activity"]}
        if "activity_fit" in data:
            lines["decay law fit"] = data["activity_fit"]
        band = (data["activity_band_low"], data["activity_band_high"], "prediction band") \
            if "activity_band_low" in data and "activity_band_high" in data else None
        hl = {"activity needed for target": frow["activity_needed"]} if frow is not None else {}
        vl = {"expected miss": frow["miss_expected"]} if frow is not None and pd.notna(frow["miss_expected"]) \
            and start <= frow["miss_expected"] <= end else {}
        st.altair_chart(trend_chart(lines, unit="-", y_title="activity",
                                    colours={"activity": ui.COLOURS["measured"], "decay law fit": ui.COLOURS["fit"],
                                             "prediction band": ui.COLOURS["band"]},
                                    band=band, windows=windows, hlines=hl, vlines=vl, envelope=env), key="ch_act")
        if "activity_fit" not in data:
            st.caption("Fitted decay law: not available yet.")
        if frow is not None:
            span = (f" (expected {ui.day_text(frow['miss_expected'])}, interval {ui.day_text(frow['miss_earliest'])}"
                    f" to {ui.day_text(frow['miss_latest'])})" if pd.notna(frow["miss_expected"]) else "")
            st.caption(f"Forecast ({ui.day_text(frow['as_of'])}): {frow['statement']}{span}")
    else:
        ui.not_available("Catalyst activity")
with c4:
    st.markdown("**Production against target**")
    if "production_mass" in data:
        lines = {"production": data["production_mass"]}
        if "target_mass" in data:
            lines["target"] = data["target_mass"]
        st.altair_chart(trend_chart(lines, unit="kg/s", y_title="production",
                                    colours={"production": ui.COLOURS["measured"], "target": ui.COLOURS["target"]},
                                    windows=windows, envelope=env), key="ch_prod")
        v, shown = to_display(mean("production_mass"), "kg/s")
        st.caption(f"Mean production in range {fmt(v, '.1f', shown)}.")
    else:
        ui.not_available("Production")
if data["missing"]:
    st.caption("Not in the store for this unit yet: " + ", ".join(sorted(data["missing"])) + ".")
