"""Command line: ``kinetrace demo``, ``kinetrace check`` and ``kinetrace backfill``.

On a terminal, long runs show a progress bar; when not attached to one (cron, CI)
they write plain log lines instead.
"""

from __future__ import annotations

import logging
import math
import os
import sys
from pathlib import Path

# The check's dense linear algebra is small (a few hundred unknowns at most, e.g. the drift charts'
# Markov chains): threaded OpenBLAS only adds contention on a busy machine (a 301 x 301 solve took
# 84 ms on all threads against 7 ms on one on the 2-core development machine). Set before numpy loads.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import typer

from .cli_args import iso_day, iso_window, out_folder
from .errors import KinetraceError
from .redact import scrub

app = typer.Typer(add_completion=False, no_args_is_help=True, rich_markup_mode="markdown",
                  help="Daily performance check of continuous stirred-tank reactors.")

ROOT = Path(__file__).resolve().parents[2]
DEMO_CONFIG = ROOT / "config" / "demo_plant.toml"


def _secret_urls() -> list[str]:
    """URLs whose passwords no message may repeat: every URL in the environment (store, historian ...)."""
    import os

    return [v for v in os.environ.values() if "://" in v]


class _Redacting(logging.Filter):
    """Every log line through :func:`kinetrace.redact.scrub` (URLs and the environment's passwords hidden)."""

    def filter(self, record: logging.LogRecord) -> bool:
        try:
            record.msg, record.args = scrub(record.getMessage(), *_secret_urls()), ()
        except Exception:  # noqa: BLE001 - a line that cannot be formatted is shown redacted as written
            record.msg, record.args = scrub(str(record.msg)), ()
        return True


def _setup_logging() -> None:
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(levelname)s %(name)s: %(message)s",
                        stream=sys.stderr)
    for handler in logging.getLogger().handlers:
        if not any(isinstance(f, _Redacting) for f in handler.filters):
            handler.addFilter(_Redacting())


def _say_error(exc: Exception) -> None:
    """One line (or one block of problems) on stderr, with every password hidden."""
    typer.echo(f"kinetrace: {scrub(exc, *_secret_urls())}", err=True)


def _fmt(x: float, spec: str) -> str:
    return "n/a" if x is None or not math.isfinite(x) else format(x, spec)


def _k_display(r, value: float) -> str:
    """The main reaction's k_ref in engineering units (1/h, L/(mol h), ...)."""
    from .report.names import engineering

    m = r.model
    law = m.rate_laws.get(m.reaction_ids[0]) if m.reaction_ids else None
    if law is None or value is None or not math.isfinite(value):
        return "n/a"
    v, unit = engineering("k_ref", value, law.k_unit)
    return f"{v:.4g} {unit}"


def _production_unit(config: Path) -> str:
    from .config import load_config

    return load_config(config).site.production_unit


def _print_summary(results, out_dir: Path, verdicts=(), production_unit: str = "t/d") -> None:
    from rich.console import Console
    from rich.table import Table

    console = Console()
    if verdicts:
        # the verdict of every unit first: state, how long, the main cause, what to look at next
        console.print("Verdict (latest complete day):", highlight=False, markup=False)
        for v in verdicts:
            console.print(f"  - {v}", highlight=False, markup=False)
        console.print("")
    table = Table(title="kinetrace daily check (last 24 h of data)")
    from .units import convert

    pu = production_unit
    for col in ("unit", pu, "target", "%", "X", "k_ref", "activity", "last 24 h"):
        table.add_column(col, justify="right" if col not in ("unit", "last 24 h") else "left",
                         no_wrap=col in ("unit", pu, "target", "%", "X", "activity"), overflow="fold")
    table.caption = (f"{pu}: production; target in {pu}; %: of target; X: conversion; k_ref: rate constant at the "
                     "reference temperature; steady hours and the rest in the detail below")

    def rate(kg_h):
        return _fmt(float(convert(kg_h, "kg/h", pu)) if kg_h is not None and math.isfinite(kg_h) else kg_h, ".4g")

    for r in results:
        s = r.summary
        table.add_row(s["unit"], rate(s["production_kg_h"]), rate(s["target_kg_h"]),
                      _fmt(100 * s["production_ratio"], ".1f"), _fmt(s["conversion"], ".3f"),
                      _k_display(r, s["k_ref"]), _fmt(s["activity"], ".3f"), s["status"])
    console.print(table)
    for r in results:
        console.print(_details(r), highlight=False, markup=False)
    console.print(f"Time series (one CSV per unit) and summary.csv written to: {out_dir}")


