"""Store queries as Streamlit caches: the store (engine) once per URL, query results for TTL seconds.

Every function takes the store URL (resolved from the environment or the config, never
typed on a page) so two stores never share a cache entry.
"""

from __future__ import annotations

import os

import pandas as pd
import streamlit as st

from . import source

#: Seconds a query result is reused before the store is asked again. [s]
TTL = 60


@st.cache_resource(show_spinner=False)
def store_for(url: str):
    """The open store of a URL (one engine and connection pool per process)."""
    return source.connect(url)


@st.cache_data(ttl=TTL, show_spinner=False)
def units(url: str) -> list[str]:
    """Units that have anything in the store, sorted."""
    s = store_for(url)
    found = set(s.series_catalog()["unit_id"]) | set(s.daily()["unit_id"]) | set(s.watermarks()["unit_id"])
    found |= set(s.alarms()["unit_id"])
    return sorted(found)


@st.cache_data(ttl=TTL, show_spinner=False)
def catalog(url: str, unit: str) -> pd.DataFrame:
    return store_for(url).series_catalog(unit)


@st.cache_data(ttl=TTL, show_spinner=False)
def watermark(url: str, unit: str):
    return store_for(url).watermark(unit)


@st.cache_data(ttl=TTL, show_spinner=False)
def first_time(url: str, unit: str):
    return source.first_time(store_for(url), unit)


@st.cache_data(ttl=TTL, show_spinner=False)
def chart_series(url: str, unit: str, variables: tuple, start, end, points: int = source.CHART_POINTS,
                 follow: tuple = (), steady_only: tuple = ()) -> dict:
    """See :func:`kinedash.source.chart_series`; ``follow`` as (follower, leader) pairs."""
    return source.chart_series(store_for(url), unit, list(variables), start, end, points=points,
                               follow=dict(follow), steady_only=steady_only)


@st.cache_data(ttl=TTL, show_spinner=False)
def series(url: str, unit: str, variables: tuple, start, end) -> pd.DataFrame:
    return store_for(url).series(unit, list(variables), start, end)


@st.cache_data(ttl=TTL, show_spinner=False)
def daily(url: str, unit=None, first_day=None, last_day=None) -> pd.DataFrame:
    return store_for(url).daily(unit, first_day, last_day)


@st.cache_data(ttl=TTL, show_spinner=False)
def alarms(url: str, unit=None, state=None) -> pd.DataFrame:
    return store_for(url).alarms(unit, state=state)


@st.cache_data(ttl=TTL, show_spinner=False)
def parameters(url: str, unit=None) -> pd.DataFrame:
    return store_for(url).parameters(unit)


@st.cache_data(ttl=TTL, show_spinner=False)
def forecasts(url: str, unit=None) -> pd.DataFrame:
    return store_for(url).forecasts(unit)


@st.cache_data(ttl=TTL, show_spinner=False)
def whatif(url: str, unit=None) -> pd.DataFrame:
    return store_for(url).whatif(unit)


@st.cache_data(ttl=TTL, show_spinner=False)
def quality(url: str, unit=None) -> pd.DataFrame:
    return store_for(url).quality(unit)


@st.cache_data(ttl=TTL, show_spinner=False)
def runs(url: str) -> pd.DataFrame:
    return store_for(url).runs()


@st.cache_data(ttl=TTL, show_spinner=False)
def steady_points(url: str, unit: str, k_variable: str, start, end) -> pd.DataFrame:
    from .arrhenius import steady_points as points

    return points(store_for(url), unit, k_variable, start, end)


@st.cache_data(ttl=TTL, show_spinner=False)
def verdicts(url: str) -> list[tuple[str, str, str]]:
    """(unit, state, sentence) of every unit on its latest complete day: the same sentence as the
    check's output and the report (kinetrace.report.verdict), from the store only."""
    from kinetrace.report import ReportError, collect

    try:
        tz, production_unit = source.site_settings()
        content = collect(store_for(url), tz=tz, production_unit=production_unit)
    except ReportError:
        return []
    return [(u.unit, u.verdict.state, u.verdict.sentence) for u in content.units if u.verdict is not None]


def morning(url: str):
    """Everything the first page says, gathered by the report's own :func:`kinetrace.report.collect`
    from the store (verdicts, open alarms, forecasts, 30-day activity, the last complete run), with
    the site's time zone; None when the store holds no daily rows yet. Cached per store and configuration."""
    return _morning(url, os.environ.get("KINETRACE_CONFIG", ""))


@st.cache_data(ttl=TTL, show_spinner=False)
def _morning(url: str, config: str):
    from kinetrace.report import ReportError, collect

    tz, production_unit = source.site_settings({"KINETRACE_CONFIG": config} if config else {})
    try:
        return collect(store_for(url), tz=tz, production_unit=production_unit)
    except ReportError:
        return None


def unit_context(unit: str) -> dict:
    """The configuration's plan feed rate and catalyst changes of a unit (see :func:`kinedash.source.unit_context`),
    cached per configuration file."""
    return _unit_context(unit, os.environ.get("KINETRACE_CONFIG", ""))


@st.cache_data(ttl=TTL, show_spinner=False)
def _unit_context(unit: str, config: str) -> dict:
    return source.unit_context(unit, {"KINETRACE_CONFIG": config} if config else {})


def site_settings() -> tuple[str, str]:
    """The site's time zone and production unit (see :func:`kinedash.source.site_settings`), cached per
    configuration file."""
    return _site_settings(os.environ.get("KINETRACE_CONFIG", ""))


@st.cache_data(ttl=TTL, show_spinner=False)
def _site_settings(config: str) -> tuple[str, str]:
    return source.site_settings({"KINETRACE_CONFIG": config} if config else {})
