"""Benchmark: what the joint calibration of the rate laws and the activity adds to the daily check.

Invented scenario: the tests' series-network unit K-42 (A + B -> P, P + B -> Q on one catalyst;
tests/pipeline/plants.py), simulated for a year with scipy's solve_ivp and read as an hourly
wide CSV export, checked from rough starting values (k_ref 2x, Ea 15 kJ/mol low, adsorption
constant 2x). The same check is timed

1. as it runs (calibration over every steady stretch of the year, the back-calculation re-run
   with the fitted laws), and
2. with the calibration step replaced by "no calibration" (configured values used), the baseline,

in the same process after a warm-up on a short history; the best of ``--repeat`` runs of each.
Prints the seconds the calibration adds, the ratio of the two, the time of the joint fit alone, and
how many steady stretches it fitted. Asserts nothing about time.

Usage: ``python benchmarks/bench_calibration.py [--days 365] [--repeat 2]``
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "src"))
sys.path.insert(0, str(ROOT))

from kinetrace.pipeline import calibration_step, daily, run_check  # noqa: E402
from tests.pipeline import plants  # noqa: E402
from tests.pipeline.test_self_calibration import ROUGH  # noqa: E402


def _config(folder: Path, days: float, seed: int) -> Path:
    truth, readings = plants.series_plant(seed, days=days, change_day=min(62.0, days / 2), kd_per_day=0.003)
    target, _ = plants.target_for_crossing("series", truth, 30.0, 0.11)
    folder.mkdir(parents=True, exist_ok=True)
    csv = plants.write_export(readings, folder / "export.csv")
    return plants.write_config("series", folder, csv, start=ROUGH["series"], target=f"{target / 1000:.6f} t/d",
                               change_day=truth.change_day)


def _no_calibration(series, model):
    return calibration_step.CalibrationOutcome(None, None, problems=["benchmark baseline: calibration skipped"])


def _best(cfg: Path, repeat: int, calibrated: bool) -> tuple[float, object]:
    original = daily.calibrate_unit
    daily.calibrate_unit = original if calibrated else _no_calibration
    try:
        best, res = float("inf"), None
        for _ in range(repeat):
            t0 = time.perf_counter()
            results, _ = run_check(cfg, store=None)
            best = min(best, time.perf_counter() - t0)
            res = results[0]
        return best, res
    finally:
        daily.calibrate_unit = original


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--days", type=float, default=365.0)
    ap.add_argument("--repeat", type=int, default=2)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        print(f"simulating K-42 for {args.days:g} days (hourly export) ...", flush=True)
        warm = _config(tmp / "warm", 20.0, 2)
        cfg = _config(tmp / "year", args.days, 5)
        _best(warm, 1, True)
        _best(warm, 1, False)
        t_cal, res = _best(cfg, args.repeat, True)
        t_base, _ = _best(cfg, args.repeat, False)
        means = calibration_step.stretch_means(res.series, res.model)
        t0 = time.perf_counter()
        outcome = calibration_step.calibrate_unit(res.series, res.model)
        t_fit = time.perf_counter() - t0
    n_hours = len(res.series)
    print(f"hourly intervals: {n_hours}, steady stretches fitted: {len(means)}, "
          f"reactions: {len(res.model.rate_laws)}, decay law: "
          f"{outcome.calibration.decay_method if outcome.calibration is not None else 'none'}")
    print(f"check without calibration (baseline): {t_base:8.2f} s")
    print(f"check with calibration:               {t_cal:8.2f} s")
    print(f"added by the calibration:             {t_cal - t_base:8.2f} s  (goal: at most 2 s)")
    print(f"ratio with / without:                 {t_cal / t_base:8.2f}")
    print(f"joint fit alone (calibrate_unit):     {t_fit:8.2f} s")


if __name__ == "__main__":
    main()