def _details(r) -> str:
    """Per-unit detail of the check: balances, sensors, kinetics, outlook, data quality."""
    import numpy as np
    import pandas as pd

    from .kinetics.steady import steady_windows

    if r.summary.get("verdict"):
        return _verdict_details(r)
    s, m = r.series, r.model
    main = m.reaction_ids[0]
    last = s.loc[s.index > s.index[-1] - pd.Timedelta("24h")]
    lines = [f"", f"== {m.id} ({s.index[0]:%Y-%m-%d %H:%M} to {s.index[-1]:%Y-%m-%d %H:%M} UTC)"]
    clos = [c for c in s.columns if c.startswith("closure:")]
    if clos:
        med = ", ".join(f"{c.split(':', 1)[1]} {100 * last[c].abs().median():.2f} %" for c in clos
                        if last[c].notna().any())
        lines.append(f"  closure of the raw balances, last 24 h median |imbalance|: {med}")
        lines.append(f"  global test: {int(last['global_test_alarm'].sum())} of {len(last)} intervals over the "
                     f"95 % chi-square point; uncertainties {r.sigma_source}")
        lines.append(f"  conversion reconciled {_fmt(float(last['conversion'].mean()), '.4f')}, "
                     f"from raw measurements {_fmt(float(last['conversion_measured'].mean()), '.4f')}")
    for f in r.faults:
        lines.append(f"  SENSOR: {f.evidence()}")
    w = steady_windows(s["steady"].astype(bool), min_duration=3)
    hours = int(s["steady"].sum())
    lines.append(f"  steady windows: {len(w)} ({hours} h of {len(s)})"
                 + (f"; latest {w['start'].iloc[-1]:%m-%d %H:%M} to {w['end'].iloc[-1]:%m-%d %H:%M}" if len(w) else ""))
    st = last.loc[last["steady"].astype(bool)]
    if len(st) and f"k_ref_low:{main}" in st:
        lines.append(f"  rate constant of {main} at the reference temperature, last 24 h steady mean: "
                     f"{_k_display(r, st[f'k_ref:{main}'].mean())} (95 % band {_k_display(r, st[f'k_ref_low:{main}'].mean())}"
                     f" to {_k_display(r, st[f'k_ref_high:{main}'].mean())}); activity {st['activity'].mean():.3f}")
    kp = r.kinetic_parameters
    if len(kp):
        from .report.names import engineering, parameter_label

        how = ""
        for _, row in kp.iterrows():
            if not np.isfinite(row.get("ci_low", np.nan)):
                continue
            method = str(row.get("method", ""))
            # each parameter says whether the data determined it or why it is held
            if method.startswith("held at the configured value"):
                state = method.split("; configured")[0]
            else:
                state = "estimated from the data"
                how = how or method.split("; configured")[0]
            label = parameter_label(row["name"])
            if label is None:
                continue
            v, unit = engineering(row["name"], row["value"], row["unit_of_measure"])
            lo, _ = engineering(row["name"], row["ci_low"], row["unit_of_measure"])
            hi, _ = engineering(row["name"], row["ci_high"], row["unit_of_measure"])
            unit = "" if unit in ("-", "") else f" {unit}"
            lines.append(f"  {label}: {v:.4g}{unit} (95 % interval {lo:.4g} to {hi:.4g}): {state}")
        verdict = kp.loc[kp["name"].str.startswith("rate_law_best"), "method"]
        if len(verdict):
            lines.append(f"  rate law: {verdict.iloc[0]}")
        if how:
            lines.append(f"  ({how})")
    a = r.assessment
    if a is not None and a.forecast is not None:
        lines.append(f"  outlook: {a.forecast.text}")
    if a is not None and a.whatif:
        from .monitor import CAUTIONS

        lines.append("  what-if within the configured safe limits:")
        for wi in a.whatif:
            lines.append(f"    - {wi.message}")
        lines.append(f"    CAUTION: {CAUTIONS}")
    if r.data is not None:
        from .ingest.summary import quality_text

        lines.append("  data quality:")
        lines += ["  " + ln for ln in quality_text(r.data).splitlines()[1:]]
    return "\n".join(lines)


