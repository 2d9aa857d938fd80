"""What-if within the safe limits: try a temperature, feed flow and residence time inside the
configured safe ranges; the unit's model (kinetrace.monitor.whatif.predict_setting, the same model
as the check's what-if) predicts conversion, production and the margin to each limit."""

import numpy as np
import pandas as pd
import streamlit as st

from kinedash import cached, ui
from kinedash.display import fmt
from kinedash.figures import safe_range_scale
from kinedash.setting import LEVER_LABELS, LEVER_SI, SettingUnavailable, from_shown, input_bounds, to_shown
from kinedash.setting_cache import site_settings, unit_setting
from kinetrace.errors import KinetraceError
from kinetrace.monitor.whatif import predict_setting
from kinetrace.units import UnitError, convert

st.title("What-if within the safe limits")
st.warning(ui.CAUTIONS, icon=":material/warning:")
url = ui.store_url()
unit = ui.pick_unit(url)
try:
    su = unit_setting(url, unit)
except SettingUnavailable as exc:
    ui.not_available(f"What-if of {unit}", str(exc))
    st.stop()

state = st.session_state
present = su.present
bounds = {}


def _bounds(lever, lo, hi):
    return input_bounds(lo, hi, LEVER_SI[lever], su.shown[lever])


def _on_grid(value, step):
    """A value on the input's step grid (what the slider shows is what is evaluated)."""
    digits = max(0, -int(np.floor(np.log10(step))))
    return round(round(value / step) * step, digits)


def _present_shown(lever, lo_hi):
    a, b, step = lo_hi
    return min(max(_on_grid(to_shown(present[lever], LEVER_SI[lever], su.shown[lever]), step), a), b)


def _reset():
    for lever in ("temperature", "feed_flow"):
        state[f"wi_{lever}"] = _present_shown(lever, bounds[lever])
    state.pop("wi_residence_time", None)


key_of = {lever: f"wi_{lever}" for lever in LEVER_LABELS}
bounds["temperature"] = _bounds("temperature", *su.model.temperature_limits)
bounds["feed_flow"] = _bounds("feed_flow", *su.model.feed_flow_limits)
if state.get("wi_for") != unit:                     # a new unit starts from its present operation
    state["wi_for"] = unit
    _reset()

st.subheader(f"Try a setting for {unit}")
c = st.columns(3)
with c[0]:
    a, b, step = bounds["temperature"]
    t_shown = st.slider(f"{LEVER_LABELS['temperature']} [{su.shown['temperature']}]", a, b, step=step,
                        key=key_of["temperature"], format="%.1f",
                        help="Only settings inside the configured safe temperature limits are offered.")
with c[1]:
    a, b, step = bounds["feed_flow"]
    q_shown = st.slider(f"{LEVER_LABELS['feed_flow']} [{su.shown['feed_flow']}]", a, b, step=step,
                        key=key_of["feed_flow"], format="%.2f",
                        help="Only feed flows inside the configured safe limits are offered.")
q = from_shown(q_shown, "m3/s", su.shown["feed_flow"])
tau_lo, tau_hi = su.volume_limits[0] / q, su.volume_limits[1] / q
bounds["residence_time"] = _bounds("residence_time", tau_lo, tau_hi)
with c[2]:
    a, b, step = bounds["residence_time"]
    if su.fixed_hold_up:
        tau_shown = a
        st.metric(f"{LEVER_LABELS['residence_time']} [h]", fmt(tau_shown, ".3g"))
        st.caption("Fixed hold-up: the residence time follows the feed flow.")
    else:
        kept = state.get(key_of["residence_time"])
        if kept is None:
            kept = to_shown(present["residence_time"] * present["feed_flow"] / q, "s", "h")
        state[key_of["residence_time"]] = float(min(max(_on_grid(kept, step), a), b))   # inside the safe range
        tau_shown = st.slider(f"{LEVER_LABELS['residence_time']} [h]", a, b, step=step,
                              key=key_of["residence_time"], format="%.2f",
                              help="Bounded by the safe level (hold-up) limits at the chosen feed flow.")
st.button("Back to the present operation", on_click=_reset, key="wi_reset")

setting = {"temperature": from_shown(t_shown, "K", su.shown["temperature"]), "feed_flow": q,
           "residence_time": tau_lo if su.fixed_hold_up else from_shown(tau_shown, "s", "h")}
