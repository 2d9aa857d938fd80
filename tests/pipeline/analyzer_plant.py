"""K-41 (tests/pipeline/plants.py) with an outlet-P analyzer checked by the lab, for the
analyzer-bias checks. Invented scenario of the tests' own.

* Analyzer ``K41_OUT_P_MOLL``: one reading every 10 min with 1.5 % noise (common practice, no
  source: a process GC's repeatability), so its hourly mean carries 1.5 % / sqrt(6) = 0.61 %.
* Lab ``K41_OUT_P_LAB``: one sample every 12 h with 0.2 % noise (a lab GC's repeatability,
  common practice, no source), reported 4 h after sampling (``result_delay``).
* A fault of the analyzer, relative to its reading: ``drift`` (per day from ``onset_day``), or
  ``step``; ``recal_day`` ends it (the analyzer recalibrated).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from tests.pipeline import plants

ANALYZER, LAB = "K41_OUT_P_MOLL", "K41_OUT_P_LAB"
ANALYZER_NOISE, LAB_NOISE = 0.015 / np.sqrt(6.0), 0.002

_TAGS = f"""
[[units.tags]]
tag = "{LAB}"
role = "outlet_conc"
species = "P"
unit = "mol/L"
sigma = "0.2 %"
sampling = "lab"
max_age = "1 h"
result_delay = "4 h"
"""


def readings(seed: int, *, days: float, onset_day: float, drift: float = 0.0, step: float = 0.0,
             recal_day: float | None = None):
    """Truth and readings of K-41 with the analyzer fault. [SI truth; tag units in the readings]"""
    truth, r = plants.saturating_plant(seed, days=days, change_day=days)
    rng = np.random.default_rng(seed + 1000)
    td = (r.index - r.index[0]) / pd.Timedelta(days=1) + 1 / 48          # hour midpoints [d]
    bias = np.where(td >= onset_day, drift * (td - onset_day) + step, 0.0)
    if recal_day is not None:
        bias = np.where(td >= recal_day, 0.0, bias)
    c_p = truth.frame["c_p"].to_numpy() / 1000.0
    r[ANALYZER] = c_p * (1 + bias) * (1 + ANALYZER_NOISE * rng.standard_normal(len(r)))
    lab = np.full(len(r), np.nan)
    every = np.arange(6, len(r), 12)                                    # 06:00 and 18:00
    lab[every] = c_p[every] * (1 + LAB_NOISE * rng.standard_normal(every.size))
    r[LAB] = lab
    return truth, r, bias


def config(folder, csv, *, days: float) -> str:
    """The K-41 config with the analyzer marked as one and the lab tag added; returns its path."""
    from tests.pipeline.test_self_calibration import TRUE

    target, _ = plants.target_for_crossing("saturating", plants.saturating_plant(1, days=2.0, change_day=2.0)[0],
                                           30.0, 0.1)
    path = plants.write_config("saturating", folder, csv, start=TRUE["saturating"],
                               target=f"{target / 1000:.6f} t/d", change_day=days)
    text = path.read_text()
    old = f'tag = "{ANALYZER}"\nrole = "outlet_conc"\nspecies = "P"\nunit = "mol/L"\nsigma = "0.4 %"\n'
    assert old in text
    text = text.replace(old, old.replace('sigma = "0.4 %"\n', 'sigma = "1.5 %"\nsampling = "analyzer"\nmax_age = "2 h"\n'))
    path.write_text(text + _TAGS)
    return path
