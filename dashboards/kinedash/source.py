"""Reading the results store for the dashboard (read only; no Streamlit in here).

The store URL comes from the environment or the plant configuration, never from a
page: ``KINETRACE_STORE_URL`` if set, else the ``[store]`` section of the config named
by ``KINETRACE_CONFIG`` (default ``config/demo_plant.toml`` of the repository), with
relative SQLite paths taken from the config file's folder
(:func:`kinetrace.config.load.store_url`).

Long ranges are thinned where the data lives: when a range holds more than
:data:`RAW_LIMIT` rows of a series, one read-only ``GROUP BY`` query per variable
returns the minimum, maximum, sum and count of each of ``n_buckets`` equal-width time
buckets (min/max per pixel column, Jugel et al. 2014), so a year of 1-minute results
never crosses the wire row by row; shorter ranges are read with
:meth:`kinetrace.store.Store.series` and thinned by MinMaxLTTB (:mod:`.downsample`).
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np
import pandas as pd
from sqlalchemy import func, select
from sqlalchemy.engine import make_url

from kinetrace.errors import KinetraceError
from kinetrace.redact import redact_url, scrub
from kinetrace.store import Store, StoreError, open_store
from kinetrace.store.bulk import ts_as_epoch_us, ts_range_condition
from kinetrace.store.rollup import HOUR_US, ceil_hour, floor_hour, has_hours, hour_buckets, summarised
from kinetrace.store.schema import series_keys, series_values

from .downsample import thin

REPO = Path(__file__).resolve().parents[2]
DEFAULT_CONFIG = REPO / "config" / "demo_plant.toml"

#: Rows of one series in a range above which the range is read as time buckets. [-]
RAW_LIMIT = 20_000
#: Points per series on a chart (LTTB output, or time buckets). [-]
CHART_POINTS = 1000
#: Ways :func:`bucket_stats` can read the buckets. [-]
BUCKET_READS = ("hours", "ranges", "group_by")


class StoreUnavailable(KinetraceError):
    """The results store cannot be opened (no file yet, server down, wrong URL)."""


def resolve_store_url(environ=None) -> str:
    """The store URL the dashboard reads, from the environment or the plant configuration.

    Parameters
    ----------
    environ : mapping, optional
        Environment (default ``os.environ``): ``KINETRACE_STORE_URL`` (a SQLAlchemy URL)
        wins; else ``KINETRACE_CONFIG`` names the plant configuration.

    Returns
    -------
    str
        SQLAlchemy URL; a relative SQLite path is resolved against the config's folder.

    >>> resolve_store_url({"KINETRACE_STORE_URL": "sqlite:////srv/kt/results.sqlite"})
    'sqlite:////srv/kt/results.sqlite'
    """
    environ = os.environ if environ is None else environ
    if environ.get("KINETRACE_STORE_URL"):
        return environ["KINETRACE_STORE_URL"]
    from kinetrace.config import load_config
    from kinetrace.config.load import store_url

    config = Path(environ.get("KINETRACE_CONFIG") or DEFAULT_CONFIG)
    try:
        cfg = load_config(config)
    except (KinetraceError, OSError) as exc:
        raise StoreUnavailable(f"plant configuration {config}: {exc}") from None
    return store_url(cfg, config, environ=environ)


def safe_url(url: str) -> str:
    """The URL with any password hidden, for messages on the page.

    >>> safe_url("postgresql+psycopg://kt:secret@db:5432/results")
    'postgresql+psycopg://kt:***@db:5432/results'
    """
    return redact_url(url)


def connect(url: str) -> Store:
    """Open an existing store for reading; never creates tables or files.

    Raises
    ------
    StoreUnavailable
        No SQLite file at the path, or the database cannot be reached or is not a store.
    """
    try:
        parsed = make_url(url)
    except Exception as exc:  # noqa: BLE001
        raise StoreUnavailable(f"store URL {safe_url(url)} cannot be parsed: {scrub(exc, url)}") from None
    if parsed.get_backend_name() == "sqlite" and parsed.database not in (None, "", ":memory:"):
        if not Path(parsed.database).is_file():
            raise StoreUnavailable(f"no results store at {parsed.database} yet; run `kinetrace check` "
                                   "(or `make demo`) to fill it")
    try:
        return open_store(url, create=False)
    except (StoreError, OSError) as exc:
        raise StoreUnavailable(f"results store {safe_url(url)} cannot be read: {scrub(exc, url)}") from None
    except Exception as exc:  # noqa: BLE001 - driver errors (server down, bad credentials)
        raise StoreUnavailable(f"results store {safe_url(url)} cannot be reached: "
                               f"{type(exc).__name__}: {scrub(exc, url)}") from None


def _us(ts) -> int:
    return int(pd.Timestamp(ts).tz_convert("UTC").value // 1000)


def _key_ids(store: Store, unit: str, variables) -> dict[str, int]:
    with store.engine.connect() as conn:
        rows = conn.execute(select(series_keys.c.variable, series_keys.c.key_id)
                            .where(series_keys.c.unit_id == unit)).all()
    known = {r.variable: r.key_id for r in rows}
    return {v: known[v] for v in variables if v in known}


def first_time(store: Store, unit: str):
    """Earliest time stamp of any series of a unit, ``None`` when it has none. [UTC]"""
    with store.engine.connect() as conn:
        ts = ts_as_epoch_us(conn)
        keys = select(series_keys.c.key_id).where(series_keys.c.unit_id == unit)
        got = conn.execute(select(func.min(ts)).where(series_values.c.key_id.in_(keys))).scalar()
    return None if got is None else pd.Timestamp(int(got), unit="us", tz="UTC")


def estimated_rows(store: Store, key_id: int, start, end) -> int:
    """Rows of one series in ``[start, end)`` estimated from the spacing of its first two. [-]"""
    with store.engine.connect() as conn:
        ts = ts_as_epoch_us(conn)
        got = conn.execute(select(ts).where(series_values.c.key_id == key_id, ts >= _us(start), ts < _us(end))
                           .order_by(series_values.c.ts).limit(2)).scalars().all()
    if len(got) < 2:
        return len(got)
    step = max(int(got[1]) - int(got[0]), 1)
    return int((_us(end) - int(got[0])) // step) + 1


def bucket_stats(store: Store, key_id: int, start, end, n_buckets: int, how: str | None = None,
                 summarised: bool | None = None) -> pd.DataFrame:
    """Per time bucket of ``[start, end)``: first time, min, max, sum and count of one series.

    Parameters
    ----------
    store : Store
    key_id : int
        ``series_keys.key_id`` of the series.
    start, end : Timestamp
        Range, tz-aware. [UTC]
    n_buckets : int
        Equal-width buckets (at most: buckets of 2 h and more are widened to whole hours and start
        at the hour holding ``start``, so those of every series of a chart align, whichever way
        each is read). [-]
    how : {"hours", "ranges", "group_by"}, optional
        ``"hours"``: whole hours from the store's hourly summary, the part-hours at the two ends
        from the rows (default for buckets of whole hours of a summarised series); ``"ranges"``:
        one indexed range query per bucket (default otherwise on SQLite); ``"group_by"``: one
        ``GROUP BY`` query (otherwise on PostgreSQL). Each gives the min, max, sum and count of
        the rows of its buckets.
    summarised : bool, optional
        Whether the store keeps the series' hourly summary; looked up when not given.

    Returns
    -------
    DataFrame
        Index: bucket start (UTC; the first bucket starts at ``start``); columns ``t_first``
        (UTC), ``lo``, ``hi``, ``total``, ``count``; buckets without non-NULL values are
        absent. [unit of the series]
    """
    s_us, e_us = _us(start), _us(end)
    width = max((e_us - s_us + n_buckets - 1) // n_buckets, 1)
    origin = s_us
    if width >= 2 * HOUR_US:
        width, origin = ceil_hour(width), floor_hour(s_us)
    if how is None:
        if width >= 2 * HOUR_US and summarised is None:
            summarised = bool(summarised_keys(store, [key_id]))
        if width >= 2 * HOUR_US and summarised:
            how = "hours"
        else:
            how = "ranges" if store.dialect == "sqlite" else "group_by"
    if how not in BUCKET_READS:
        raise ValueError(f"bucket read {how!r} is not one of {list(BUCKET_READS)}")
    with store.engine.connect() as conn:
        if how == "hours":
            if width < 2 * HOUR_US:
                width, origin = ceil_hour(width), floor_hour(s_us)
            rows = hour_buckets(conn, key_id, s_us, e_us, width)
            a, z = ceil_hour(s_us), floor_hour(e_us)
            ends = [(s_us, min(a, e_us))] if z > a else [(s_us, e_us)]
            if z > a and z < e_us:
                ends.append((z, e_us))
            for lo, hi in ends:            # part-hours at the ends (or the whole range) from the rows
                if hi <= lo:
                    continue
                r = _raw_stats(conn, key_id, lo, hi)
                if r[4]:
                    rows.append(((lo - origin) // width, *r))
            rows = _merge_buckets(rows)
        elif how == "ranges":
            # one index range scan per bucket: SQLite would sort a GROUP BY on an expression
            # in a temporary B-tree, about 8x slower than these scans
            nb = (e_us - origin + width - 1) // width
            edges = [(max(origin + i * width, s_us), min(origin + (i + 1) * width, e_us)) for i in range(nb)]
            if conn.dialect.name == "sqlite":
                raw = conn.connection.driver_connection
                sql = ("SELECT ?, min(ts), min(value), max(value), sum(value), count(value) FROM series_values "
                       "WHERE key_id = ? AND ts >= ? AND ts < ? AND value IS NOT NULL")
                rows = [raw.execute(sql, (i, key_id, lo, hi)).fetchone() for i, (lo, hi) in enumerate(edges)]
            else:                          # the same scans through SQLAlchemy (other back ends' parameters)
                rows = [(i, *_raw_stats(conn, key_id, lo, hi)) for i, (lo, hi) in enumerate(edges)]
            rows = [r for r in rows if r[5]]
        else:
            ts = ts_as_epoch_us(conn)
            b = ((ts - origin) // width).label("b")
            v = series_values.c.value
            stmt = (select(b, func.min(ts), func.min(v), func.max(v), func.sum(v), func.count(v))
                    .where(series_values.c.key_id == key_id, ts >= s_us, ts < e_us, v.is_not(None))
                    .group_by(b).order_by(b))
            rows = conn.execute(stmt).all()
    cols = ["b", "t_first", "lo", "hi", "total", "count"]
    raw = pd.DataFrame(rows, columns=cols) if rows else pd.DataFrame({c: [] for c in cols})
    idx = np.maximum(origin + raw["b"].to_numpy(dtype=np.int64) * width, s_us)
    idx = pd.to_datetime(idx, unit="us", utc=True)
    return pd.DataFrame({"t_first": pd.to_datetime(raw["t_first"].to_numpy(dtype=np.int64), unit="us", utc=True),
                         "lo": raw["lo"].to_numpy(dtype=float), "hi": raw["hi"].to_numpy(dtype=float),
                         "total": raw["total"].to_numpy(dtype=float),
                         "count": raw["count"].to_numpy(dtype=np.int64)}, index=pd.DatetimeIndex(idx, name="ts"))


def summarised_keys(store: Store, key_ids) -> set[int]:
    """Those of ``key_ids`` whose hourly summary the store keeps (none in a store of version 3)."""
    if not _has_hours(store):
        return set()
    with store.engine.connect() as conn:
        return set(summarised(conn, key_ids))


def _has_hours(store: Store) -> bool:
    """Whether the store keeps hourly summaries (remembered on the store object)."""
    if not hasattr(store, "_kt_has_hours"):
        with store.engine.connect() as conn:
            store._kt_has_hours = has_hours(conn)
    return store._kt_has_hours


def _raw_stats(conn, key_id: int, lo_us: int, hi_us: int) -> tuple:
    """(first time [us], min, max, sum, count) of a series' non-NULL rows in ``[lo, hi)``."""
    ts = ts_as_epoch_us(conn)
    v = series_values.c.value
    r = conn.execute(select(func.min(ts), func.min(v), func.max(v), func.sum(v), func.count(v))
                     .where(series_values.c.key_id == key_id, ts_range_condition(conn, lo_us, hi_us),
                            v.is_not(None))).one()
    return (None if r[0] is None else int(r[0]), r[1], r[2], r[3], int(r[4] or 0))


