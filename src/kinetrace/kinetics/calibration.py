"""Joint estimation of the rate laws and the catalyst activity history (self-calibration).

One nonlinear least-squares problem over the steady stretches i of the history and every
reaction j with a rate law:

    ln r_ij = ln k_ref,j - (Ea_j / R)(1/T_i - 1/T_ref,j) + ln g_j(C_i; K_j, n_j) + c_j ln a_i
    a_i     = a0_charge(i) f(t_i; theta_d)

``r`` the rate from the balances (independent of any rate-law parameter), ``g`` the
configured law's driving force, ``c_j`` 1 for a reaction the catalyst drives, ``t`` the time
on stream of the charge (restarting at each catalyst change), ``f`` a decay-law family
(:mod:`kinetrace.kinetics.deactivation`) with ``f(0) = 1``; ``a0 = 1`` for a charge whose start
is known (a catalyst change, or the fresh period), free for a charge that went on stream
before the data. Residuals of reaction j are divided by its residual standard deviation
(two-stage weighted least squares), so a noisy side reaction does not swamp the main one.
The optimiser works at the data's centred temperature T* (Schwaab & Pinto 2007), so
ln k and Ea are nearly uncorrelated inside it.

Configured values are starting points; a parameter can be held at its configured value
(``hold``), or its configured value and standard uncertainty used as a prior (an added
residual (theta - theta_cfg)/u). The decay law is chosen by AICc among the families tried,
the one with fewer parameters kept where the AICc difference is below 2
(Burnham & Anderson 2002).

Identifiability (Raue et al. 2009): the 95 % interval of each fitted parameter is the
profile-likelihood interval (Bates & Watts 1988, profile t: |tau| <= t(n - p, 0.975)), with the
residual variance inflated by (1 + rho)/(1 - rho) for a lag-1 autocorrelation rho of the
residuals in time (effective sample size n (1 - rho)/(1 + rho), common practice). A parameter
is held at its configured value, with the reason said, where

* the data cannot determine it at all: Ea with a temperature span below ``min_temperature_span``,
  an adsorption constant whose concentration span is below ``min_concentration_span`` of its
  mean, k_ref of a catalysed reaction when no charge has a known fresh start (activity and
  k_ref cannot be told apart), any reaction without enough positive rates;
* its profile does not rise above the threshold on one side inside the parameter's bounds;
* the data determine it no better than the configuration already does (95 % interval
  wider than +- 1.96 u of the configured uncertainty).

A held parameter keeps its configured standard uncertainty, and its interval says so.

References
----------
.. [1] Bates, D. M., Watts, D. G. (1988). Nonlinear Regression Analysis and Its Applications.
   Wiley, ch. 2 and 6 (profile t).
.. [2] Raue, A. et al. (2009). Structural and practical identifiability analysis of partially
   observed dynamical models by exploiting the profile likelihood. Bioinformatics 25(15), 1923-1929.
.. [3] Schwaab, M., Pinto, J. C. (2007). Optimum reference temperature for reparameterization of
   the Arrhenius equation. Part 1. Chem. Eng. Sci. 62, 2750-2764.
.. [4] Burnham, K. P., Anderson, D. R. (2002). Model Selection and Multimodel Inference, 2nd ed.
   Springer, sec. 2.6.
.. [5] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed., ch. 21 (time on stream,
   decay of a charge).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import optimize, stats

from kinetrace.errors import DataQualityError, KinetraceError
from kinetrace.kinetics.arrhenius import R_GAS
from kinetrace.kinetics.deactivation import DECAY_LAWS
from kinetrace.kinetics.ratelaws import driving_force
from kinetrace.units import rate_constant_unit
from kinetrace.kinetics._inflation import variance_inflation as _inflation

__all__ = ["LawSpec", "Calibration", "calibrate", "DEFAULT_UNCERTAINTY", "DECAY_FAMILIES"]

DAY = 86400.0
#: Decay families tried by default, in order of their number of parameters.
DECAY_FAMILIES = ("exponential", "hyperbolic", "linear", "nth_order")
#: Standard uncertainty of a configured value when the config gives none: k_ref and adsorption
#: constants a factor of 2 (ln-scale sd ln 2), Ea 20 kJ/mol, an order 0.5 (common practice, no source:
#: the spread of a rough lab or vendor value).
DEFAULT_UNCERTAINTY = {"k_ref": np.log(2.0), "activation_energy": 20e3, "adsorption": np.log(2.0), "order": 0.5}
_EA = 1e4  # J/mol per optimiser unit
_MIN_RATES = 5


@dataclass(frozen=True)
class LawSpec:
    """A reaction's rate law as the calibration sees it (SI).

    ``uncertainty`` holds standard uncertainties: ``k_ref`` and ``adsorption`` on the ln scale
    [-], ``activation_energy`` [J/mol], ``order`` [-]. ``hold`` names held parameters
    (``k_ref``, ``activation_energy``, ``K_<species>``, ``order_<species>``); ``fit_orders`` the
    species whose order is estimated; ``prior`` uses the configured values as priors.
    """

    method: str
    k_ref: float
    activation_energy: float
    reference_temperature: float
    params: Mapping
    hold: tuple[str, ...] = ()
    fit_orders: tuple[str, ...] = ()
    uncertainty: Mapping[str, float] = field(default_factory=dict)
    prior: bool = False

    def u(self, kind: str) -> float:
        return float(self.uncertainty.get(kind, DEFAULT_UNCERTAINTY[kind]))


@dataclass
class _P:
    """One parameter: internal value (ln scale for k, K, a0; 10 kJ/mol for Ea; 1/day for decay)."""

    reaction: str
    name: str
    kind: str                 # k_ref, activation_energy, adsorption, order, a0, decay
    value: float
    lower: float
    upper: float
    configured: float = np.nan
    u: float = np.nan         # configured standard uncertainty, internal scale
    held: str = ""            # reason it is held ("" = estimated)
    prior: bool = False
    species: str = ""


@dataclass
class Calibration:
    """Result of :func:`calibrate`.

    Attributes
    ----------
    parameters : DataFrame
        One row per parameter: ``reaction``, ``name``, ``value``, ``std_error``, ``ci_low``,
        ``ci_high`` (95 %), ``unit_of_measure``, ``status`` (``estimated``, ``estimated with
        prior``, ``held``), ``reason``, ``configured``. Values in SI (k_ref in the law's SI
        unit, Ea [J/mol], K [m^3/mol], kd and b [1/s]).
    laws : dict
        Reaction id -> dict of ``k_ref``, ``activation_energy``, ``adsorption``, ``orders``:
        the parameter set to use downstream. [SI]
    decay_method : str
        Decay family chosen.
    decay_candidates : DataFrame
        AICc of each family tried.
    messages : list of str
        Identifiability statements, in words.
    n_stretches : int
        Stretches used.
    inflation : float
        Variance inflation for autocorrelation, (1 + rho)/(1 - rho) >= 1. [-]
    residual_sd : dict
        Reaction id -> residual sd of ln r. [-]
    activity : ndarray
        Fitted activity at each stretch. [-]
    """

    parameters: pd.DataFrame
    laws: dict
    decay_method: str
    decay_candidates: pd.DataFrame
    messages: list
    n_stretches: int
    inflation: float
    residual_sd: dict
    activity: np.ndarray

    def value(self, reaction: str, name: str) -> float:
        """A parameter's value (SI) by reaction id and name."""
        p = self.parameters
        hit = p[(p["reaction"] == reaction) & (p["name"] == name)]
        if hit.empty:
            raise KeyError(f"{reaction}/{name}")
        return float(hit["value"].iloc[0])


