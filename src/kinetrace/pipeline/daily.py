"""The daily check: for each unit, read, combine, back-calculate, summarise and write.

This is the orchestrator (I/O at the edges); every computation it calls is a pure
function of one unit's data, so the per-unit step :func:`check_unit` can be mapped
over units or time windows by any scheduler.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from ..config import PlantConfig, UnitModel, load_config, resolve_path, unit_model
from ..errors import DataQualityError, KinetraceError
from ..redact import redact_url
from .analyzer_step import track_analyzers
from .backcalc import back_calculate
from .feed import analysed_flags, monitoring_feed
from .calibration_step import calibrate_unit, parameter_uncertainty, rederive
from .fault_history import known_faults as stored_faults
from .kinetics_step import fit_history, k_ref_band
from .network_step import flowsheet_columns
from .reconciliation import reconcile_unit
from .roles import role_frame
from .usable import VERDICTS, UnitNotCheckable, unit_verdict, verdict_series, verdict_summary

log = logging.getLogger("kinetrace")


@dataclass
class UnitResult:
    """Everything the daily check found for one unit."""

    model: UnitModel
    series: pd.DataFrame           # back-calculated time series (SI), see backcalc.COLUMNS
    roles: pd.DataFrame            # combined measurements (SI)
    quality: pd.DataFrame          # per-tag data-quality summary
    summary: dict = field(default_factory=dict)
    faults: list = field(default_factory=list)     # SensorFault records from reconciliation
    assessment: object = None                       # kinetrace.monitor.UnitAssessment, or None
    kinetic_parameters: pd.DataFrame = field(default_factory=pd.DataFrame)   # fitted rate law, store rows
    data: object = None                             # kinetrace.ingest.UnitData (readings and their fates)
    sigma_source: str = ""                          # where the reconciliation's uncertainties came from
    rate_law_comparison: object = None              # kinetrace.kinetics.estimation.ModelComparison
    calibration: object = None                      # kinetrace.pipeline.calibration_step.CalibrationOutcome


def check_unit(cfg: PlantConfig, model: UnitModel, *, config_path, since=None, until=None,
               history: pd.DataFrame | None = None, fresh_k_ref: dict | None = None,
               keep_from=None, known_faults=()) -> UnitResult:
    """Run the check of one unit: ingest, reconciliation, back-calculation, kinetics, monitoring.

    Parameters
    ----------
    cfg, model
        The plant configuration and the unit.
    config_path : path
        The configuration file (relative paths).
    since, until : optional
        Period of readings to process. [UTC]
    history : DataFrame, optional
        Earlier results of the unit (from the store) that the trend, the drift charts, the
        production accounting and the rate-law fit see together with the new rows.
    fresh_k_ref : dict, optional
        Fresh-catalyst k_ref of each reaction, when the fresh period is not in the readings. [SI]
    keep_from : Timestamp, optional
        Rows before it (read only as context for the steady-state test and the derivatives)
        are dropped from the new results. [UTC]
    known_faults : sequence of KnownFault
        Open sensor alarms of the store detected before the window
        (:func:`kinetrace.pipeline.fault_history.known_faults`).
    """
    from ..ingest import read_unit

    data = read_unit(cfg, model, config_path=config_path, since=since, until=until)
    analyzers = track_analyzers(data.values, data.valid, model, history)   # analyzers against the lab
    roles = role_frame(analyzers.values, data.valid, data.volume, model)
    verdict = unit_verdict(roles, model)
    if verdict is not None:
        raise UnitNotCheckable(verdict, data, roles)
    measured = back_calculate(roles, model, fresh_k_ref=fresh_k_ref)
    result = finish_unit(cfg, model, roles, measured, data.quality, history=history,
                         fresh_k_ref=fresh_k_ref, keep_from=keep_from, data=data, known_faults=known_faults,
                         analyzers=analyzers)
    if result.calibration is not None:
        result.data = data
    return result


def finish_unit(cfg: PlantConfig, model: UnitModel, roles: pd.DataFrame, measured: pd.DataFrame,
                quality: pd.DataFrame, *, history: pd.DataFrame | None = None,
                fresh_k_ref: dict | None = None, keep_from=None, data=None, known_faults=(),
                analyzers=None) -> UnitResult:
    """The check of one unit after ingest: reconciliation, calibration, re-derivation, monitoring.

    :func:`check_unit` calls it on the rows it read; a backfill calls it once per unit on the
    role frames of its time chunks put end to end (:mod:`kinetrace.fleet`).

    Parameters
    ----------
    cfg, model
        The plant configuration and the unit.
    roles : DataFrame
        Role frame of the unit on the grid (:func:`kinetrace.pipeline.roles.role_frame`). [SI]
    measured : DataFrame
        Back-calculation of ``roles`` (:func:`kinetrace.pipeline.backcalc.back_calculate`); its
        ``steady`` column is the steady-state mask used throughout. [SI]
    quality : DataFrame
        Per-tag data-quality summary of the readings. [counts]
    history, fresh_k_ref, keep_from, known_faults
        As for :func:`check_unit`.
    data : UnitData, optional
        The readings as read (for a ``[units.flowsheet]``: its stream meters are not in ``roles``);
        a backfill passes none, and a flowsheet's columns are then left out.
    analyzers : AnalyzerOutcome, optional
        The analyzers against the lab (:mod:`kinetrace.pipeline.analyzer_step`): its columns join
        the series and its faults come before the balances' ones.
    """
    rec = reconcile_unit(roles, model, steady=measured["steady"], known_faults=known_faults)
    if analyzers is not None:
        rec.faults = list(analyzers.faults) + rec.faults
    series = back_calculate(rec.roles, model, steady=measured["steady"], fresh_k_ref=fresh_k_ref)
    series = series.join(rec.frame)
    old = None
    if history is not None and len(history):
        old = history.loc[history.index < series.index[0]].copy()
        if "rate_basis_extents" in old:
            old["rate_basis"] = np.where(old.pop("rate_basis_extents") > 0.5, "extents", "key_reactant")
        old["steady"] = old["steady"].fillna(0.0).astype(bool)
    # self-calibration over the whole history: the rates and concentrations it uses do not depend on
    # any rate-law parameter, so stored rows are as good as new ones
    hist_new = series if old is None else pd.concat([old, series])
    outcome = calibrate_unit(hist_new, model)
    for p in outcome.problems:
        log.info("unit %s: calibration: %s", model.id, p)
    used = model
    if outcome.model is not None:
        used = outcome.model
        fresh_k_ref = {rid: law.k_ref for rid, law in used.rate_laws.items()}
        measured = back_calculate(roles, used, steady=measured["steady"], fresh_k_ref=fresh_k_ref)
        series = back_calculate(rec.roles, used, steady=measured["steady"], fresh_k_ref=fresh_k_ref).join(rec.frame)
        series.attrs["fresh_basis"] = {rid: "fitted k_ref of this run's calibration" for rid in fresh_k_ref}
        if old is not None:
            old = rederive(old, used, fresh_k_ref)
    attrs = dict(series.attrs)
    attrs["parameter_set"] = outcome.statement
    series = series.join(measured[[c for c in MEASURED_COLUMNS if c in measured]
                                  + [c for c in measured if c.startswith("k_ref:")]].add_suffix("_measured"))
    series["fitted_parameters"] = 1.0 if outcome.model is not None else 0.0
    series = series.join(analysed_flags(roles, model))
    if analyzers is not None and len(analyzers.columns.columns):
        series = series.join(analyzers.columns)
    series = series.join(k_ref_band(series, used, rec.roles, extra_sd=parameter_uncertainty(series, used, outcome.calibration)))
    if data is not None:   # [units.flowsheet]: the network's reconciliation of the raw readings; none: no columns
        series = series.join(flowsheet_columns(data.values, data.valid, used))
    if keep_from is not None:
        series = series.loc[series.index >= keep_from]
        if series.empty:
            return UnitResult(used, series, roles, quality, {}, faults=[])
    series.attrs.update(attrs)
    result = UnitResult(used, series, roles, quality, {}, faults=rec.faults)
    result.sigma_source = rec.sigma_source
    result.calibration = outcome
    full = series
    if old is not None and len(old):
        full = pd.concat([old, series])
        full.attrs.update(attrs)
    decay = outcome.calibration.decay_method if outcome.calibration is not None else "auto"
    result.assessment = _assess(cfg, used, full, decay_method=decay)
    trend = None
    if result.assessment is not None and result.assessment.trend is not None:
        fitted = result.assessment.trend.predict(full.index)
        fitted.loc[fitted.index < result.assessment.trend.run_start] = np.nan
        full = full.copy()
        full["activity_fit"] = fitted["activity"].to_numpy()
        full["activity_band_low"] = fitted["lower"].to_numpy()
        full["activity_band_high"] = fitted["upper"].to_numpy()
        for c in ("activity_fit", "activity_band_low", "activity_band_high"):
            series[c] = full[c].reindex(series.index).to_numpy()
        trend = full["activity_fit"]
    rows, result.rate_law_comparison, problems = fit_history(full, used, trend)
    if outcome.model is not None:
        # the calibration's rows are the parameters; the history fit adds the rate-law comparison only
        keep = rows["name"].str.startswith(("rate_law_best", "ratelaw_aicc")) if len(rows) else []
        rows = pd.concat([outcome.rows, rows[keep]], ignore_index=True) if len(rows) else outcome.rows
    else:
        rows = pd.concat([rows, pd.DataFrame([{"name": "parameter_set", "value": 0.0, "unit_of_measure": "-",
                                               "method": outcome.statement}])], ignore_index=True)
    result.kinetic_parameters = rows
    for p in problems:
        # with a calibration, the history fit only compares rate-law forms: its own holds do not apply
        (log.debug if outcome.model is not None else log.info)("unit %s: rate-law fit: %s", model.id, p)
    result.series = series
    result.summary = summarise(series, model, faults=rec.faults)
    if result.assessment is not None:
        result.summary.update(_assessment_summary(result.assessment))
        result.kinetic_parameters = pd.concat([result.kinetic_parameters, pd.DataFrame([{
            "name": "feed_basis", "value": float(result.assessment.feed_basis.count("analysed")),
            "unit_of_measure": "-", "method": result.assessment.feed_basis}])], ignore_index=True)
    # one alarm count: open drift alarms and open sensor faults (the store's open alarms, as the
    # check's attention list counts them)
    last = series.index[-1] if len(series) else None
    open_faults = sum(1 for f in rec.faults if last is not None and f.end >= last - pd.Timedelta("2h"))
    result.summary["open_alarms"] = int(result.summary.get("open_alarms", 0)) + open_faults
    result.summary["parameters"] = outcome.statement
    return result


#: In-control average run length of the drift charts. [observations, here hours]
DRIFT_ARL0 = 2000.0


def _assess(cfg: PlantConfig, model: UnitModel, series: pd.DataFrame, *, decay_method: str = "auto"):
    """The monitoring stage (catalyst trend, drift alarms, production, forecast, what-if) of one unit."""
    from ..monitor import assess_unit
    from ..monitor.whatif import safe_hold_up

    feed, key_feed, feed_text = monitoring_feed(series, model)
    unit_cfg = next(u for u in cfg.units if u.id == model.id)
    vol_limits = safe_hold_up(model, unit_cfg.limits.level)
    try:
        # drift charts run on hourly values: an in-control ARL of 2000 observations is about one
        # false alarm per chart and direction per quarter (370, the textbook value, would be one
        # every fortnight, too many for a morning check)
        # activity is only read where the design equation holds (steady rows); elsewhere it is left
        # out of the trend and the charts, while production still counts every hour
        monitored = series.copy()
        monitored.loc[~monitored["steady"].astype(bool), "activity"] = np.nan
        res = assess_unit(monitored, model, events=model.catalyst_changes, tz=cfg.site.timezone,
                          volume_limits=vol_limits, arl0=DRIFT_ARL0, plan_feed_flow=model.plan_feed_flow,
                          decay_method=decay_method, feed_conc=feed, key_feed_conc=key_feed)
        res.feed_basis = feed_text
        return res
    except KinetraceError as exc:
        log.warning("unit %s: monitoring stage skipped: %s", model.id, exc)
        return None


def _assessment_summary(a) -> dict:
    out = {"forecast": a.forecast.text if a.forecast is not None else "", "feed_basis": a.feed_basis,
           "open_alarms": sum(1 for x in a.alarms if a.as_of - x.detected < a.open_for)}
    if a.trend is not None:
        out["decay_law"] = a.trend.fit.method
    return out


#: Back-calculated columns also kept from the raw (unreconciled) measurements, as ``<name>_measured``.
MEASURED_COLUMNS = ("conversion", "key_rate", "activity", "production", "production_mass")


def summarise(series: pd.DataFrame, model: UnitModel, *, window: str = "24h", faults=()) -> dict:
    """Summary of the last ``window`` of a unit's series (production vs target, conversion, k_ref, activity).

    Production is the mean over the window of every hour with data (hours down count as
    zero production when the feed is off); conversion, k_ref and activity are means over
    the window's steady rows, or over all its rows with data where none is steady.
    """
    if series.empty:
        raise DataQualityError(f"unit {model.id}: no data in the requested period")
    end = series.index[-1]
    last = series.loc[series.index > end - pd.Timedelta(window)]
    main = model.reaction_ids[0]
    steady = last.loc[last["steady"]]
    basis = steady if len(steady) >= 3 else last.dropna(subset=["conversion"])
    prod = last["production_mass"]
    out = {
        "unit": model.id,
        "period_start": last.index[0],
        "period_end": end,
        "production_kg_h": float(prod.mean() * 3600) if prod.notna().any() else float("nan"),
        "target_kg_h": float(model.target_rate * model.molar_masses[model.product_index] * 3600),
        "hours_with_data": int(prod.notna().sum()),
        "conversion": float(basis["conversion"].mean()) if len(basis) else float("nan"),
        "k_ref": float(basis[f"k_ref:{main}"].mean()) if len(basis) and f"k_ref:{main}" in basis else float("nan"),
        "activity": float(basis["activity"].mean()) if len(basis) and "activity" in basis else float("nan"),
        "steady_hours": int(len(steady)),
        "fresh_basis": series.attrs.get("fresh_basis", {}).get(main, ""),
        "closure_volume_pct": float(100 * last["closure:volume"].abs().median()) if "closure:volume" in last else float("nan"),
        "global_test_alarm_hours": int(last["global_test_alarm"].sum()) if "global_test_alarm" in last else 0,
        "sensor_faults": "; ".join(f.evidence() for f in faults if f.end >= last.index[0]),
    }
    out["production_ratio"] = out["production_kg_h"] / out["target_kg_h"]
    out["status"] = ("no data" if not np.isfinite(out["production_ratio"])
                     else "on target" if out["production_ratio"] >= 1.0 else "below target")
    return out


def output_frame(result: UnitResult) -> pd.DataFrame:
    """The time series written to ``<unit>.csv``: column names carry their units (SI)."""
    from .backcalc import COLUMNS

    s = result.series
    cols = {}
    for c in s.columns:
        base = c.split(":")[0]
        unit = COLUMNS.get(base, "")
        cols[c] = f"{c} [{unit}]" if unit and unit not in ("bool", "text") else c
    out = s.rename(columns=cols)
    out.index = out.index.strftime("%Y-%m-%dT%H:%M:%SZ")
    out.index.name = "timestamp"
    return out


def _series_for_store(series: pd.DataFrame) -> tuple[pd.DataFrame, dict[str, str]]:
    """Numeric columns of a back-calculated series and their units, as the store keeps them."""
    from .backcalc import COLUMNS

    frame = series.copy()
    if "rate_basis" in frame:
        frame["rate_basis_extents"] = (frame.pop("rate_basis") == "extents").astype(float)
    frame["steady"] = frame["steady"].astype(float)
    units = {}
    for c in frame.columns:
        base = c.split(":")[0]
        units[c] = {"bool": "-", "text": "-"}.get(COLUMNS.get(base, "-"), COLUMNS.get(base, "-"))
    units["rate_basis_extents"] = "-"
    return frame, units


def write_results(store, results: list[UnitResult], *, window, fingerprint: str) -> int:
    """Write one run's results of every unit to the store, as one transaction.

    Returns the run id.
    """
    with store.write_run(window, config_fingerprint=fingerprint) as run:
        for res in results:
            if res.summary.get("status") in VERDICTS:   # not checked: the counts of its readings only
                run.write_quality(res.model.id, res.quality.select_dtypes("number"))
                run.set_watermark(res.model.id, res.series.index[-1])
                continue
            write_unit_rows(run, res)
            write_unit_findings(run, res, window)
        return run.run_id


def write_unit_rows(run, res: UnitResult, *, period=None, staged=None) -> None:
    """Write a unit's time series and data-quality counts into an open run (``period``: of the counts).

    Parameters
    ----------
    run : kinetrace.store.RunWriter
    res : UnitResult
        Its ``series`` rows must lie in the run's window. [SI]
    period : (Timestamp, Timestamp), optional
        Period the quality counts cover; default the run window. [UTC]
    staged : kinetrace.store.StagedSeries, optional
        ``res.series`` already staged (:func:`kinetrace.store.stage_series` of
        :func:`_series_for_store`), e.g. by a backfill worker.
    """
    uid = res.model.id
    if staged is not None:
        run.write_series(uid, staged)
    else:
        frame, units = _series_for_store(res.series)
        run.write_series(uid, frame, units=units)
    q = res.quality.select_dtypes("number")
    if period is None:
        run.write_quality(uid, q)
    else:
        run.write_quality(uid, q, period_start=period[0], period_end=period[1])


def write_unit_findings(run, res: UnitResult, window) -> None:
    """Write a unit's parameters, alarms, daily production, forecast and what-if, and its watermark.

    Parameters
    ----------
    run : kinetrace.store.RunWriter
    res : UnitResult
    window : (Timestamp, Timestamp)
        The run window; daily rows are kept for the local days inside it. [UTC]
    """
    uid = res.model.id
    fresh = res.series.attrs.get("fresh_k_ref", {})
    basis = res.series.attrs.get("fresh_basis", {})
    if fresh:
        run.write_parameters(uid, pd.DataFrame([
            {"name": f"k_ref_fresh:{rid}", "value": v, "unit_of_measure": _k_unit(res.model, rid),
             "method": basis.get(rid, "")} for rid, v in fresh.items()]))
    if res.faults:
        run.write_alarms(uid, pd.DataFrame([{
            "kind": _fault_kind(f), "variable": ", ".join(f.tags) or f.role, "onset": f.onset,
            "detected": f.alarm, "magnitude": 100 * f.relative, "magnitude_unit": "%",
            "rate": 100 * f.rate if f.kind == "drift" else None, "last_check": f.last_check,
            "evidence": f.evidence(), "state": "open" if f.end >= res.series.index[-1] - pd.Timedelta("2h") else "closed",
            "closed": None if f.end >= res.series.index[-1] - pd.Timedelta("2h") else f.end}
            for f in res.faults]))
    a = res.assessment
    if a is not None:
        daily = a.daily_rows()
        # production days are local (site time zone); the store keys them by date inside
        # the run window, so a local day that begins before the window ends but is
        # labelled with a later date (the last hours of the data) waits for the next run
        last_day = (window[1] - pd.Timedelta(microseconds=1)).date()
        first_day = window[0].date()
        daily = daily[[first_day <= d <= last_day for d in daily.index]]
        if len(daily):
            run.write_daily(uid, daily)
        params = pd.concat([a.parameter_rows(), res.kinetic_parameters], ignore_index=True) \
            if len(res.kinetic_parameters) else a.parameter_rows()
        if len(params):
            run.write_parameters(uid, params)
        alarms = a.alarm_rows()
        if len(alarms):
            run.write_alarms(uid, alarms)
        fc = a.forecast_row()
        if fc is not None:
            run.write_forecast(uid, **fc)
        wi = a.whatif_rows()
        if len(wi):
            run.write_whatif(uid, wi)
    run.set_watermark(uid, res.series.index[-1])


def _fault_kind(f) -> str:
    """Alarm kind of a SensorFault: ``balance_mismatch``, ``sensor_drift`` or ``sensor_bias``."""
    return "balance_mismatch" if f.ambiguous else "sensor_drift" if f.kind == "drift" else "sensor_bias"


#: Readings before the watermark re-read as context on an incremental run (steady-state test,
#: derivatives, reconciliation uncertainties). [pandas time span]
INCREMENTAL_CONTEXT = "3D"
#: Earlier results taken from the store for the trend, the charts and the rate-law fit. [time span]
INCREMENTAL_HISTORY = "365D"


def _k_unit(model: UnitModel, rid: str) -> str:
    law = model.rate_laws.get(rid)
    return law.k_unit if law is not None else "SI"


def run_check(config_path: str | Path, *, since=None, until=None, out_dir: str | Path | None = None,
              store: str | None = "config", progress=None, incremental: bool = False,
              not_checked: list | None = None) -> tuple[list[UnitResult], Path]:
    """Run the daily check on every unit of a config, write one CSV per unit and fill the results store.

    Parameters
    ----------
    config_path : path
        Plant configuration TOML.
    since, until : str or Timestamp, optional
        Period to read (UTC unless an offset is given); default everything.
    out_dir : path, optional
        Where the CSV files go; default ``analysis.output_dir`` of the config.
    store : str or None
        ``"config"`` (default): the store named by the config (see
        :func:`kinetrace.config.store_url`); another string: a SQLAlchemy URL; None: no store.
    progress : callable, optional
        Called with (unit id, index, count) before each unit.
    incremental : bool
        Process only what is new since each unit's watermark in the store (``since`` is then
        ignored): readings from ``INCREMENTAL_CONTEXT`` before the watermark are re-read as
        context, earlier results come from the store (``INCREMENTAL_HISTORY``), and only the
        intervals after the watermark are written. A unit without a watermark is run in full.
    not_checked : list, optional
        When given, a unit whose data cannot be read (an ingest error) is appended to it as
        ``(unit id, reason)`` and the other units are still checked; else the error is raised.

    Returns
    -------
    (list of UnitResult, Path of the output folder)
    """
    from .. import store as result_store
    from ..config import store_url
    from ..errors import IngestError

    cfg = load_config(config_path)
    out = (Path(out_dir) if out_dir else resolve_path(config_path, cfg.analysis.output_dir)).resolve()
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise KinetraceError(f"output folder {out} cannot be created ({exc.strerror or exc}); "
                             "analysis.output_dir or --out must name a folder") from None
    url = None if store is None else (store_url(cfg, config_path) if store == "config" else store)
    if incremental and url is None:
        raise KinetraceError("an incremental check needs the results store (it keeps the watermarks)")
    db = result_store.open_store(url) if url is not None else None
    grid = pd.Timedelta(seconds=cfg.analysis.grid)
    results = []
    for i, unit in enumerate(cfg.units):
        if progress:
            progress(unit.id, i, len(cfg.units))
        model = unit_model(unit)
        kwargs = {}
        mark = db.watermark(model.id) if (incremental and db is not None) else None
        if mark is not None:
            keep_from = mark + grid
            hist = db.series(model.id, start=keep_from - pd.Timedelta(INCREMENTAL_HISTORY), end=keep_from)
            params = db.parameters(units=[model.id])
            fresh = {n.split(":", 1)[1]: float(v) for n, v in zip(params.get("name", []), params.get("value", []))
                     if str(n).startswith("k_ref_fresh:")}
            kwargs = dict(since=keep_from - pd.Timedelta(INCREMENTAL_CONTEXT), history=hist,
                          fresh_k_ref=fresh or None, keep_from=keep_from)
        else:
            kwargs = dict(since=since)
        before = kwargs.get("keep_from", kwargs.get("since"))
        if db is not None and before is not None:
            # sensor faults are judged with the store's open alarms beside the window's data
            kwargs["known_faults"] = stored_faults(db.alarms(units=[model.id], state="open"), before)
        try:
            res = _check_or_verdict(cfg, model, config_path=config_path, until=until, **kwargs)
        except IngestError as exc:
            if mark is None and not_checked is not None:
                log.warning("unit %s not checked: %s", model.id, exc)
                not_checked.append((model.id, str(exc)))
                continue
            if mark is None:
                raise
            log.info("unit %s: nothing new after its watermark %s", model.id, mark)
            continue
        if mark is not None and res.series.empty:
            log.info("unit %s: nothing new after its watermark %s", model.id, mark)
            continue
        output_frame(res).to_csv(out / f"{_safe(model.id)}.csv", float_format="%.9g")
        res.quality.to_csv(out / f"{_safe(model.id)}_quality.csv")
        log.info("unit %s: %d rows written to %s", model.id, len(res.series), out)
        results.append(res)
    if results:
        pd.DataFrame([r.summary for r in results]).to_csv(out / "summary.csv", index=False, float_format="%.6g")
    if db is not None:
        try:
            if results:
                window = (min(r.series.index[0] for r in results), max(r.series.index[-1] for r in results) + grid)
                run_id = write_results(db, results, window=window,
                                       fingerprint=result_store.fingerprint(Path(config_path).read_bytes()))
                log.info("results of run %s written to the store %s", run_id, redact_url(url))
            else:
                log.info("no new data for any unit; the store is unchanged")
        finally:
            db.close()
    return results, out


def _check_or_verdict(cfg: PlantConfig, model: UnitModel, **kwargs) -> UnitResult:
    """:func:`check_unit`, or the result of a unit that is down or has no usable data (no rates, no fit).

    See :mod:`kinetrace.pipeline.usable`; the other units are still checked.
    """
    try:
        return check_unit(cfg, model, **kwargs)
    except UnitNotCheckable as exc:
        verdict, data, roles = exc.verdict, exc.data, exc.roles
    log.warning("unit %s: %s", model.id, verdict)
    index = roles.index
    if kwargs.get("keep_from") is not None:
        index = index[index >= kwargs["keep_from"]]
    result = UnitResult(model, verdict_series(verdict, index), roles, data.quality,
                        verdict_summary(model, verdict, index))
    result.data = data
    return result


def _safe(name: str) -> str:
    return "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in name)
