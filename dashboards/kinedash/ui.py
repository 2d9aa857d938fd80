"""Pieces shared by the pages: the store guard, the unit and range pickers, colours, cautions."""

from __future__ import annotations

import datetime as dt

import pandas as pd
import streamlit as st

from . import cached, source

#: Colours of the dashboard (our own palette).
COLOURS = {
    "measured": "#1f6f8b",    # deep teal: a series from the store
    "fit": "#c2571a",         # burnt orange: a fitted law
    "band": "#7fb3c8",        # pale teal: an uncertainty band
    "target": "#4a4e69",      # slate: targets and limits
    "steady": "#dcedc8",      # pale green: steady windows
    "envelope": "#b8d4e0",    # min/max envelope of thinned data
    "alarm": "#a4161a",       # dark red
}

#: Short names of the ranges, accepted in the page address (``?range=7d``) for bookmarks.
RANGE_CODES = {"1d": "last 24 h", "7d": "last 7 days", "30d": "last 30 days", "90d": "last 90 days",
               "365d": "last 365 days", "all": "everything"}

#: Range choices of the time range picker: label -> days before the unit's last result.
RANGES = {"last 24 h": 1, "last 7 days": 7, "last 30 days": 30, "last 90 days": 90, "last 365 days": 365,
          "everything": None, "custom dates": "custom"}

CAUTIONS = (
    "**Estimates only.** These settings come from fitted models and today's data. Before any change, "
    "check it against the unit's safe operating envelope, its relief and runaway studies, and your site's "
    "management-of-change procedure; defer to site procedures, local codes and licensed engineering "
    "practice. No setting outside the configured safe limits is ever shown."
)


def store_url() -> str:
    """URL of the store for this page; stops the page with a clear message when it cannot be read."""
    try:
        url = source.resolve_store_url()
        cached.store_for(url)
    except source.StoreUnavailable as exc:
        st.error(f"Results store unavailable. {exc}", icon=":material/cloud_off:")
        st.caption("The dashboard reads the results store only; fill it with `kinetrace check --config <plant>.toml`.")
        st.stop()
    return url


def pick_unit(url: str, label: str = "Reactor") -> str:
    """Unit selector (shared by the pages through the session); stops the page when the store is empty."""
    options = cached.units(url)
    if not options:
        st.info("No results yet: the store is there but holds no unit. Run `kinetrace check` to fill it.",
                icon=":material/hourglass_empty:")
        st.stop()
    state = st.session_state
    # widget state does not survive a page switch; the choice is kept under a plain key too
    if state.get("kt_unit_kept") not in options:
        state["kt_unit_kept"] = options[0]
    state["kt_unit"] = state["kt_unit_kept"]
    return st.selectbox(label, options, key="kt_unit",
                        on_change=lambda: state.__setitem__("kt_unit_kept", state["kt_unit"]))


def pick_range(url: str, unit: str, default: str = "last 30 days", key: str = "kt_range"):
    """Time range picker ending at the unit's last result; returns (start, end) UTC, half-open.

    Ranges start no earlier than the unit's first result (so buckets are not wasted)."""
    last = cached.watermark(url, unit)
    first = cached.first_time(url, unit)
    end = (pd.Timestamp.now(tz="UTC") if last is None else pd.Timestamp(last)) + pd.Timedelta("1us")
    labels = list(RANGES)
    state, kept = st.session_state, key + "_kept"
    asked = RANGE_CODES.get(st.query_params.get("range", ""))
    if asked and kept not in state:
        state[kept] = asked
    if state.get(kept) not in labels:
        state[kept] = default
    state[key] = state[kept]          # widget state does not survive a page switch; the plain key does
    choice = st.radio("Time range", labels, horizontal=True, key=key,
                      on_change=lambda: state.__setitem__(kept, state[key]))
    days = RANGES[choice]
    if days == "custom":
        week = (end - pd.Timedelta(days=7)).date()
        got = st.date_input("From / to (UTC days)", value=(week, end.date()), key=key + "_dates")
        if isinstance(got, (tuple, list)) and len(got) == 2:
            a, b = got
            return pd.Timestamp(a, tz="UTC"), pd.Timestamp(b, tz="UTC") + pd.Timedelta(days=1)
        return pd.Timestamp(week, tz="UTC"), end
    start = end - pd.Timedelta(days=days) if days is not None else (first or end - pd.Timedelta(days=1))
    if first is not None and start < first:
        start = first
    return start, end


def not_available(what: str, why: str = "the pipeline has not written it to the store yet") -> None:
    """The 'not available yet' state of one panel."""
    st.info(f"{what}: not available yet ({why}).", icon=":material/schedule:")


def day_text(ts) -> str:
    """A date for the page ('not available' when missing)."""
    if ts is None or (not isinstance(ts, (str, dt.date)) and pd.isna(ts)):
        return "not available"
    return pd.Timestamp(ts).strftime("%Y-%m-%d")
