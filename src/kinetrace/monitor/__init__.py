"""kinetrace.monitor: catalyst trend, drift alarms, production against target, forecast, what-if.

Pure numerics on numpy arrays and pandas Series (SI units, UTC time index); no
files, database or configuration reading. Modules:

* :mod:`.decay`      decay laws a(t), weighted least-squares fits, AICc choice, prediction band
* :mod:`.trend`      time on stream with catalyst changes, fit of the current charge
* :mod:`.arl`        Markov-chain average run lengths of EWMA and CUSUM, limits for a target ARL0
* :mod:`.charts`     EWMA and tabular CUSUM alarms with onset and size estimates
* :mod:`.steps`      sudden steps (poisoning, catalyst change)
* :mod:`.production` totals per day and shift, exact attribution of the gap
* :mod:`.forecast`   activity needed for the target, date the trend crosses it
* :mod:`.whatif`     temperature, feed flow or residence time restoring the target, inside safe limits
* :mod:`.assess`     the monitoring stage of one unit, chaining the above on its back-calculated series
"""

from kinetrace.monitor._common import CAUTIONS
from kinetrace.monitor.alarms import Alarm
from kinetrace.monitor.arl import cusum_arl, cusum_limit_for_arl, ewma_arl, ewma_limit_for_arl
from kinetrace.monitor.assess import UnitAssessment, assess_unit
from kinetrace.monitor.charts import (
    ChartResult,
    ar1_innovations,
    cusum_alarms,
    cusum_statistic,
    detect_drift,
    ewma_alarms,
    ewma_statistic,
    in_control_estimates,
    list_drift_methods,
)
from kinetrace.monitor.decay import DecayFit, decay_activity, fit_decay, list_decay_laws
from kinetrace.monitor.forecast import Forecast, forecast_crossing, required_activity
from kinetrace.monitor.production import CAUSES, attribute_shortfall, period_labels, production_totals
from kinetrace.monitor.steps import detect_steps, robust_sigma
from kinetrace.monitor.trend import ActivityTrend, catalyst_changes, fit_activity_trend, time_on_stream
from kinetrace.monitor.whatif import WhatIf, list_levers, production_at, volume_limits_from_level, what_if

__all__ = [
    "CAUTIONS", "CAUSES", "Alarm", "ActivityTrend", "ChartResult", "DecayFit", "Forecast", "UnitAssessment",
    "WhatIf", "ar1_innovations", "assess_unit", "attribute_shortfall", "catalyst_changes", "cusum_alarms", "cusum_arl", "cusum_limit_for_arl",
    "cusum_statistic", "decay_activity", "detect_drift", "detect_steps", "ewma_alarms", "ewma_arl",
    "ewma_limit_for_arl", "ewma_statistic", "fit_activity_trend", "fit_decay", "forecast_crossing",
    "in_control_estimates", "list_decay_laws", "list_drift_methods", "list_levers", "period_labels",
    "production_at", "production_totals", "required_activity", "robust_sigma", "time_on_stream",
    "volume_limits_from_level", "what_if",
]
