"""kinetrace.kinetics: reaction-kinetics numerics (pure functions, SI units inside).

No configuration, file or database access happens here: every function takes
numbers, numpy arrays or pandas objects and returns the same.

Modules
-------
arrhenius
    Reference-temperature Arrhenius form: normalise_to_reference, at_temperature,
    fit_arrhenius (OLS with standard errors and 95 % intervals).
ratelaws
    Named rate laws (``power_law``, ``saturating``, ``reversible``): rate,
    apparent_rate_constant, driving_force, list_methods.
steady
    Steady-state detection (``cao_rhinehart``, ``drift_variance``): detect_steady,
    steady windows and mask.
cstr
    Steady ideal CSTR: solve_cstr (closed forms or vectorised bracketed solve),
    required_rate_constant, required_residence_time, temperature_for_conversion
    (searches only inside the configured safe range).
balances
    Rates from steady and dynamic (Savitzky-Golay) balances and from extents.
activity
    Apparent k at T_ref over time, fresh baseline, activity a(t).
estimation
    Least-squares k_ref, Ea, K across steady windows; AICc/BIC comparison.
uncertainty
    Delta-method and Monte Carlo propagation of measurement covariance.
"""