def _verdict_details(r) -> str:
    """Detail of a unit that was not checked (down or no usable data): the verdict and the counts of its readings."""
    from .ingest.summary import quality_text

    s = r.series
    span = f" ({s.index[0]:%Y-%m-%d %H:%M} to {s.index[-1]:%Y-%m-%d %H:%M} UTC)" if len(s) else ""
    lines = ["", f"== {r.model.id}: {r.summary['status']}{span}", f"  {r.summary['verdict']}",
             "  no rates, no reconciliation and no rate-law fit for this unit"]
    if r.data is not None:
        lines.append("  data quality:")
        lines += ["  " + ln for ln in quality_text(r.data).splitlines()[1:]]
    return "\n".join(lines)


def _verdicts(results) -> list[str]:
    """Attention reasons of the units that were not checked."""
    return [f"unit {r.model.id}: {r.summary['status']}: {r.summary['verdict']}" for r in results
            if r.summary.get("verdict")]


def _run(config: Path, since, until, out, incremental: bool = False, not_checked: list | None = None
         ) -> tuple[list, Path]:
    from .pipeline import run_check

    if sys.stderr.isatty():
        from rich.progress import Progress

        with Progress(transient=True) as bar:
            task = bar.add_task("checking units", total=None)

            def progress(unit_id, i, n):
                bar.update(task, total=n, completed=i, description=f"checking {unit_id}")

            return run_check(config, since=since, until=until, out_dir=out, progress=progress,
                             incremental=incremental, not_checked=not_checked)
    log = logging.getLogger("kinetrace")
    return run_check(config, since=since, until=until, out_dir=out, incremental=incremental, not_checked=not_checked,
                     progress=lambda u, i, n: log.info("checking unit %s (%d of %d)", u, i + 1, n))


#: Exit codes of ``kinetrace check`` (for cron or any scheduler): on target, needs attention,
#: inputs unusable (config, data, store, arguments), internal error.
EXIT_OK, EXIT_ATTENTION, EXIT_ERROR, EXIT_INTERNAL = 0, 1, 2, 3


def _internal_error(doing: str, config: Path | None, out: Path | None) -> typer.Exit:
    """Write the traceback of the exception being handled to a file and say where, in one line; exit 3.

    The file goes to ``out``, else the config's output folder, else the system's temporary folder.
    """
    import tempfile
    import traceback
    from datetime import datetime, timezone

    folder = Path(out) if out else None
    if folder is None and config is not None:
        try:
            from .config import load_config, resolve_path

            folder = resolve_path(config, load_config(config).analysis.output_dir)
        except Exception:  # noqa: BLE001 - the config may be what failed; fall back to the temp folder
            folder = None
    stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    for base in ([folder] if folder else []) + [Path(tempfile.gettempdir())]:
        try:
            base.mkdir(parents=True, exist_ok=True)
            path = base / f"kinetrace-internal-error-{stamp}.txt"
            path.write_text(scrub(traceback.format_exc(), *_secret_urls()))
            break
        except OSError:
            path = None
    where = f"; the full report is in {path}" if path else ""
    typer.echo(f"kinetrace: internal error while {doing}{where}", err=True)
    return typer.Exit(EXIT_INTERNAL)


def _open_store(config: Path):
    from .config import load_config, store_url
    from .store import open_store

    cfg = load_config(config)
    return cfg, open_store(store_url(cfg, config))


def _write_report(config: Path, day=None, out: Path | None = None):
    from .config import resolve_path
    from .report import build_report

    cfg, store = _open_store(config)
    try:
        folder = Path(out) if out else resolve_path(config, cfg.analysis.output_dir) / "reports"
        from .config import unit_model

        shown = {u.id: unit_model(u).display_units for u in cfg.units}
        return build_report(store, folder.resolve(), day, tz=cfg.site.timezone, site=cfg.site.name,
                            display_units=shown, production_unit=cfg.site.production_unit)
    finally:
        store.close()


def _unit_count(config: Path) -> int:
    from .config import load_config

    return len(load_config(config).units)


def _attention(config: Path) -> tuple[list[str], list[str]]:
    """Reasons to alert and the verdict sentences, from the store (latest complete day)."""
    from .report import ReportError, attention_reasons, collect

    cfg, store = _open_store(config)
    try:
        content = collect(store, tz=cfg.site.timezone, production_unit=cfg.site.production_unit)
    except ReportError as exc:
        return [str(exc)], []
    finally:
        store.close()
    return attention_reasons(content), [u.verdict.sentence for u in content.units if u.verdict is not None]