def _merge_buckets(rows: list[tuple]) -> list[tuple]:
    """Rows ``(b, t_first, lo, hi, total, n)`` of the same bucket combined, in bucket order."""
    out: dict = {}
    for b, t, lo, hi, tot, n in rows:
        if b in out:
            t0, lo0, hi0, tot0, n0 = out[b]
            out[b] = (min(t0, t), min(lo0, lo), max(hi0, hi), tot0 + tot, n0 + n)
        else:
            out[b] = (t, lo, hi, tot, n)
    return [(b, *out[b]) for b in sorted(out)]


def chart_series(store: Store, unit: str, variables, start, end, *, points: int = CHART_POINTS,
                 follow: dict | None = None, steady_only=()) -> dict:
    """Series of one unit ready to draw, thinned to about ``points`` per variable.

    Parameters
    ----------
    store : Store
    unit : str
    variables : list of str
        Wanted variables; those the unit does not have are listed in ``missing``.
    start, end : Timestamp
        Half-open range. [UTC]
    points : int
        Points per variable on the chart. [-]
    follow : dict, optional
        ``follower -> leader``: a follower (e.g. a band edge) keeps the leader's LTTB
        rows, so a band and its line share time stamps. Buckets always align.
    steady_only : sequence of str
        Variables kept only where the unit's ``steady`` flag is 1 (read samples), or in
        buckets where every row is steady (bucketed reads); their ``stats`` cover the
        same rows. Ignored when the unit has no ``steady`` series.

    Returns
    -------
    dict
        ``variable -> DataFrame`` with index ``ts`` and columns ``value`` (the sample, or
        the bucket mean), ``lo``, ``hi`` (bucket min/max; equal to ``value`` for samples)
        [unit of the variable]; plus ``"missing"``: variables not stored, ``"stats"``:
        ``variable -> (sum, count, min, max)`` over the whole range (exact, not thinned),
        ``"bucketed"``: whether the range was read as buckets.
    """
    keys = _key_ids(store, unit, variables)
    out: dict = {"missing": [v for v in variables if v not in keys], "stats": {}, "bucketed": False}
    if not keys:
        return out
    flag = _key_ids(store, unit, ["steady"])
    masked = {v for v in steady_only if v in keys} if flag else set()
    if masked and "steady" not in keys:
        keys = dict(keys, steady=flag["steady"])
    probe = max(keys.values(), key=lambda k: k)
    bucketed = estimated_rows(store, probe, start, end) > RAW_LIMIT
    out["bucketed"] = bucketed
    if bucketed:
        fine = summarised_keys(store, keys.values())
        with ThreadPoolExecutor(max_workers=min(4, len(keys))) as pool:
            got = dict(zip(keys, pool.map(lambda k: bucket_stats(store, k, start, end, points, summarised=k in fine),
                                          keys.values())))
        steady_buckets = got["steady"].index[got["steady"]["lo"] >= 1.0] if masked else None
        for v, b in got.items():
            if v in masked:
                b = b.loc[b.index.intersection(steady_buckets)]
            mean = b["total"] / b["count"]
            out[v] = pd.DataFrame({"value": mean, "lo": b["lo"], "hi": b["hi"]}, index=b.index)
            n = int(b["count"].sum())
            out["stats"][v] = (float(b["total"].sum()), n, float(b["lo"].min()) if n else np.nan,
                               float(b["hi"].max()) if n else np.nan)
        return _without_flag(out, variables)
    wide = store.series(unit, list(keys), start, end)
    for v in masked:
        wide[v] = wide[v].where(wide["steady"] == 1.0)
    follow = {f: lead for f, lead in (follow or {}).items() if f in keys and lead in keys}
    for v in sorted(keys, key=lambda v: v in follow):
        col = wide[v].dropna()
        out["stats"][v] = (float(col.sum()), int(col.size), float(col.min()) if col.size else np.nan,
                           float(col.max()) if col.size else np.nan)
        if v in follow:
            rows = wide.loc[out[follow[v]].index, [v]].dropna()
            out[v] = pd.DataFrame({"value": rows[v], "lo": rows[v], "hi": rows[v]}, index=rows.index)
            continue
        kept = thin(wide[[v]].rename(columns={v: "value"}), "value", points, method="minmaxlttb")
        out[v] = pd.DataFrame({"value": kept["value"], "lo": kept["value"], "hi": kept["value"]},
                              index=kept.index)
    return _without_flag(out, variables)