class _Problem:
    """The stacked residual vector of one parameter layout."""

    def __init__(self, params, laws, rates, conc, temperature, tos_days, charge, catalysed, decay, t_star):
        self.params, self.laws, self.decay = params, laws, decay
        self.inv_t = 1.0 / np.asarray(temperature, dtype=float)
        self.inv_tstar = 1.0 / t_star
        self.tos = np.asarray(tos_days, dtype=float)
        self.charge = np.asarray(charge, dtype=int)
        self.conc = {k: np.asarray(v, dtype=float) for k, v in conc.items()}
        self.rows, self.y = {}, {}
        for rid in laws:
            r = np.asarray(rates[rid], dtype=float)
            ok = np.isfinite(r) & (r > 0) & np.isfinite(self.inv_t)
            self.rows[rid] = np.flatnonzero(ok)
            self.y[rid] = np.log(r[ok])
        self.catalysed = set(catalysed)
        self.sigma = {rid: 1.0 for rid in laws}
        self.index = {(p.reaction, p.name): i for i, p in enumerate(params)}
        self.a0_of_charge = {int(p.name.split("_")[-1]): i for i, p in enumerate(params) if p.kind == "a0"}
        self.decay_idx = [i for i, p in enumerate(params) if p.kind == "decay"]
        self.n_obs = sum(len(v) for v in self.rows.values())

    def ln_activity(self, th):
        ln_a0 = np.zeros(self.charge.max() + 1 if self.charge.size else 1)
        for c, i in self.a0_of_charge.items():
            ln_a0[c] = th[i]
        if not self.decay_idx:
            return ln_a0[self.charge]
        law = DECAY_LAWS[self.decay]
        f = law.func(self.tos, 1.0, *(th[i] for i in self.decay_idx))
        with np.errstate(divide="ignore", invalid="ignore"):
            return ln_a0[self.charge] + np.log(np.where(f > 0, f, np.nan))

    def ln_rate(self, th, rid, ln_a):
        law = self.laws[rid]
        rows = self.rows[rid]
        ln_k = th[self.index[(rid, "k_ref")]]
        ea = th[self.index[(rid, "activation_energy")]] * _EA
        params = {k: (dict(v) if isinstance(v, Mapping) else v) for k, v in law.params.items()}
        for p in self.params:
            if p.reaction == rid and p.kind == "adsorption":
                params["adsorption"][p.species] = float(np.exp(th[self.index[(rid, p.name)]]))
            elif p.reaction == rid and p.kind == "order":
                params["orders"][p.species] = float(th[self.index[(rid, p.name)]])
        conc = {k: v[rows] for k, v in self.conc.items()}
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            g = np.asarray(driving_force(law.method, conc, temperature=1.0 / self.inv_t[rows], **params), dtype=float)
            out = (ln_k - ea / R_GAS * (self.inv_t[rows] - 1.0 / law.reference_temperature) + np.log(g))
        if rid in self.catalysed:
            out = out + ln_a[rows]
        return out

    def residuals(self, th):
        ln_a = self.ln_activity(th)
        parts = [(self.y[rid] - self.ln_rate(th, rid, ln_a)) / self.sigma[rid] for rid in self.laws]
        parts.append(np.array([(th[i] - p.configured) / p.u for i, p in enumerate(self.params)
                               if p.prior and not p.held and np.isfinite(p.u) and p.u > 0]))
        e = np.concatenate(parts)
        return np.where(np.isfinite(e), e, 1e3)

    def by_reaction(self, th):
        ln_a = self.ln_activity(th)
        return {rid: self.y[rid] - self.ln_rate(th, rid, ln_a) for rid in self.laws}


