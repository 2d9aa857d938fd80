"""Kinetic parameter estimation across operating history, and rate-law comparison.

Points are steady-state averages (one per steady window, see
:mod:`kinetrace.kinetics.steady` and :func:`window_means`) of the measured rate,
reactor concentrations and temperature, ideally at several temperatures. The
model is written in the reference-temperature form

    r = k_ref exp[-(Ea/R)(1/T - 1/T_ref)] g(C; K)

and fitted by nonlinear least squares (``scipy.optimize.least_squares``, trust
region reflective, adsorption constants bounded at 0) in the parameters
theta = (ln k_ref, Ea, K_j...). Residuals are ln r_meas - ln r_model
(``residual="log"``, constant relative error, the usual choice when rates span
decades) or (r_meas - r_model) / sigma (``residual="absolute"``).

Uncertainty is the linearised one: Cov(theta) = s^2 (J'J)^-1 with
s^2 = SSR / (n - p), 95 % intervals from Student's t with n - p degrees of
freedom (exp-transformed for k_ref, so its interval is asymmetric). Models are
compared by AIC, AICc and BIC on the same data and residual type; an AICc
difference below 2 means the data cannot tell the models apart
(Burnham & Anderson 2002).

References
----------
.. [1] Bates, D. M., Watts, D. G. (1988). Nonlinear Regression Analysis and Its
   Applications. Wiley, ch. 2 (linearised inference).
.. [2] Schwaab, M., Pinto, J. C. (2007). Optimum reference temperature for
   reparameterization of the Arrhenius equation. Part 1. Chem. Eng. Sci. 62,
   2750-2764. https://doi.org/10.1016/j.ces.2007.02.020
.. [3] Akaike, H. (1974). A new look at the statistical model identification.
   IEEE Trans. Autom. Control 19(6), 716-723.
.. [4] Schwarz, G. (1978). Estimating the dimension of a model. Ann. Stat. 6(2), 461-464.
.. [5] Burnham, K. P., Anderson, D. R. (2002). Model Selection and Multimodel
   Inference, 2nd ed. Springer, sec. 2.6 (Delta AIC < 2: substantial support).
.. [6] Durbin, J., Watson, G. S. (1950). Testing for serial correlation in least
   squares regression I. Biometrika 37, 409-428.
.. [7] Wilks, S. S. (1938). The large-sample distribution of the likelihood ratio
   for testing composite hypotheses. Ann. Math. Stat. 9(1), 60-62.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from scipy import optimize, stats

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics._arrays import as_float_array
from kinetrace.kinetics.arrhenius import at_temperature
from kinetrace.kinetics.ratelaws import driving_force

__all__ = ["KineticFit", "fit_rate_law", "compare_models", "ModelComparison", "window_means"]

_EA_SCALE = 1e4  # J/mol, keeps theta of order one for the optimiser


@dataclass(frozen=True)
class KineticFit:
    """Result of :func:`fit_rate_law`.

    Attributes
    ----------
    method : str
        Rate law fitted.
    estimates : dict
        ``k_ref`` [(mol/m^3)^(1-n)/s], ``activation_energy`` [J/mol] and
        ``K_<species>`` [m^3/mol] for fitted adsorption constants.
    standard_errors : dict
        Same keys. k_ref by the delta method (k_ref * se(ln k_ref)).
    ci95 : dict of (low, high)
        95 % intervals, same keys.
    correlation : DataFrame
        Correlation matrix of (ln_k_ref, activation_energy, K_...).
    residuals : ndarray
        Residuals at the solution (log or scaled absolute). [-]
    reference_temperature : float
        T_ref. [K]
    n, n_params : int
        Points used and parameters fitted.
    n_excluded : int
        Points not used (NaN, or rate not positive for ``residual="log"``).
    ssr, sigma : float
        Sum of squared residuals and s = sqrt(SSR/(n-p)).
    aic, aicc, bic : float
        Information criteria, n ln(SSR/n) + 2p, + 2p(p+1)/(n-p-1), n ln(SSR/n) + p ln n.
    diagnostics : dict
        ``durbin_watson`` (near 2 without serial correlation, in data order),
        ``shapiro_wilk_p`` (normality of residuals), ``spearman_temperature``
        (rank correlation of residuals with T; large |rho| hints at a wrong Ea
        or rate law), ``max_abs_standardised``.
    residual : str
        ``log`` or ``absolute``.
    params : dict
        Rate-law parameters at the solution (fixed ones included).
    success : bool
    message : str
    """

    method: str
    estimates: dict[str, float]
    standard_errors: dict[str, float]
    ci95: dict[str, tuple[float, float]]
    correlation: pd.DataFrame
    residuals: np.ndarray = field(repr=False)
    reference_temperature: float = float("nan")
    n: int = 0
    n_params: int = 0
    n_excluded: int = 0
    ssr: float = float("nan")
    sigma: float = float("nan")
    aic: float = float("nan")
    aicc: float = float("nan")
    bic: float = float("nan")
    diagnostics: dict[str, float] = field(default_factory=dict)
    residual: str = "log"
    params: dict[str, Any] = field(default_factory=dict)
    success: bool = True
    message: str = ""

    def predict(self, conc: Mapping[str, Any], temperature):
        """Model rate at ``conc`` [mol/m^3] and ``temperature`` [K]; returns [mol/(m^3 s)]."""
        k = at_temperature(self.estimates["k_ref"], temperature, self.estimates["activation_energy"],
                           self.reference_temperature)
        g = driving_force(self.method, conc, temperature=temperature, **self.params)
        return np.asarray(k) * np.asarray(g)


def _with_adsorption(params: dict, names: Sequence[str], values: np.ndarray) -> dict:
    if not names:
        return params
    ads = dict(params.get("adsorption", {}))
    ads.update({n: float(v) for n, v in zip(names, values)})
    return {**params, "adsorption": ads}


def fit_rate_law(
    rate,
    conc: Mapping[str, Any],
    temperature,
    method: str,
    *,
    reference_temperature: float,
    fit_adsorption: Sequence[str] = (),
    initial: Mapping[str, float] | None = None,
    residual: str = "log",
    sigma=None,
    law_params: Mapping[str, Any] | None = None,
    **params,
) -> KineticFit:
    """Fit k_ref, Ea (and adsorption constants) of a rate law to steady-state points.

    Parameters
    ----------
    rate : array_like or Series
        Measured rate of reaction of each point. [mol/(m^3 s)]
    conc : Mapping[str, array_like]
        Reactor concentrations of each point. [mol/m^3]
    temperature : array_like or Series
        Reactor temperature of each point. [K]
    method : str
        Rate law (``power_law``, ``saturating``, ``reversible``).
    reference_temperature : float
        T_ref, best near the middle of the data (in 1/T). [K]
    fit_adsorption : sequence of str
        Species whose adsorption constant K is fitted (``saturating``); their
        start values come from ``initial['K_<species>']`` or from
        ``adsorption`` in ``params``, else 1/median(C).
    initial : mapping, optional
        Start values ``k_ref``, ``activation_energy``, ``K_<species>``.
    residual : {"log", "absolute"}
        Residual definition.
    sigma : float or array_like, optional
        Standard deviation of each rate for ``absolute``. [mol/(m^3 s)]
    law_params : Mapping, optional
        Rate-law parameters, merged with ``**params``; needed for names that
        clash with this function's own arguments (the van 't Hoff
        ``reference_temperature`` of ``reversible``).
    **params
        Fixed rate-law parameters (orders, other adsorption constants, ...).

    Returns
    -------
    KineticFit

    Raises
    ------
    DataQualityError
        Fewer usable points than parameters + 1.

    References
    ----------
    .. [1] Bates, D. M., Watts, D. G. (1988). Nonlinear Regression Analysis
       and Its Applications. Wiley.
    .. [2] Schwaab, M., Pinto, J. C. (2007). Chem. Eng. Sci. 62, 2750-2764.

    Examples
    --------
    >>> T = np.array([330.0, 340.0, 350.0, 360.0] * 2)
    >>> C = np.array([200.0] * 4 + [800.0] * 4)
    >>> r = 0.01 * np.exp(-60e3 / 8.314462618 * (1 / T - 1 / 345.0)) * C
    >>> fit = fit_rate_law(r, {"A": C}, T, "power_law", reference_temperature=345.0, orders={"A": 1})
    >>> round(fit.estimates["k_ref"], 6), round(fit.estimates["activation_energy"])
    (0.01, 60000)
    """
    params = {**(law_params or {}), **params}
    if residual not in ("log", "absolute"):
        raise KinetraceError(f"residual must be 'log' or 'absolute', got {residual!r}")
    t_ref = float(reference_temperature)
    r_meas = as_float_array(rate).ravel()
    temp = np.broadcast_to(as_float_array(temperature), r_meas.shape).astype(float)
    c = {s: np.broadcast_to(as_float_array(v), r_meas.shape).astype(float) for s, v in conc.items()}
    sig = np.ones_like(r_meas) if sigma is None else np.broadcast_to(as_float_array(sigma), r_meas.shape)
    with np.errstate(invalid="ignore"):
        ok = np.isfinite(r_meas) & np.isfinite(temp) & (temp > 0) & np.all([np.isfinite(v) for v in c.values()], axis=0)
        if residual == "log":
            ok &= r_meas > 0
        else:
            ok &= np.isfinite(sig) & (sig > 0)
    names = list(fit_adsorption)
    p = 2 + len(names)
    n = int(ok.sum())
    if n < p + 1:
        raise DataQualityError(f"kinetic fit needs at least {p + 1} usable points for {p} parameters, got {n}")
    r_use, t_use, s_use = r_meas[ok], temp[ok], sig[ok]
    c_use = {s: v[ok] for s, v in c.items()}
    init = dict(initial or {})
    ads0 = dict(params.get("adsorption", {}))
    k_start = []
    for s in names:
        guess = init.get(f"K_{s}", ads0.get(s))
        if guess is None:
            guess = 1.0 / max(float(np.median(c_use.get(s, np.array([1.0])))), 1e-12)
        k_start.append(float(guess))
    base_params = _with_adsorption(dict(params), names, np.array(k_start))
    g0 = np.asarray(driving_force(method, c_use, temperature=t_use, **base_params))
    if "k_ref" in init:
        ln_k0 = float(np.log(init["k_ref"]))
    else:
        with np.errstate(divide="ignore", invalid="ignore"):
            ratio = r_use / g0
        good = np.isfinite(ratio) & (ratio > 0)
        ln_k0 = float(np.median(np.log(ratio[good]))) if good.any() else 0.0
    theta0 = np.array([ln_k0, float(init.get("activation_energy", 50e3)) / _EA_SCALE, *k_start])

    def model(theta):
        k = np.exp(theta[0]) * np.asarray(at_temperature(1.0, t_use, theta[1] * _EA_SCALE, t_ref))
        g = np.asarray(driving_force(method, c_use, temperature=t_use,
                                     **_with_adsorption(dict(params), names, theta[2:])))
        return k * g

    def resid(theta):
        m = model(theta)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = np.log(r_use) - np.log(m) if residual == "log" else (r_use - m) / s_use
        return np.where(np.isfinite(out), out, 1e6)

    lower = np.array([-np.inf, -np.inf] + [0.0] * len(names))
    res = optimize.least_squares(resid, theta0, bounds=(lower, np.full(p, np.inf)), x_scale="jac",
                                 method="trf", xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=2000)
    theta = res.x
    e = res.fun
    ssr = float(e @ e)
    dof = n - p
    s2 = ssr / dof
    jac = res.jac
    try:
        cov = s2 * np.linalg.inv(jac.T @ jac)
    except np.linalg.LinAlgError:
        cov = np.full((p, p), np.nan)
    se = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    t_crit = float(stats.t.ppf(0.975, dof))
    labels = ["ln_k_ref", "activation_energy"] + [f"K_{s}" for s in names]
    scale = np.array([1.0, _EA_SCALE] + [1.0] * len(names))
    cov_phys = cov * np.outer(scale, scale)
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov_phys / np.outer(np.sqrt(np.diag(cov_phys)), np.sqrt(np.diag(cov_phys)))
    k_ref = float(np.exp(theta[0]))
    est = {"k_ref": k_ref, "activation_energy": float(theta[1] * _EA_SCALE)}
    ses = {"k_ref": k_ref * float(se[0]), "activation_energy": float(se[1] * _EA_SCALE)}
    ci = {
        "k_ref": (float(np.exp(theta[0] - t_crit * se[0])), float(np.exp(theta[0] + t_crit * se[0]))),
        "activation_energy": (est["activation_energy"] - t_crit * ses["activation_energy"],
                              est["activation_energy"] + t_crit * ses["activation_energy"]),
    }
    for i, s in enumerate(names, start=2):
        key = f"K_{s}"
        est[key], ses[key] = float(theta[i]), float(se[i])
        ci[key] = (est[key] - t_crit * ses[key], est[key] + t_crit * ses[key])
    aic = n * np.log(ssr / n) + 2 * p
    diagnostics = _diagnostics(e, t_use, np.sqrt(s2))
    return KineticFit(
        method=method,
        estimates=est,
        standard_errors=ses,
        ci95=ci,
        correlation=pd.DataFrame(corr, index=labels, columns=labels),
        residuals=e,
        reference_temperature=t_ref,
        n=n,
        n_params=p,
        n_excluded=int((~ok).sum()),
        ssr=ssr,
        sigma=float(np.sqrt(s2)),
        aic=float(aic),
        aicc=float(aic + 2 * p * (p + 1) / (n - p - 1)) if n - p - 1 > 0 else float("inf"),
        bic=float(n * np.log(ssr / n) + p * np.log(n)),
        diagnostics=diagnostics,
        residual=residual,
        params=_with_adsorption(dict(params), names, theta[2:]),
        success=bool(res.success),
        message=str(res.message),
    )


def _diagnostics(e: np.ndarray, temperature: np.ndarray, s: float) -> dict[str, float]:
    out = {"durbin_watson": float(np.sum(np.diff(e) ** 2) / np.sum(e**2)) if np.any(e) else float("nan")}
    out["shapiro_wilk_p"] = float(stats.shapiro(e).pvalue) if e.size >= 3 and np.ptp(e) > 0 else float("nan")
    if np.ptp(temperature) > 0 and np.ptp(e) > 0:
        out["spearman_temperature"] = float(stats.spearmanr(e, temperature).statistic)
    else:
        out["spearman_temperature"] = float("nan")
    out["max_abs_standardised"] = float(np.max(np.abs(e)) / s) if s > 0 else float("nan")
    return out


@dataclass(frozen=True)
class ModelComparison:
    """Outcome of :func:`compare_models`.

    Attributes
    ----------
    table : DataFrame
        One row per model: n_params, ssr, aic, aicc, bic, delta_aicc, weight
        (Akaike weight from AICc), sorted best first.
    best : str
        Model with the lowest AICc.
    distinguishable : bool
        False when the runner-up is within 2 AICc units of the best, or when
        the best is the smaller of two nested models and the runner-up's extra
        parameters do not pass a likelihood-ratio test at 5 %.
    verdict : str
        Plain-language conclusion.
    """

    table: pd.DataFrame
    best: str
    distinguishable: bool
    verdict: str


def compare_models(fits: Mapping[str, KineticFit]) -> ModelComparison:
    """Compare fitted rate laws by AICc (with AIC and BIC shown).

    Parameters
    ----------
    fits : Mapping[str, KineticFit]
        Label -> fit; all on the same points with the same residual type.

    Returns
    -------
    ModelComparison

    Raises
    ------
    KinetraceError
        Fewer than two fits, or fits on different data or residual types.

    References
    ----------
    .. [1] Burnham, K. P., Anderson, D. R. (2002). Model Selection and
       Multimodel Inference, 2nd ed. Springer, sec. 2.6.

    Examples
    --------
    >>> T = np.full(8, 345.0) + np.tile([-10.0, 10.0], 4)
    >>> C = np.repeat([50.0, 200.0, 800.0, 2000.0], 2)
    >>> r = 0.02 * at_temperature(1.0, T, 6e4, 345.0) * C / (1 + 0.002 * C)
    >>> r = r * np.exp(0.01 * np.sin(np.arange(8.0)))
    >>> f1 = fit_rate_law(r, {"A": C}, T, "power_law", reference_temperature=345.0, orders={"A": 1})
    >>> f2 = fit_rate_law(r, {"A": C}, T, "saturating", reference_temperature=345.0,
    ...                   orders={"A": 1}, adsorption={"A": 0.001}, fit_adsorption=["A"])
    >>> compare_models({"first order": f1, "saturating": f2}).best
    'saturating'
    """
    if len(fits) < 2:
        raise KinetraceError("compare_models needs at least two fits")
    first = next(iter(fits.values()))
    for name, f in fits.items():
        if f.n != first.n or f.residual != first.residual:
            raise KinetraceError(
                f"fit {name!r} uses {f.n} points with {f.residual} residuals; the first uses {first.n} with "
                f"{first.residual}: models can only be compared on the same data"
            )
    table = pd.DataFrame(
        {
            "n_params": [f.n_params for f in fits.values()],
            "ssr": [f.ssr for f in fits.values()],
            "aic": [f.aic for f in fits.values()],
            "aicc": [f.aicc for f in fits.values()],
            "bic": [f.bic for f in fits.values()],
        },
        index=list(fits),
    ).sort_values("aicc")
    table["delta_aicc"] = table["aicc"] - table["aicc"].iloc[0]
    w = np.exp(-0.5 * table["delta_aicc"].to_numpy())
    table["weight"] = w / w.sum()
    best = str(table.index[0])
    runner = str(table.index[1])
    gap = float(table["delta_aicc"].iloc[1])
    extra = int(table["n_params"].iloc[1] - table["n_params"].iloc[0])
    # fit improvement of the larger runner-up, n ln(SSR_best / SSR_runner), against the
    # likelihood-ratio critical value (Wilks 1938) for nested models
    improvement = first.n * float(np.log(table["ssr"].iloc[0] / table["ssr"].iloc[1]))
    extra_unsupported = extra > 0 and improvement < float(stats.chi2.ppf(0.95, extra))
    if gap < 2.0 or extra_unsupported:
        candidates = table.iloc[:2]
        simplest = str(candidates["n_params"].idxmin())
        why = (
            f"AICc differs by {gap:.1f}, less than 2"
            if gap < 2.0
            else f"the {extra} extra parameter(s) of {runner!r} do not improve the fit significantly "
            f"(likelihood-ratio statistic {improvement:.1f} below {stats.chi2.ppf(0.95, extra):.2f})"
        )
        verdict = (
            f"The data cannot tell {best!r} and {runner!r} apart ({why}). "
            f"Use the simpler {simplest!r} for now; points over a wider range of concentration and "
            f"temperature are needed to decide."
        )
        distinguishable = False
    elif gap < 10.0:
        verdict = (
            f"{best!r} is better supported than {runner!r} (AICc lower by {gap:.1f}), "
            f"but {runner!r} is not ruled out."
        )
        distinguishable = True
    else:
        verdict = f"{best!r} is clearly better supported than {runner!r} (AICc lower by {gap:.1f})."
        distinguishable = True
    return ModelComparison(table=table, best=best, distinguishable=distinguishable, verdict=verdict)


def window_means(data: pd.DataFrame, windows: pd.DataFrame) -> pd.DataFrame:
    """Mean of every column over each steady window.

    Parameters
    ----------
    data : DataFrame
        Time series (rates [mol/(m^3 s)], concentrations [mol/m^3],
        temperature [K], ...), same positional order as the windows were found on.
    windows : DataFrame
        ``start_pos`` and ``stop_pos`` columns (from
        :func:`kinetrace.kinetics.steady.detect_steady`).

    Returns
    -------
    DataFrame
        One row per window: the column means (NaN ignored), plus ``start``,
        ``end`` and ``n_samples``. [units of the columns]

    Examples
    --------
    >>> w = pd.DataFrame({"start_pos": [0, 3], "stop_pos": [2, 5]})
    >>> window_means(pd.DataFrame({"x": [1.0, 3.0, 9.0, 4.0, 6.0]}), w)["x"].tolist()
    [2.0, 5.0]
    """
    rows = []
    for start, stop in zip(windows["start_pos"], windows["stop_pos"]):
        block = data.iloc[int(start) : int(stop)]
        row = block.mean(numeric_only=True).to_dict()
        row.update(start=block.index[0], end=block.index[-1], n_samples=len(block))
        rows.append(row)
    return pd.DataFrame(rows).reset_index(drop=True)