def _without_flag(out: dict, variables) -> dict:
    """Drop the ``steady`` flag when it was read only to mask other variables."""
    if "steady" not in variables:
        out.pop("steady", None)
        out["stats"].pop("steady", None)
    return out


def windows_of(flag: pd.Series) -> pd.DataFrame:
    """Contiguous windows where a 0/1 flag is 1 (a bucket counts when all its rows are 1).

    Parameters
    ----------
    flag : Series
        Time-indexed flag values in ``[0, 1]`` (a bucket minimum); NaN counts as 0.

    Returns
    -------
    DataFrame
        Columns ``start``, ``end`` (UTC): each window runs from its first flagged time to
        the next time after it (or its last time).

    >>> t = pd.date_range("2026-11-30", periods=6, freq="1h", tz="UTC")
    >>> w = windows_of(pd.Series([0, 1, 1, 0, 1, 1], index=t))
    >>> [(a.hour, b.hour) for a, b in zip(w["start"], w["end"])]
    [(1, 3), (4, 5)]
    """
    on = (flag.fillna(0).to_numpy() >= 1.0)
    t = flag.index
    if not on.any():
        return pd.DataFrame({"start": pd.DatetimeIndex([], tz="UTC"), "end": pd.DatetimeIndex([], tz="UTC")})
    d = np.diff(np.r_[0, on.astype(np.int8), 0])
    first = np.flatnonzero(d == 1)
    after = np.flatnonzero(d == -1)
    ends = np.minimum(after, len(t) - 1)
    return pd.DataFrame({"start": t[first], "end": t[ends]})