def _fit(prob: _Problem, th0, free, fixed_value=None):
    """Least squares over the free indices (``fixed_value`` maps index -> value). Returns (theta, ssr, jac)."""
    th = np.array(th0, dtype=float)
    for i, v in (fixed_value or {}).items():
        th[i] = v
    idx = [i for i in free if i not in (fixed_value or {})]
    if not idx:
        e = prob.residuals(th)
        return th, float(e @ e), np.zeros((e.size, 0))
    lo = np.array([prob.params[i].lower for i in idx])
    hi = np.array([prob.params[i].upper for i in idx])
    x0 = np.clip(th[idx], lo + 1e-9 * (hi - lo), hi - 1e-9 * (hi - lo))

    def f(x):
        t = th.copy()
        t[idx] = x
        return prob.residuals(t)

    sol = optimize.least_squares(f, x0, bounds=(lo, hi), x_scale="jac", method="trf", max_nfev=200 * len(idx))
    th[idx] = sol.x
    return th, float(sol.fun @ sol.fun), sol.jac


def _consider_variance(prob: _Problem, th, free, jac) -> np.ndarray:
    """Variance added to each free parameter by the configured uncertainty of the held ones.

    G = -(J_f' J_f)^+ J_f' J_h is the sensitivity of the estimates to the held values, and
    G diag(u_h^2) G' their covariance ("consider" parameters; Bierman, G. J. (1977).
    Factorization Methods for Discrete Sequential Estimation. Academic Press, ch. VI; from memory).
    """
    held = [i for i, p in enumerate(prob.params) if p.held and np.isfinite(p.u) and p.u > 0]
    if not held or jac.size == 0:
        return np.zeros(len(free))
    base = prob.residuals(th)
    cols = []
    for i in held:
        h = 1e-4 * max(abs(th[i]), 1.0)
        t = th.copy()
        t[i] += h
        cols.append(-(prob.residuals(t) - base) / h)   # jac is d(residual)/d(theta) with residual y - f
    jh = -np.column_stack(cols)
    g = -np.linalg.pinv(jac.T @ jac) @ (jac.T @ jh)
    u2 = np.array([prob.params[i].u ** 2 for i in held])
    return (g * g) @ u2