@app.command()
def check(config: Path = typer.Option(..., "--config", "-c", help="Plant configuration TOML file."),
          since: str = typer.Option(None, help="Start of the period (ISO 8601; UTC unless an offset is given)."),
          until: str = typer.Option(None, help="End of the period (exclusive)."),
          out: Path = typer.Option(None, help="Output folder (default: analysis.output_dir of the config)."),
          incremental: bool = typer.Option(False, "--incremental", metavar="",
                                           help="Only what is new since each unit's watermark in the store.")):
    """Back-calculate, reconcile and assess every unit; exit 1 when a unit needs attention.

    Exit status: 0 every unit on target and no open alarm; 1 a unit below target, down, without
    usable data, or with an open alarm (the reasons are printed); 2 the check could not run because of
    its inputs (config, data, store, arguments); 3 an internal error (one line says where its
    report was written).
    Safe to run from cron every hour: each run replaces the results of its window.
    """
    _setup_logging()
    not_checked: list = []      # (unit id, reason): units whose data could not be read
    try:
        since, until = iso_window(since, until)
        out = out_folder(out)
        results, out_dir = _run(config, since, until, out, incremental, not_checked)
        if not_checked and not results and len(not_checked) == _unit_count(config):
            raise KinetraceError("no unit could be checked:\n" + "\n".join(r for _, r in not_checked))
        reasons, verdicts = _verdicts(results), []
        if len(reasons) < len(results) or not results:   # the store's alarms and days of the units checked
            more, verdicts = _attention(config)
            reasons += more
    except KinetraceError as exc:
        _say_error(exc)
        raise typer.Exit(EXIT_ERROR) from None
    except Exception:  # noqa: BLE001 - no traceback reaches the user
        raise _internal_error("running the check", config, out) from None
    if results:
        _print_summary(results, out_dir, verdicts, _production_unit(config))
    elif not not_checked:
        typer.echo("No new data since the last run; results unchanged.")
    reasons = [f"unit {uid} not checked: its data could not be read: {why}" for uid, why in not_checked] + reasons
    if reasons:
        typer.echo("Needs attention:")
        for r in reasons:
            typer.echo(f"  - {r}")
        raise typer.Exit(EXIT_ATTENTION)


@app.command()
def backfill(config: Path = typer.Option(..., "--config", "-c", help="Plant configuration TOML file."),
             since: str = typer.Option(None, help="Start of the period to re-derive (ISO 8601, on the grid)."),
             until: str = typer.Option(None, help="End of the period (exclusive)."),
             chunk: str = typer.Option("30D", help="Length of a time chunk (pandas span, e.g. 30D)."),
             workers: int = typer.Option(2, help="Local worker processes (ignored with --scheduler)."),
             scheduler: str = typer.Option(None, help="Scheduler address of an existing Dask cluster."),
             parquet: Path = typer.Option(None, help="Also write Parquet, partitioned by unit and month."),
             unit: list[str] = typer.Option(None, "--unit", help="Only this unit (repeatable)."),
             memory_limit: str = typer.Option("2GiB", help="Memory limit per local worker."),
             redo: bool = typer.Option(False, "--redo", help="Re-derive everything, even work found done "
                                       "for the same fingerprint (e.g. after historian corrections).")):
    """Re-derive a long period for every unit on Dask (units x time chunks); exit 1 if a unit failed."""
    from .fleet.command import backfill_command

    _setup_logging()
    try:
        since, until = iso_window(since, until)
        code = backfill_command(config, since=since, until=until, chunk=chunk, workers=workers, scheduler=scheduler,
                                parquet=parquet, units=unit, memory_limit=memory_limit, redo=redo,
                                echo=typer.echo)
    except KinetraceError as exc:
        typer.echo(f"kinetrace: {exc}", err=True)
        raise typer.Exit(EXIT_ERROR) from None
    except Exception:  # noqa: BLE001 - no traceback reaches the user
        raise _internal_error("running the backfill", config, None) from None
    raise typer.Exit(code)