def site_settings(environ=None) -> tuple[str, str]:
    """The site's time zone and production unit from the plant configuration (``KINETRACE_CONFIG``),
    else UTC and kg/d."""
    environ = os.environ if environ is None else environ
    from kinetrace.config import load_config

    try:
        site = load_config(Path(environ.get("KINETRACE_CONFIG") or DEFAULT_CONFIG)).site
        return site.timezone, site.production_unit
    except (KinetraceError, OSError):
        return "UTC", "kg/d"


def unit_context(unit: str, environ=None) -> dict:
    """What the plant configuration says about a unit's operation, for the trends' context lines.

    Parameters
    ----------
    unit : str
        Unit id.
    environ : mapping, optional
        Environment naming the configuration (``KINETRACE_CONFIG``; default the demo plant).

    Returns
    -------
    dict
        ``plan_feed_flow`` [m3/s] or None, ``catalyst_changes`` (list of UTC Timestamps); empty
        values when the configuration cannot be read or does not name the unit.
    """
    environ = os.environ if environ is None else environ
    from kinetrace.config import load_config

    out = {"plan_feed_flow": None, "catalyst_changes": []}
    try:
        cfg = load_config(Path(environ.get("KINETRACE_CONFIG") or DEFAULT_CONFIG))
    except (KinetraceError, OSError):
        return out
    u = next((x for x in cfg.units if x.id == unit), None)
    if u is None:
        return out
    out["plan_feed_flow"] = None if u.plan is None else u.plan.feed_flow
    out["catalyst_changes"] = [pd.Timestamp(t).tz_convert("UTC") if pd.Timestamp(t).tzinfo else
                               pd.Timestamp(t).tz_localize("UTC") for t in u.activity.catalyst_changes]
    return out