def _profile_side(prob, th_hat, free, i, s_hat, thr, se, direction):
    """Where the profile of parameter i crosses ``thr`` on one side; None if not inside its bounds."""
    p = prob.params[i]
    bound = p.upper if direction > 0 else p.lower
    step = max(2.0 * se, 1e-3 * max(abs(th_hat[i]), 1.0))
    prev_v, th_prev = th_hat[i], th_hat
    for k in range(12):
        v = th_hat[i] + direction * step * 2.0 ** k
        at_bound = (v >= bound) if direction > 0 else (v <= bound)
        v = bound if at_bound else v
        th_v, ssr_v, _ = _fit(prob, th_prev, free, {i: v})
        if ssr_v - s_hat >= thr:
            def g(x, _th=th_prev):
                return _fit(prob, _th, free, {i: x})[1] - s_hat - thr
            return optimize.brentq(g, prev_v, v, xtol=0.02 * se + 1e-12) if prev_v != v else v
        if at_bound:
            return None
        prev_v, th_prev = v, th_v
    return None


def _report(p: _P, v: float) -> float:
    """Internal value -> SI value."""
    if p.kind in ("k_ref", "adsorption", "a0"):
        return float(np.exp(v))
    if p.kind == "activation_energy":
        return float(v * _EA)
    if p.kind == "decay" and p.name in ("kd", "b"):
        return float(v / DAY)
    return float(v)


def _unit(p: _P, laws: Mapping | None = None) -> str:
    if p.kind == "k_ref" and laws is not None and p.reaction in laws:
        return rate_constant_unit(sum(laws[p.reaction].params["orders"].values()))
    return {"k_ref": "SI", "activation_energy": "J/mol", "adsorption": "m3/mol", "a0": "-",
            "order": "-"}.get(p.kind, "1/s" if p.name in ("kd", "b") else "-")


