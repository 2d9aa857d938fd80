"""Reconciliation step of the daily check: one unit's role frame through :mod:`kinetrace.reconcile`.

The measured flows and concentrations of every grid interval are adjusted, by weighted
least squares, to the most probable values that satisfy the component balances of the
configured reactions and the volume balance (Kuehn & Davidson 1961; the bilinear
flow x concentration case by successive linearisation, Crowe 1986), with the extents of
reaction as unmeasured unknowns. The accumulation terms ``d(V C_i)/dt`` of the measured
species and ``dV/dt`` come from Savitzky-Golay derivatives of the interval means, so that
transients do not read as imbalance.

Uncertainties: each role's standard deviation is the configured per-reading uncertainty
of its tag(s) (``sigma:<role>`` of the role frame), used as is for interval means. That is
conservative for the random part (averaging shrinks it) and right for the calibration part
(averaging does not); the chi-square statistics are therefore on the lenient side, and
``sigma_source`` says "config".

Outputs, on the grid:

* ``closure:<balance>`` relative imbalance of each raw balance (species balances over the
  species' flow scale, volume over the flow) [-], and ``closure_z:<balance>`` the same
  over its expected standard deviation [-];
* ``global_test`` the chi-square statistic of the step and ``global_test_dof`` [-], after any
  faulty sensor is set aside; ``global_test_raw`` the statistic with every sensor [-];
* ``reconciled:<role>`` the reconciled value of each measured role [SI];
* ``adjust_z:<role>`` standardised adjustment of each measured role [-];
* ``reconciled_ok`` 1 where the step converged with every extent observable [-].

Persistent sensor biases come out as :class:`SensorFault` records (robust CUSUM on the
standardised adjustments; see :func:`kinetrace.reconcile.detect_persistent_bias`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..config import UnitModel
from ..errors import KinetraceError
from ..reconcile import detect_persistent_bias, global_test, reconcile_cstr
from ..reconcile import UnobservableError
from ..reconcile.analyzer_bias import DRIFT_MARGIN
from ..reconcile.ramp_step import glr_step_ramp
from ..reconcile.serial_error import location_standard_error
from .backcalc import _utc
from .derivatives import smoothed_derivative
from .fault_history import continuing, whole_event_size
from .roles import role_column


@dataclass(frozen=True)
class SensorFault:
    """A persistent bias found on a measured quantity of a unit."""

    role: str                     # role column, e.g. "feed_flow"
    tags: tuple[str, ...]         # the tags that measure it
    onset: pd.Timestamp
    alarm: pd.Timestamp
    end: pd.Timestamp
    magnitude: float              # mean bias over the event [SI of the role]
    relative: float               # magnitude over the mean reconciled value [-]
    magnitude_sd: float
    equivalent: tuple[str, ...] = field(default_factory=tuple)   # other roles the data cannot tell apart
    alternatives: dict = field(default_factory=dict)             # role -> relative bias if that one is wrong
    ambiguous: bool = False       # a lab result or feed specification explains the data as well
    variable: str = ""            # name in the reconciliation vector
    onset_index: int = -1
    end_index: int = -1
    kind: str = "step"            # "step" (a constant bias from the onset) or "drift" (growing)
    rate: float = float("nan")    # drift rate, relative [1/d]
    rate_sd: float = float("nan")
    source: str = "balances"      # "balances" or "lab" (the analyzer against the lab results)
    last_check: pd.Timestamp | None = None   # the last lab result compared with the analyzer [UTC]

    def evidence(self) -> str:
        """Plain-language description of the fault."""
        if self.source == "lab":
            return analyzer_words(self)
        direction = "high" if self.magnitude > 0 else "low"
        rel_sd = abs(self.magnitude_sd / self.magnitude * self.relative) if self.magnitude else float("nan")
        # the 95 % interval, and the size given to the precision that interval allows
        half = 196.0 * rel_sd
        dec = int(min(3, max(1, -np.floor(np.log10(half))))) if np.isfinite(half) and half > 0 else 1
        text = (f"{self.role} ({', '.join(self.tags)}) reads {direction} by {abs(self.relative) * 100:.{dec}f} % "
                f"(95 % interval +/- {half:.{dec}f} %) since about {self.onset:%Y-%m-%d %H:%M} UTC; "
                f"alarm raised {self.alarm:%Y-%m-%d %H:%M} UTC.")
        if self.kind == "drift" and np.isfinite(self.rate):
            text += (f" The balances show it growing by about {100 * self.rate:+.2f} % a day "
                     f"(95 % interval +/- {196 * self.rate_sd:.2f} %), a drift rather than a step.")
        if self.ambiguous:
            alts = "; ".join(f"{r} {'high' if v > 0 else 'low'} by {abs(v) * 100:.1f} %" for r, v in self.alternatives.items())
            return text + (f" A lab result or a feed specification explains the balances as well ({alts}); "
                           "no sensor was set aside. Check the sensor and the feed composition.")
        if self.alternatives:
            alts = "; ".join(f"{r} {'high' if v > 0 else 'low'} by {abs(v) * 100:.1f} %" for r, v in self.alternatives.items())
            text += (f" The balances alone cannot tell it apart from: {alts}; it is named because its own "
                     "reading stepped at the onset. Check against an independent reference (a calibration, "
                     "a tank dip, a lab sample) before acting.")
        return text


def analyzer_words(f: SensorFault) -> str:
    """Words of an analyzer fault found against the lab (``source == "lab"``).

    >>> f = SensorFault("outlet_conc:P", ("AI-7",), pd.Timestamp("2027-03-09T00:00Z"),
    ...                 pd.Timestamp("2027-03-11T16:00Z"), pd.Timestamp("2027-03-12T12:00Z"), 19.0, 0.019,
    ...                 1.5, kind="drift", rate=0.0049, rate_sd=0.0006, source="lab",
    ...                 last_check=pd.Timestamp("2027-03-12T12:20Z"))
    >>> print(f.evidence())  # doctest: +NORMALIZE_WHITESPACE
    analyzer AI-7 (outlet_conc:P) reads about +1.9 %, growing about +0.49 % a day (95 % interval
    +/- 0.12) since 2027-03-09; last lab check 2027-03-12 12:20 UTC. Its readings are corrected by
    the tracked bias until it is recalibrated. Take a lab check or recalibrate the analyzer.
    """
    tags = ", ".join(f.tags)
    text = f"analyzer {tags} ({f.role}) reads about {100 * f.relative:+.1f} %"
    if f.kind == "drift":
        text += (f", growing about {100 * f.rate:+.2f} % a day (95 % interval +/- {196 * f.rate_sd:.2f})"
                 f" since {f.onset:%Y-%m-%d}")
    else:
        text += (f" (95 % interval +/- {196 * abs(f.magnitude_sd / f.magnitude * f.relative):.1f} %), "
                 f"a step since about {f.onset:%Y-%m-%d %H:%M} UTC" if f.magnitude else "")
    if f.last_check is not None:
        text += f"; last lab check {f.last_check:%Y-%m-%d %H:%M} UTC"
    return text + (". Its readings are corrected by the tracked bias until it is recalibrated. "
                   "Take a lab check or recalibrate the analyzer.")


@dataclass
class ReconcileOutput:
    """Reconciliation of one unit over the grid."""

    frame: pd.DataFrame           # the columns listed in the module docstring
    roles: pd.DataFrame           # the role frame with reconciled values in place of the measured ones
    faults: list[SensorFault]
    sigma_source: str = "config"


def _data_sigmas(roles: pd.DataFrame, model: UnitModel, steady: np.ndarray) -> tuple[pd.DataFrame, str]:
    """Replace the sigma of online roles by one estimated from their steady stretches."""
    from ..reconcile import estimate_sigma

    online = {_role_of_tag(t) for t in model.tags if t.sampling != "lab"}
    out = roles.copy()
    used = []
    for col in sorted(online):
        if col not in roles or f"sigma:{col}" not in roles:
            continue
        y = roles[col].to_numpy(dtype=float)
        try:
            est = estimate_sigma(y, steady, method="successive_difference")
        except (ValueError, KinetraceError):
            continue
        level = np.nanmedian(np.abs(y[steady])) if steady.any() else np.nan
        rel = float(np.asarray(est.sigma).ravel()[0]) / level if level and np.isfinite(level) else np.nan
        if not np.isfinite(rel) or rel <= 0:
            continue
        # never below a tenth of the configured per-reading uncertainty (calibration does not average out)
        cfg_sig = roles[f"sigma:{col}"].to_numpy(dtype=float)
        new = np.maximum(rel * np.abs(y), 0.1 * cfg_sig)
        out[f"sigma:{col}"] = np.where(np.isfinite(new), new, cfg_sig)
        used.append(f"{col} {100 * rel:.2f} %")
    source = ("estimated from steady stretches (successive differences) for " + ", ".join(used)
              + "; configured for the rest") if used else "config"
    return out, source


def _matrix(roles: pd.DataFrame, model: UnitModel, prefix: str) -> np.ndarray:
    cols = [role_column(prefix, sp) for sp in model.species]
    return np.column_stack([roles[c].to_numpy(dtype=float) if c in roles else np.full(len(roles), np.nan)
                            for c in cols])


def packed_correlations(model: UnitModel) -> dict | None:
    """Correlations of ``[[units.correlations]]`` as pairs of the CSTR reconciliation's variables
    (``q_in``, ``q_out``, ``c_in[<sp>]``, ``c_out[<sp>]``); the load checks that each tag is the
    only one of its role, so the role's value is that tag's reading. [-]"""
    side = {"feed_flow": "q_in", "outlet_flow": "q_out", "feed_conc": "c_in", "outlet_conc": "c_out"}
    tags = {t.tag: t for t in model.tags}

    def var(name):
        t = tags[name]
        return side[t.role] if t.species is None else f"{side[t.role]}[{t.species}]"

    pairs = {(var(a), var(b)): rho for a, b, rho in model.correlations}
    return pairs or None


def reconcile_unit(roles: pd.DataFrame, model: UnitModel, *, derivative_window: int = 5,
                   min_fault_duration: str | None = None, fault_allowance: float = 1.0,
                   fault_threshold: float = 5.0, sigma: str = "data", steady=None,
                   known_faults=()) -> ReconcileOutput:
    """Reconcile one unit's role frame; see the module docstring for the outputs.

    Parameters
    ----------
    roles : DataFrame
        Role frame (:func:`kinetrace.pipeline.roles.role_frame`) on a regular grid. [SI]
    model : UnitModel
        The unit.
    derivative_window : int
        Savitzky-Golay window of the accumulation terms. [grid steps]
    min_fault_duration : str, optional
        Shortest onset-to-peak duration of a persistent bias. [pandas time span] Default:
        6 h more than the longest ``max_age`` of the unit's lab tags, so that one lab
        sample, carried forward for many intervals, can never make an event by itself.
    sigma : {"data", "config"}
        ``"config"``: every role's configured per-reading uncertainty, used as is.
        ``"data"``: for roles read online, the standard deviation of the interval means
        estimated from the data by the mean square successive difference over steady
        stretches (von Neumann et al. 1941; Narasimhan & Jordache 2000, Ch. 2), as a
        fraction of the value; lab results and feed specifications keep the configured one.
        Interval means of a 1-minute signal are far less noisy than one reading, so the
        configured value would let the lab and the specifications dominate the balances.
    steady : Series of bool, optional
        Steady rows, for ``sigma="data"``; required then.
    fault_allowance, fault_threshold : float
        CUSUM allowance k and decision interval h on the standardised adjustments. [-]
        k = 1 aims at shifts of about 2 standard deviations: hourly means of a slowly
        wandering process are autocorrelated, and a smaller allowance turns the wander of
        an unanalysed feed into false "biases".
    known_faults : sequence of KnownFault
        Open sensor alarms of the store detected before the window
        (:mod:`kinetrace.pipeline.fault_history`): a fault under way when the window opens is
        put on the sensor an open alarm of the same sign names, with that alarm's onset and
        detection time.

    Returns
    -------
    ReconcileOutput
    """
    idx = roles.index
    n = len(idx)
    sigma_source = "config"
    if sigma == "data":
        if steady is None:
            raise ValueError("sigma='data' needs the steady rows (steady=...)")
        roles, sigma_source = _data_sigmas(roles, model, np.asarray(steady, dtype=bool))
    elif sigma != "config":
        raise ValueError(f"unknown sigma source {sigma!r}; allowed: 'data', 'config'")
    dt = float((idx[1] - idx[0]).total_seconds()) if n > 1 else 3600.0
    q_in = roles["feed_flow"].to_numpy(dtype=float)
    q_out = roles["outlet_flow"].to_numpy(dtype=float)
    c_in = _matrix(roles, model, "feed_conc")
    c_out = _matrix(roles, model, "outlet_conc")
    s_cin = _matrix(roles, model, "sigma:feed_conc")
    s_cout = _matrix(roles, model, "sigma:outlet_conc")
    s_cin = np.where(np.isfinite(s_cin), s_cin, 0.0)
    s_cout = np.where(np.isfinite(s_cout), s_cout, 0.0)
    vol = roles["volume"].to_numpy(dtype=float)
    moles = vol[:, None] * c_out
    acc = np.nan_to_num(smoothed_derivative(moles, dt, derivative_window))     # d(V C)/dt, 0 where unknown
    variable_volume = model.fixed_volume is None
    dvdt = smoothed_derivative(vol, dt, derivative_window) if variable_volume else None
    if dvdt is not None:
        sig_level = roles["sigma:level"].to_numpy(dtype=float) if "sigma:level" in roles else np.full(n, 0.005)
        # dV/dt from a smoothed level: its sigma ~ sigma_V * sqrt(12 / (w (w^2 - 1))) / dt for a
        # least-squares slope over w points (Draper & Smith 1998, slope variance)
        w = derivative_window
        # sigma_V: the level's sigma [SI level unit] times the table's mean slope [m3 per SI level unit]
        # (the volume span for a table over 0-100 %), or a volume transmitter's own sigma [m3]
        tab = model.level_table
        lspan = float(tab[-1, 0] - tab[0, 0]) if tab is not None and len(tab) > 1 else 0.0
        if lspan <= 0 and "sigma:volume" in roles:
            sig_v = roles["sigma:volume"].to_numpy(dtype=float)
        else:
            sig_v = sig_level * ((tab[-1, 1] - tab[0, 1]) / lspan if lspan > 0 else 1.0)
        sigma_dvdt = np.nan_to_num(sig_v * np.sqrt(12.0 / (w * (w * w - 1))) / dt, nan=1e-6)
    else:
        sigma_dvdt = 0.0
    kwargs = dict(
        sigma_q_in=np.nan_to_num(roles["sigma:feed_flow"].to_numpy(dtype=float), nan=1e-9),
        sigma_q_out=np.nan_to_num(roles["sigma:outlet_flow"].to_numpy(dtype=float), nan=1e-9),
        sigma_c_in=s_cin, sigma_c_out=s_cout, sigma_dvdt=sigma_dvdt)
    inputs = dict(q_in=q_in, q_out=q_out, c_in=c_in, c_out=c_out, dvdt=dvdt, accumulation=acc)
    correlation = packed_correlations(model)   # [[units.correlations]]; None: independent errors

    def solve(rows=slice(None), drop: str | None = None):
        """Reconcile the given rows, optionally with one variable treated as unmeasured."""
        arr = {k: (None if v is None else np.array(v[rows], dtype=float)) for k, v in inputs.items()}
        sig = {k: (v[rows] if np.ndim(v) else v) for k, v in kwargs.items()}
        if drop is not None:
            if drop in ("q_in", "q_out"):
                arr[drop][:] = np.nan
            else:                                            # "c_in[<sp>]" or "c_out[<sp>]"
                side, sp = drop[:-1].split("[")
                arr[side][:, model.species.index(sp)] = np.nan
        return reconcile_cstr(arr["q_in"], arr["q_out"], arr["c_in"], arr["c_out"], model.nu,
                              dvdt=arr["dvdt"], accumulation=arr["accumulation"], species=model.species,
                              reactions=model.reaction_ids, sigma_source=sigma_source,
                              correlation=correlation, **sig)

    res = solve()
    out = pd.DataFrame(index=idx)
    names = list(res.names)
    for j, cname in enumerate(res.constraint_names):
        label = cname.replace("balance[", "").replace("]", "")
        out[f"closure:{label}"] = res.relative_imbalance[:, j]
        out[f"closure_z:{label}"] = res.standardized_imbalance[:, j]
    g = global_test(res)
    out["global_test"] = res.objective
    out["global_test_dof"] = res.dof
    out["global_test_alarm"] = np.asarray(g.reject, dtype=float)
    out["global_test_raw"] = out["global_test"]
    role_of = {"q_in": "feed_flow", "q_out": "outlet_flow", "dvdt": "dvdt"}
    for sp in model.species:
        role_of[f"c_in[{sp}]"] = role_column("feed_conc", sp)
        role_of[f"c_out[{sp}]"] = role_column("outlet_conc", sp)
    ok = res.converged & np.isfinite(res.z).all(axis=1)
    out["reconciled_ok"] = ok.astype(float)
    for j, rid in enumerate(model.reaction_ids):
        out[f"extent:{rid}"] = np.where(ok, res.z[:, j], np.nan)
        out[f"extent_sd:{rid}"] = np.where(ok, np.sqrt(np.clip(res.var_z[:, j], 0.0, None)), np.nan)
    rec_roles = roles.copy()
    for j, name in enumerate(names):
        role = role_of[name]
        if role == "dvdt" or role not in roles:
            continue
        measured = res.measured[:, j] if res.measured.ndim == 2 else np.full(n, bool(res.measured[j]))
        out[f"reconciled:{role}"] = np.where(ok, res.x[:, j], np.nan)
        out[f"sd:{role}"] = np.where(ok, np.sqrt(np.clip(res.var_x[:, j], 0.0, None)), np.nan)
        out[f"adjust_z:{role}"] = np.where(ok & measured, res.standardized_adjustment[:, j], np.nan)
        rec_roles[role] = np.where(ok, res.x[:, j], roles[role].to_numpy(dtype=float))
    # unmeasured outlet species that the balances determine are filled in as well
    for i, sp in enumerate(model.species):
        col = role_column("outlet_conc", sp)
        if col not in roles:
            jj = names.index(f"c_out[{sp}]")
            est = res.x[:, jj]
            if np.isfinite(est).any():
                rec_roles[col] = np.where(ok, est, np.nan)
                out[f"reconciled:{col}"] = np.where(ok, est, np.nan)
                out[f"sd:{col}"] = np.where(ok, np.sqrt(np.clip(res.var_x[:, jj], 0.0, None)), np.nan)
    if min_fault_duration is None:
        ages = [t.max_age for t in model.tags if t.sampling == "lab" and t.max_age]
        min_fault_duration = pd.Timedelta(seconds=max(ages, default=0.0)) + pd.Timedelta("6h")
    faults = _faults(res, solve, idx, names, role_of, model, min_fault_duration, fault_allowance, fault_threshold,
                     known=known_faults)
    # serial elimination over each fault's window: the faulty sensor is set aside and the rest
    # reconciled again, so the reconciled values no longer carry its bias
    out["sensor_excluded"] = 0.0
    for f in faults:
        if f.ambiguous:
            continue
        rows = slice(f.onset_index, f.end_index + 1)
        again = solve(rows, drop=f.variable)
        good = again.converged & np.isfinite(again.z).all(axis=1)
        pos = np.arange(n)[rows][good]
        for j, name in enumerate(names):
            role = role_of[name]
            if role == "dvdt" or f"reconciled:{role}" not in out:
                continue
            out.iloc[pos, out.columns.get_loc(f"reconciled:{role}")] = again.x[good, j]
            rec_roles.iloc[pos, rec_roles.columns.get_loc(role)] = again.x[good, j]
        out.iloc[pos, out.columns.get_loc("sensor_excluded")] = 1.0
        # the global test after the faulty sensor is set aside (global_test_raw keeps the one before)
        g2 = global_test(again)
        out.iloc[pos, out.columns.get_loc("global_test")] = again.objective[good]
        out.iloc[pos, out.columns.get_loc("global_test_dof")] = again.dof[good]
        out.iloc[pos, out.columns.get_loc("global_test_alarm")] = np.asarray(g2.reject, dtype=float)[good]
    return ReconcileOutput(out, rec_roles, faults, sigma_source=sigma_source)


def _faults(res, solve, idx, names, role_of, model, min_duration, k, h, known=()) -> list[SensorFault]:
    # every measured quantity takes part (online tags, lab results, feed specifications), but
    # only a quantity read online can be named a sensor fault: a lab result is one sample, and
    # a specification is no sensor. Where a specification or a lab result explains the data as
    # well as a sensor does, the fault is reported as ambiguous and nothing is set aside.
    online = {_role_of_tag(t) for t in model.tags if t.sampling != "lab"}
    watched = [nm for j, nm in enumerate(names)
               if role_of[nm] != "dvdt" and np.any(res.measured[:, j] if res.measured.ndim == 2 else res.measured[j])]
    events = detect_persistent_bias(res, idx.to_numpy(), sensors=watched, k=k, h=h,
                                    min_duration=np.timedelta64(pd.Timedelta(min_duration)))
    faults = []
    for ev in events:
        if not ev.primary:
            continue
        rows = slice(ev.onset_index, ev.end_index + 1)
        candidates = [ev.sensor] + [e for e in ev.equivalent if e in watched]
        sensors = [c for c in candidates if role_of[c] in online]
        if not sensors:
            continue
        estimates = {}
        for cand in candidates:
            # bias under the hypothesis that this one alone is wrong: its reading minus the value
            # the other measurements and the balances give for it (measurement elimination,
            # Narasimhan & Jordache 2000, Ch. 8)
            j = names.index(cand)
            other = solve(rows, drop=cand)
            y = res.x[rows, j] - res.adjustment[rows, j]
            diff = y - other.x[:, j]
            ok = np.isfinite(diff) & other.converged
            if ok.sum() < 2:
                continue
            # per hour as a fraction of the value the others give (a meter's gain error is a
            # fraction of its reading; a ratio of medians would mix in the process's own swings);
            # median, not mean: an hour whose level derivative is poor can give a wild estimate;
            # its standard error from the MAD, widened for the hours' serial correlation (effective
            # sample size; kinetrace.reconcile.serial_error)
            with np.errstate(divide="ignore", invalid="ignore"):
                rel = diff / other.x[:, j]
            ok &= np.isfinite(rel)
            if ok.sum() < 2:
                continue
            scale = float(np.median(np.abs(other.x[ok, j])))
            estimates[cand] = (float(np.median(rel[ok])) * scale, location_standard_error(rel[ok], "median") * scale,
                               scale)
        sensors = [c for c in sensors if c in estimates]
        if not sensors:
            continue
        # a fault under way when the window opens continues an open stored alarm of the same sign
        prior = continuing(known, sensors, lambda c: ", ".join(
            t.tag for t in model.tags if _role_of_tag(t) == role_of[c]) or role_of[c], estimates, ev.onset_index)
        chosen = prior[0] if prior else _which_moved(res, names, sensors, estimates, ev.onset_index, idx)
        onset, alarm = (prior[1].onset, prior[1].detected) if prior else (_utc(ev.onset_time), _utc(ev.alarm_time))
        mag, sd, scale = estimates[chosen]
        if prior and scale:   # the size since the stored onset: the stored part and the window's
            rel, rel_sd = whole_event_size(prior[1], mag / scale, sd / scale, ev.end_index - ev.onset_index + 1,
                                           idx[0], (idx[1] - idx[0]).total_seconds() if len(idx) > 1 else 3600.0)
            mag, sd = rel * scale, rel_sd * scale
        role = role_of[chosen]
        kind, rate, rate_sd, drift_onset = _step_or_drift(res, solve, idx, names, chosen, ev.onset_index, ev.end_index)
        if drift_onset is not None and not prior:   # a drift began before the CUSUM's step onset
            onset = _utc(idx[drift_onset])
        others = [e for e in candidates if e != chosen and e in estimates]
        ambiguous = any(role_of[e] not in online for e in others)
        faults.append(SensorFault(
            role=role, tags=tuple(t.tag for t in model.tags if _role_of_tag(t) == role),
            onset=min(onset, alarm), alarm=alarm, end=_utc(ev.end_time),
            magnitude=mag, relative=mag / scale if scale else float("nan"), magnitude_sd=sd,
            equivalent=tuple(role_of[e] for e in others),
            alternatives={_describe(role_of[e], model): estimates[e][0] / estimates[e][2] for e in others},
            variable=chosen, onset_index=int(ev.onset_index), end_index=int(ev.end_index),
            ambiguous=ambiguous, kind=kind, rate=rate, rate_sd=rate_sd))
    return faults


#: Hours before a balance fault's onset taken as its in-control reference. [grid steps]
_BASELINE_STEPS = 48


def _step_or_drift(res, solve, idx, names, chosen, a, b):
    """A balance fault told a step or a drift: GLR of a step and of a ramp (Basseville & Nikiforov
    1993; :func:`kinetrace.reconcile.ramp_step.glr_step_ramp`) on the sensor's relative difference
    from the value the other measurements and the balances give for it, from ``_BASELINE_STEPS``
    before the onset to the event's end (a near-tie goes to the drift, as for the lab comparison).

    Returns (kind, rate [1/d], rate_sd [1/d], onset row of a drift or None).
    """
    lo = max(0, a - _BASELINE_STEPS)
    rows = slice(lo, b + 1)
    j = names.index(chosen)
    other = solve(rows, drop=chosen)
    y = res.x[rows, j] - res.adjustment[rows, j]
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = (y - other.x[:, j]) / other.x[:, j]
    ok = np.isfinite(rel) & np.asarray(other.converged, dtype=bool)
    if ok.sum() < 8:
        return "step", float("nan"), float("nan"), None
    pre = rel[: a - lo][ok[: a - lo]]
    base = float(np.median(pre)) if pre.size >= 6 else 0.0
    d = np.diff(rel[ok])
    spread = 1.4826 * float(np.median(np.abs(d - np.median(d)))) / np.sqrt(2.0)
    if not spread > 0:
        return "step", float("nan"), float("nan"), None
    u = np.where(ok, (rel - base) / spread, np.nan)
    t = (idx[rows].as_unit("ns").asi8 / 1e9) / 86400.0
    n = u.size - 1
    g = glr_step_ramp(u, t, window=u.size, ends=[n])   # the whole record, judged at its end
    if not (g.ramp[0] + DRIFT_MARGIN > g.step[0]):
        return "step", float("nan"), float("nan"), None
    m = int(g.ramp_onset[0])
    tau = t[m - 1] if m > 0 else t[0]
    x = (t - tau)[m:][ok[m:]]
    resid = (u[m:][ok[m:]] - g.ramp_rate[0] * x)
    # hourly differences are serially correlated: the slope's standard error is widened by the
    # AR(1) effective sample size (common practice, no source)
    rho = float(np.clip(np.corrcoef(resid[:-1], resid[1:])[0, 1], 0.0, 0.95)) if resid.size > 3 else 0.0
    rate_sd = spread / np.sqrt(float((x * x).sum())) * np.sqrt((1 + rho) / (1 - rho))
    rate = float(g.ramp_rate[0]) * spread
    if abs(rate) < 3.0 * rate_sd:
        return "step", float("nan"), float("nan"), None
    return "drift", rate, float(rate_sd), lo + max(m - 1, 0)


def _describe(role: str, model: UnitModel) -> str:
    """A role with what stands behind it: its tags, or "specification" for a configured feed value."""
    tags = [t.tag for t in model.tags if _role_of_tag(t) == role]
    return f"{role} ({', '.join(tags)})" if tags else f"{role} (specification)"


def _which_moved(res, names, candidates, estimates, onset: int, idx, span: int = 6) -> str:
    """Of sensors the balances cannot tell apart, the one whose own reading stepped at the onset.

    A bias that appears at a moment shows as a step of about its size in the faulty sensor's
    reading, and in no other, unless the process moved at that moment too. Each candidate's
    reading is compared over ``span`` intervals before and after the onset (medians); the one
    whose step is closest to its own bias estimate is chosen. Common practice (no source): a
    check an engineer makes by eye on the trends; ties keep the detector's choice.
    """
    if len(candidates) == 1 or onset < span or onset + span > len(idx):
        return candidates[0]
    best, score = candidates[0], np.inf
    for cand in candidates:
        if cand not in estimates:
            continue
        j = names.index(cand)
        y = res.x[:, j] - res.adjustment[:, j]
        before, after = np.nanmedian(y[onset - span:onset]), np.nanmedian(y[onset:onset + span])
        bias = estimates[cand][0]
        sc = abs((after - before) - bias) / abs(bias) if bias else np.inf
        if sc < score - 1e-9:
            best, score = cand, sc
    return best


def _role_of_tag(tag) -> str:
    return role_column(tag.role, tag.species)


__all__ = ["reconcile_unit", "ReconcileOutput", "SensorFault", "UnobservableError"]
