"""kinetrace.kinetics: reaction-kinetics numerics (pure functions, SI units).

Modules
-------
arrhenius
    Reference-temperature Arrhenius form, normalisation, OLS fit.
ratelaws
    Named rate laws (``method=``), rate and apparent rate constant.
"""