def _layout(laws: Mapping[str, LawSpec], decay: str, charges: Sequence[int], fresh: Mapping[int, bool],
            spans: Mapping, t_star: float, *, min_temperature_span: float, min_concentration_span: float,
            identifiable_k: bool, rates_ok: Mapping[str, bool], with_activity: bool = True) -> list[_P]:
    out: list[_P] = []
    for rid, law in laws.items():
        why_rxn = "" if rates_ok[rid] else f"fewer than {_MIN_RATES} positive rates of reaction {rid}"
        held_k = why_rxn or ("held by the configuration" if "k_ref" in law.hold else "")
        if not held_k and not identifiable_k.get(rid, True):
            held_k = ("activity and k_ref cannot be told apart: no catalyst charge with a known fresh start "
                      "(catalyst change or fresh period) in the data")
        out.append(_P(rid, "k_ref", "k_ref", np.log(law.k_ref), np.log(law.k_ref) - 12, np.log(law.k_ref) + 12,
                      np.log(law.k_ref), law.u("k_ref"), held_k, law.prior))
        span_t = spans["temperature"]
        held_e = why_rxn or ("held by the configuration" if "activation_energy" in law.hold else "")
        if not held_e and span_t < min_temperature_span:
            held_e = (f"the steady stretches span {span_t:.1f} K only (< {min_temperature_span:g} K): "
                      "the temperature range cannot determine Ea")
        out.append(_P(rid, "activation_energy", "activation_energy", law.activation_energy / _EA, 0.0, 40.0,
                      law.activation_energy / _EA, law.u("activation_energy") / _EA, held_e, law.prior))
        for sp, k_ads in (law.params.get("adsorption") or {}).items():
            name = f"K_{sp}"
            held = why_rxn or ("held by the configuration" if name in law.hold else "")
            rel = spans.get(sp, 0.0)
            if not held and rel < min_concentration_span:
                held = (f"the concentration of {sp} varies by {100 * rel:.0f} % of its mean only "
                        f"(< {100 * min_concentration_span:g} %): the data cannot determine K_{sp}")
            v = np.log(max(float(k_ads), 1e-12))
            out.append(_P(rid, name, "adsorption", v, v - 10, v + 10, v, law.u("adsorption"), held, law.prior, sp))
        for sp in law.fit_orders:
            name = f"order_{sp}"
            held = why_rxn or ("held by the configuration" if name in law.hold else "")
            v = float(law.params["orders"][sp])
            out.append(_P(rid, name, "order", v, 0.0, 4.0, v, law.u("order"), held, law.prior, sp))
    if not with_activity:        # no reaction on the catalyst: no activity parameters
        return out
    for c in charges:
        if not fresh.get(c, False):
            out.append(_P("", f"a0_charge_{c}", "a0", 0.0, np.log(1e-3), np.log(2.0)))
    law = DECAY_LAWS[decay]
    starts = {"kd": 0.005, "b": 0.005, "m": 1.5}
    bounds = {"kd": (-0.2, 5.0), "b": (-0.05, 0.5), "m": (0.0, 6.0)}
    for name in law.params[1:]:
        out.append(_P("", name, "decay", starts[name], *bounds[name]))
    return out


