"""Command line: ``kinetrace demo`` and ``kinetrace check``.

On a terminal, long runs show a progress bar; when not attached to one (cron, CI)
they write plain log lines instead.
"""

from __future__ import annotations

import logging
import math
import sys
from pathlib import Path

import typer

from .errors import KinetraceError

app = typer.Typer(add_completion=False, no_args_is_help=True,
                  help="Daily performance check of continuous stirred-tank reactors.")

ROOT = Path(__file__).resolve().parents[2]
DEMO_CONFIG = ROOT / "config" / "demo_plant.toml"


def _setup_logging() -> None:
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(levelname)s %(name)s: %(message)s",
                        stream=sys.stderr)


def _fmt(x: float, spec: str) -> str:
    return "n/a" if x is None or not math.isfinite(x) else format(x, spec)


def _print_summary(results, out_dir: Path) -> None:
    from rich.console import Console
    from rich.table import Table

    table = Table(title="kinetrace daily check (last 24 h of data)")
    for col in ("unit", "production kg/h", "target kg/h", "of target", "conversion", "k_ref (SI)", "activity",
                "steady h", "status"):
        table.add_column(col, justify="right" if col not in ("unit", "status") else "left")
    for r in results:
        s = r.summary
        table.add_row(s["unit"], _fmt(s["production_kg_h"], ".0f"), _fmt(s["target_kg_h"], ".0f"),
                      _fmt(100 * s["production_ratio"], ".1f") + " %", _fmt(s["conversion"], ".3f"),
                      _fmt(s["k_ref"], ".3e"), _fmt(s["activity"], ".3f"), str(s["steady_hours"]), s["status"])
    console = Console(width=max(110, Console().width))
    console.print(table)
    console.print(f"Time series (one CSV per unit) and summary.csv written to: {out_dir}")


def _run(config: Path, since, until, out) -> tuple[list, Path]:
    from .pipeline import run_check

    if sys.stderr.isatty():
        from rich.progress import Progress

        with Progress(transient=True) as bar:
            task = bar.add_task("checking units", total=None)

            def progress(unit_id, i, n):
                bar.update(task, total=n, completed=i, description=f"checking {unit_id}")

            return run_check(config, since=since, until=until, out_dir=out, progress=progress)
    log = logging.getLogger("kinetrace")
    return run_check(config, since=since, until=until, out_dir=out,
                     progress=lambda u, i, n: log.info("checking unit %s (%d of %d)", u, i + 1, n))


@app.command()
def check(config: Path = typer.Option(..., "--config", "-c", help="Plant configuration TOML file."),
          since: str = typer.Option(None, help="Start of the period (ISO 8601; UTC unless an offset is given)."),
          until: str = typer.Option(None, help="End of the period (exclusive)."),
          out: Path = typer.Option(None, help="Output folder (default: analysis.output_dir of the config).")):
    """Back-calculate conversion, k_ref, activity and production for every unit of a plant."""
    _setup_logging()
    try:
        results, out_dir = _run(config, since, until, out)
    except KinetraceError as exc:
        typer.echo(f"kinetrace: {exc}", err=True)
        raise typer.Exit(2) from None
    _print_summary(results, out_dir)


@app.command()
def demo(config: Path = typer.Option(DEMO_CONFIG, "--config", "-c", help="Demo plant configuration."),
         seed: int = typer.Option(20260901, help="Seed of the simulated sample historian."),
         days: int = typer.Option(90, help="Days of history to simulate."),
         regenerate: bool = typer.Option(False, help="Simulate again even if the sample historian exists.")):
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
    except KinetraceError as exc:
        typer.echo(f"kinetrace: {exc}", err=True)
        raise typer.Exit(2) from None
    _print_summary(results, out_dir)


if __name__ == "__main__":  # pragma: no cover
    app()