common = dict(activity=su.activity, volume_limits=su.volume_limits, feed_conc=su.feed_conc)
try:
    tried = predict_setting(su.model, **setting, **common)
except KinetraceError as exc:
    st.error(f"No prediction: {exc}")
    st.stop()
try:                         # the present operation, for comparison (none when it lies outside a safe range)
    base = predict_setting(su.model, **present, **common, rel_tol=1e-6)
except KinetraceError:
    base = None
    st.info("The present operation lies outside a configured safe range; the inputs start at the nearest "
            "setting inside it.", icon=":material/info:")

_, production_unit = site_settings()


def mass(v):
    try:
        return float(convert(v, "kg/s", production_unit))
    except UnitError:
        return float("nan")


m = st.columns(4)
m[0].metric("Predicted conversion of the key reactant [-]", f"{tried.conversion:.4f}",
            delta=None if base is None else f"{tried.conversion - base.conversion:+.4f} against the present")
m[1].metric(f"Predicted production [{production_unit}]", f"{mass(tried.production_mass):.2f}",
            delta=None if base is None else f"{mass(tried.production_mass) - mass(base.production_mass):+.2f}"
                                              " against the present")
target_mass = tried.target * float(su.model.molar_masses[su.model.product_index])
m[2].metric(f"Target [{production_unit}]", f"{mass(target_mass):.2f}")
gap = mass(tried.production_mass) - mass(target_mass)
m[3].metric(f"Margin to the target [{production_unit}]", f"{gap:+.2f}",
            delta="meets the target" if gap >= 0 else "below the target", delta_color="normal" if gap >= 0 else "inverse")
st.caption(f"Model of {unit} as the check of {su.as_of:%Y-%m-%d %H:%M} UTC used it: catalyst activity "
           f"{su.activity:.3f}, {su.feed_text}. Production and conversion come from the steady-state CSTR "
           "model (kinetrace.monitor.whatif), the same as the check's what-if.")

st.subheader("Where the setting sits in the safe ranges")
rows, margins = [], []
for lever in ("temperature", "feed_flow", "residence_time"):
    si, shown = LEVER_SI[lever], su.shown[lever]
    lo, hi = tried.limits[lever]
    lo_s, hi_s = sorted((to_shown(lo, si, shown), to_shown(hi, si, shown)))
    p_si = present[lever] if lever != "residence_time" else present["residence_time"]
    rows.append({"lever": LEVER_LABELS[lever], "low": lo_s, "high": hi_s, "unit": shown,
                 "present": to_shown(p_si, si, shown), "tried": to_shown(setting[lever], si, shown)})
    below, above = tried.margins[lever]
    scale = to_shown(1.0, si, shown) - to_shown(0.0, si, shown)      # a difference: no offset
    margins.append({"lever": LEVER_LABELS[lever], "setting": f"{to_shown(setting[lever], si, shown):.4g} {shown}",
                    "safe range": f"{lo_s:.4g} to {hi_s:.4g} {shown}",
                    "margin to the low limit": f"{below * scale:.3g} {shown}",
                    "margin to the high limit": f"{above * scale:.3g} {shown}"})
st.altair_chart(safe_range_scale(pd.DataFrame(rows)), key="ch_wi", height=48 * len(rows) + 90)
st.caption("Each row spans the lever's configured safe range (0 % at the low limit, 100 % at the high one); "
           "shaded ends: the last tenth before a limit. Ring: present operation; diamond: the setting tried. "
           "The residence-time range is the safe hold-up (level) range at the feed flow tried.")
st.dataframe(pd.DataFrame(margins), hide_index=True, key="wi_margins")

w = cached.whatif(url, unit)
if len(w):
    st.subheader("What the check found restores the target (one lever at a time)")
    w = w[w["as_of"] == w["as_of"].max()]
    show = []
    for r in w.itertuples():
        lever = r.lever if r.lever in LEVER_SI else None
        shown = su.shown.get(lever, r.unit_of_measure) if lever else r.unit_of_measure
        inside = np.isfinite(r.proposed_value) and r.safe_low <= r.proposed_value <= r.safe_high
        val = to_shown(r.proposed_value, r.unit_of_measure, shown) if inside else np.nan
        show.append({"lever": LEVER_LABELS.get(r.lever, r.lever),
                     "setting that restores the target": fmt(val, ".4g", shown) if r.restores_target and inside
                     else "none within the safe limits", "note": r.note})
    st.dataframe(pd.DataFrame(show), hide_index=True, key="wi_table")
