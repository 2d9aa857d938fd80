"""Streamlit caches of the what-if inputs (see :mod:`.setting`) and the site settings."""

from __future__ import annotations

import streamlit as st

from . import cached, setting, source


@st.cache_data(ttl=cached.TTL, show_spinner=False)
def unit_setting(url: str, unit: str) -> setting.UnitSetting:
    """:func:`kinedash.setting.unit_setting` of the store at ``url`` and the configured plant."""
    return setting.unit_setting(cached.store_for(url), unit, setting.config_path())


@st.cache_data(ttl=cached.TTL, show_spinner=False)
def site_settings() -> tuple[str, str]:
    """The site's time zone and production unit (:func:`kinedash.source.site_settings`)."""
    return source.site_settings()


@st.cache_data(ttl=cached.TTL, show_spinner=False)
def tag_info(unit: str) -> dict:
    """:func:`kinedash.labels.tag_info` of the configured plant."""
    from .labels import tag_info as info

    return info(setting.config_path(), unit)