@app.command()
def report(config: Path = typer.Option(..., "--config", "-c", help="Plant configuration TOML file."),
           date: str = typer.Option(None, "--date", help="Production day (YYYY-MM-DD); default the latest."),
           out: Path = typer.Option(None, help="Folder for the report (default: <output_dir>/reports).")):
    """Write the daily report for operations (HTML page and XLSX workbook) from the results store."""
    _setup_logging()
    try:
        files = _write_report(config, iso_day(date), out_folder(out))
    except KinetraceError as exc:
        _say_error(exc)
        raise typer.Exit(EXIT_ERROR) from None
    except Exception:  # noqa: BLE001 - no traceback reaches the user
        raise _internal_error("writing the report", config, out) from None
    typer.echo(f"Daily report: {files.html}")
    typer.echo(f"Workbook:     {files.xlsx}")


@app.command()
def demo(config: Path = typer.Option(DEMO_CONFIG, "--config", "-c", help="Demo plant configuration."),
         seed: int = typer.Option(20260901, help="Seed of the simulated sample historian."),
         days: int = typer.Option(90, help="Days of history to simulate."),
         regenerate: bool = typer.Option(False, "--regenerate", metavar="",
                                         help="Simulate again even if the sample historian exists.")):
    """Simulate the demo plant's historian (if needed) and run the daily check on it."""
    _setup_logging()
    from .config import load_config, resolve_path
    from .simulator import generate_sample_historian

    try:
        cfg = load_config(config)
        db = resolve_path(config, cfg.source.path)
        if regenerate or not db.exists():
            typer.echo(f"simulating {days} days of the demo plant into {db.parent} ...")
            generate_sample_historian(config, db.parent, seed=seed, days=days)
        results, out_dir = _run(config, None, None, None)
        files = _write_report(config)
    except KinetraceError as exc:
        _say_error(exc)
        raise typer.Exit(EXIT_ERROR) from None
    except Exception:  # noqa: BLE001 - no traceback reaches the user
        raise _internal_error("running the demo", config, None) from None
    _print_summary(results, out_dir, [u.verdict.sentence for u in files.content.units if u.verdict is not None],
                   _production_unit(config))
    typer.echo(f"Daily report: {files.html}")
    typer.echo(f"Workbook:     {files.xlsx}")
    typer.echo(f"Dashboard:    make dashboard   (or .venv/bin/kinetrace dashboard --config {config})")


@app.command()
def dashboard(config: Path = typer.Option(DEMO_CONFIG, "--config", "-c",
                                          help="Plant configuration whose [store] the dashboard reads."),
              store_url: str = typer.Option(None, "--store-url",
                                            help="Results store URL (wins over KINETRACE_STORE_URL and the config)."),
              port: int = typer.Option(8501, "--port", help="Port on 127.0.0.1.")):
    """Serve the dashboard (read-only view of the results store) on http://127.0.0.1:PORT/ (PORT from --port).

    Exit 2 without serving when the configuration cannot be loaded or the port is taken."""
    import os
    import socket
    import subprocess

    from .config import load_config

    try:                                   # checked before any URL is printed
        load_config(config)
    except (KinetraceError, OSError) as exc:
        typer.echo(f"kinetrace dashboard: configuration {config} cannot be loaded: {scrub(exc, *_secret_urls())}",
                   err=True)
        raise typer.Exit(2) from None
    if not 1 <= port <= 65535:
        typer.echo(f"kinetrace dashboard: --port {port} is not a TCP port (1 to 65535)", err=True)
        raise typer.Exit(2)
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as probe:
        probe.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)   # as the server binds: a listener still blocks
        try:
            probe.bind(("127.0.0.1", port))
        except OSError as exc:
            typer.echo(f"kinetrace dashboard: port {port} on 127.0.0.1 is not free ({exc.strerror}); "
                       "stop what uses it or choose another with --port", err=True)
            raise typer.Exit(2) from None
    env = dict(os.environ, KINETRACE_CONFIG=str(Path(config).resolve()))
    if store_url:
        env["KINETRACE_STORE_URL"] = store_url
    # dashboards/launch.py imports the pages' modules before the server answers, then runs Streamlit
    cmd = [sys.executable, str(ROOT / "dashboards" / "launch.py"), "run", str(ROOT / "dashboards" / "app.py"),
           "--server.address", "127.0.0.1", "--server.port", str(port), "--server.headless", "true",
           "--browser.gatherUsageStats", "false", "--client.toolbarMode", "minimal",
           "--theme.primaryColor", "#1f6f8b"]
    typer.echo(f"kinetrace dashboard: open http://127.0.0.1:{port}/ (Ctrl+C stops it)")
    raise typer.Exit(subprocess.call(cmd, env=env))


if __name__ == "__main__":  # pragma: no cover
    app()