def calibrate(rates: Mapping[str, np.ndarray], conc: Mapping[str, np.ndarray], temperature, time_on_stream,
              charge, laws: Mapping[str, LawSpec], *, fresh_charges: Mapping[int, bool] | Sequence[int] = (),
              catalysed: Sequence[str] = (), decay_methods: Sequence[str] | str = DECAY_FAMILIES,
              times=None, min_temperature_span: float = 3.0, min_concentration_span: float = 0.05,
              level: float = 0.95, serial_correlation: bool = True) -> Calibration:
    """Estimate every rate law and the activity history together; see the module docstring.

    Parameters
    ----------
    rates : mapping
        Reaction id -> rate of reaction of each stretch, from the balances. [mol/(m^3 s)]
    conc : mapping
        Species -> reactor concentration of each stretch. [mol/m^3]
    temperature : array_like
        Reactor temperature of each stretch. [K]
    time_on_stream : array_like
        Time on stream of each stretch in its catalyst charge. [s]
    charge : array_like of int
        Catalyst charge of each stretch (0, 1, ...).
    laws : mapping
        Reaction id -> :class:`LawSpec` (configured values: start points, priors or held values).
    fresh_charges : mapping or sequence of int
        Charges whose activity at time on stream 0 is 1 (known fresh start).
    catalysed : sequence of str
        Reactions whose rate the activity multiplies.
    decay_methods : str or sequence of str
        Decay families tried (``"auto"``: :data:`DECAY_FAMILIES`).
    times : array_like, optional
        Time of each stretch (any monotone number) for the autocorrelation; default the order given.
    min_temperature_span : float
        Smallest temperature span for Ea to be estimated. [K]
    min_concentration_span : float
        Smallest (max - min) / mean of a species' concentration for its adsorption constant. [-]
    level : float
        Interval level. [-]
    serial_correlation : bool
        Widen the intervals for autocorrelated residuals (False: independent points, e.g. a
        table of separate experiments).

    Returns
    -------
    Calibration

    Raises
    ------
    DataQualityError
        Fewer than 5 stretches, or no reaction with enough rates.
    """
    temperature = np.asarray(temperature, dtype=float)
    n = temperature.size
    if n < _MIN_RATES:
        raise DataQualityError(f"only {n} steady stretches: too few to calibrate the rate laws")
    charge = np.asarray(charge, dtype=int)
    tos_days = np.asarray(time_on_stream, dtype=float) / DAY
    fresh = dict(fresh_charges) if isinstance(fresh_charges, Mapping) else {int(c): True for c in fresh_charges}
    charges = sorted(set(charge.tolist()))
    any_fresh = any(fresh.get(c, False) for c in charges)
    catalysed = [r for r in catalysed if r in laws]
    identifiable_k = {rid: (any_fresh or rid not in catalysed) for rid in laws}
    rates_ok = {rid: int(np.sum(np.isfinite(rates[rid]) & (np.asarray(rates[rid], dtype=float) > 0))) >= _MIN_RATES
                for rid in laws}
    if not any(rates_ok.values()):
        raise DataQualityError("no reaction has 5 or more positive rates in the steady stretches")
    t_star = 1.0 / float(np.mean(1.0 / temperature))
    spans = {"temperature": float(np.ptp(temperature))}
    for sp, c in conc.items():
        c = np.asarray(c, dtype=float)
        m = np.nanmean(c) if np.isfinite(c).any() else np.nan
        spans[sp] = float(np.nanmax(c) - np.nanmin(c)) / m if np.isfinite(m) and m > 0 else 0.0
    methods = list(DECAY_FAMILIES) if decay_methods == "auto" else [decay_methods] if isinstance(
        decay_methods, str) else list(decay_methods)
    for m in methods:
        if m not in DECAY_LAWS:
            raise KinetraceError(f"unknown decay law {m!r}; allowed: {', '.join(DECAY_LAWS)} or 'auto'")
    order_t = np.arange(n) if times is None else np.asarray(times, dtype=float)
    kw = dict(min_temperature_span=min_temperature_span, min_concentration_span=min_concentration_span,
              identifiable_k=identifiable_k, rates_ok=rates_ok, with_activity=bool(catalysed))

    def problem(method, holds=None):
        params = _layout(laws, method, charges, fresh, spans, t_star, **kw)
        for p in params:
            if holds and (p.reaction, p.name) in holds and not p.held:
                p.held = holds[(p.reaction, p.name)]
        return _Problem(params, laws, rates, conc, temperature, tos_days, charge, catalysed, method, t_star)

    def solve(prob):
        th0 = np.array([p.value for p in prob.params])
        free = [i for i, p in enumerate(prob.params) if not p.held]
        return _fit(prob, th0, free) + (free,)

    # stage 1: weights of each reaction from an unweighted fit with the first family
    first = problem(methods[0])
    th, _, _, _ = solve(first)
    sigma = {}
    for rid, e in first.by_reaction(th).items():
        dof = max(e.size - sum(1 for p in first.params if p.reaction == rid and not p.held), 1)
        sigma[rid] = max(float(np.sqrt(e @ e / dof)), 1e-6) if e.size else 1.0
    # the first fit's residual autocorrelation sets the overdispersion c of the quasi-likelihood
    # criterion QAICc (Burnham & Anderson 2002, sec. 6.2): autocorrelated residuals would otherwise
    # favour the family with more parameters
    e1 = first.by_reaction(th)
    c_hat, _ = (1.0, 0.0) if not serial_correlation else _inflation({r: e / sigma[r] for r, e in e1.items()}, {r: order_t[first.rows[r]] for r in e1})
    # stage 2: every family with those weights, chosen by QAICc
    cands, fits = [], {}
    for m in methods:
        prob = problem(m)
        prob.sigma = sigma
        th_m, ssr, jac, free = solve(prob)
        k = len(free) + 1
        nobs = prob.n_obs
        aicc = nobs * np.log(ssr / nobs) / c_hat + 2 * k + (2 * k * (k + 1) / (nobs - k - 1) if nobs - k - 1 > 0 else np.inf)
        fits[m] = (prob, th_m, ssr, free, jac)
        cands.append({"decay_law": m, "aicc": aicc, "parameters": k, "ssr": ssr})
    table = pd.DataFrame(cands).set_index("decay_law")
    table["delta_aicc"] = table["aicc"] - table["aicc"].min()
    close = table[table["delta_aicc"] < 2.0]
    if close.empty:    # too few points for the criterion: every family is as good
        close = table
    # among the families the data cannot tell apart, the fewest parameters, then the order given
    # (exponential first, the usual default; Levenspiel 1999, ch. 21)
    rank = {m: i for i, m in enumerate(methods)}
    chosen = min(close.index, key=lambda m: (close.loc[m, "parameters"], rank[m]))
    rivals = [m for m in close.index if m != chosen]
    # stage 3: profiles, identifiability, refit with what cannot be determined held
    holds: dict = {}
    messages: list[str] = []
    for _round in range(3):
        prob = problem(chosen, holds)
        prob.sigma = sigma
        th, ssr, jac, free = solve(prob)
        resid = prob.by_reaction(th)
        infl, rho = (1.0, 0.0) if not serial_correlation else _inflation({r: e / sigma[r] for r, e in resid.items()},
                               {r: order_t[prob.rows[r]] for r in resid})
        dof = max(prob.n_obs - len(free), 1)
        s2 = ssr / dof
        q = float(stats.t.ppf(0.5 + level / 2, dof))
        thr = q * q * s2 * infl
        cov = s2 * infl * np.linalg.pinv(jac.T @ jac) if jac.size else np.zeros((0, 0))
        consider = _consider_variance(prob, th, free, jac)
        ci, new_holds = {}, {}
        for k_free, i in enumerate(free):
            p = prob.params[i]
            se = float(np.sqrt(max(cov[k_free, k_free], 0.0)))
            lo = _profile_side(prob, th, free, i, ssr, thr, se, -1)
            hi = _profile_side(prob, th, free, i, ssr, thr, se, +1)
            # the held parameters' configured uncertainty widens the interval (in quadrature)
            extra = q * np.sqrt(consider[k_free])
            lo = None if lo is None else th[i] - np.hypot(th[i] - lo, extra)
            hi = None if hi is None else th[i] + np.hypot(hi - th[i], extra)
            ci[i] = (lo, hi, float(np.sqrt(se * se + consider[k_free])))
            if p.kind in ("a0", "decay"):
                continue
            if lo is None or hi is None:
                new_holds[(p.reaction, p.name)] = (f"its profile likelihood does not rise above the {level:.0%} "
                                                   f"threshold {'below' if lo is None else 'above'} the estimate: "
                                                   "the data do not determine it")
            elif np.isfinite(p.u) and (hi - lo) / 2 > 1.96 * p.u and not p.prior:
                new_holds[(p.reaction, p.name)] = ("the data determine it no better than the configured value "
                                                   f"(95 % half-width {_half(p, lo, hi)} against the configured "
                                                   f"{_half(p, p.configured - 1.96 * p.u, p.configured + 1.96 * p.u)})")
        if not new_holds:
            break
        holds.update(new_holds)
    # the rate-law intervals also cover the estimates under the decay families the data cannot tell
    # apart from the chosen one (union with their linearised intervals): the family is uncertain too
    for m in rivals:
        r_prob, r_th, r_ssr, r_free, r_jac = fits[m]
        r_cov = r_ssr / max(r_prob.n_obs - len(r_free), 1) * c_hat * np.linalg.pinv(r_jac.T @ r_jac)
        for k_free, j in enumerate(r_free):
            rp = r_prob.params[j]
            i = prob.index.get((rp.reaction, rp.name))
            if rp.kind in ("a0", "decay") or i is None or i not in ci or prob.params[i].held:
                continue
            lo, hi, se = ci[i]
            half = q * float(np.sqrt(max(r_cov[k_free, k_free], 0.0)))
            lo = None if lo is None else min(lo, r_th[j] - half)
            hi = None if hi is None else max(hi, r_th[j] + half)
            ci[i] = (lo, hi, se)
    rows = []
    for i, p in enumerate(prob.params):
        val = _report(p, th[i])
        if p.held:
            lo_i, hi_i = p.configured - 1.96 * p.u, p.configured + 1.96 * p.u
            se_i = p.u
            status, reason = "held", p.held
            messages.append(f"reaction {p.reaction}: {p.name} held at its configured value: {p.held}")
        else:
            lo_i, hi_i, se_i = ci[i]
            lo_i = p.lower if lo_i is None else lo_i
            hi_i = p.upper if hi_i is None else hi_i
            status = "estimated with prior" if p.prior and np.isfinite(p.u) else "estimated"
            reason = ""
        lo_r, hi_r = sorted((_report(p, lo_i), _report(p, hi_i))) if np.isfinite(lo_i) else (np.nan, np.nan)
        se_r = se_i * val if p.kind in ("k_ref", "adsorption", "a0") else se_i * (_report(p, 1.0) - _report(p, 0.0))
        rows.append({"reaction": p.reaction, "name": p.name, "value": val, "std_error": abs(se_r),
                     "ci_low": lo_r, "ci_high": hi_r, "ci_level": level, "unit_of_measure": _unit(p, laws),
                     "status": status, "reason": reason,
                     "configured": _report(p, p.configured) if np.isfinite(p.configured) else np.nan})
    frame = pd.DataFrame(rows)
    out_laws = {}
    for rid, law in laws.items():
        sel = frame[frame["reaction"] == rid].set_index("name")["value"]
        ads = {sp: float(sel.get(f"K_{sp}", v)) for sp, v in (law.params.get("adsorption") or {}).items()}
        orders = {sp: float(sel.get(f"order_{sp}", v)) for sp, v in law.params["orders"].items()}
        out_laws[rid] = {"k_ref": float(sel["k_ref"]), "activation_energy": float(sel["activation_energy"]),
                         "adsorption": ads, "orders": orders}
    if infl > 1.0:
        messages.append(f"residuals are autocorrelated (lag-1 {rho:.2f}): intervals widened by "
                        f"{np.sqrt(infl):.2f}x for the effective sample size")
    activity = np.exp(prob.ln_activity(th))
    return Calibration(frame, out_laws, chosen, table, messages, n, infl,
                       {r: float(np.std(e)) for r, e in resid.items()}, activity)


def _half(p: _P, lo: float, hi: float) -> str:
    """A 95 % half-width in words, in the parameter's usual unit."""
    if p.kind in ("k_ref", "adsorption"):
        return f"x/{np.exp((hi - lo) / 2):.2f}"
    if p.kind == "activation_energy":
        return f"{(hi - lo) / 2 * _EA / 1e3:.1f} kJ/mol"
    return f"{(hi - lo) / 2:.3g}"
