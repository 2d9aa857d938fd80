"""Dynamic CSTR balances, integrated piecewise between operating events.

States: moles held of each species ``n_i = V C_i``, liquid volume ``V``, the
integral term of the level controller, and (for exact balance checks) the
cumulative moles fed, withdrawn and the extent of each reaction:

    d(V C_i)/dt = Q_in C_i,in(t) - Q_out C_i + V sum_j nu_ij r_j
    dV/dt       = Q_in - Q_out

A level-controlled unit draws ``Q_out = max(0, Kc (V - V_sp) + I)``,
``dI/dt = (Kc / tau_I) (V - V_sp)`` (PI; ``tau_I = inf`` gives proportional
control about the initial bias); an overflow unit of fixed volume has
``Q_out = Q_in``. The reactor temperature is an input trajectory: within a
segment it follows the set point with a first-order lag,
``T(t) = T_sp + (T_0 - T_sp) exp(-(t - t_0)/tau_T)``. Catalyst activity decays
as ``a(t) = exp(-kd t)``.

Each segment (constant feed rate and set points) is one ``scipy.integrate.solve_ivp``
call with a stiff-capable method, so that step changes never sit inside a step.

References
----------
.. [1] Fogler, H. S. (2016). Elements of Chemical Reaction Engineering, 5th ed.,
   ch. 1 (general mole balance) and ch. 5 (CSTR design equation).
.. [2] Levenspiel, O. (1999). Chemical Reaction Engineering, 3rd ed. Wiley,
   ch. 5 (mixed flow reactor) and ch. 21 (deactivating catalysts, a = exp(-kd t)).
.. [3] Seborg, D. E., Edgar, T. F., Mellichamp, D. A. (2011). Process Dynamics and
   Control, 3rd ed. Wiley, ch. 8 (PI control) and ch. 11 (level control).
.. [4] Petzold, L. (1983). Automatic selection of methods for solving stiff and nonstiff
   systems of ordinary differential equations. SIAM J. Sci. Stat. Comput. 4, 136-148 (LSODA).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.integrate import solve_ivp
from scipy.interpolate import CubicSpline

from ..errors import KinetraceError
from .ratelaws import Kinetics

_METHODS = ("LSODA", "BDF", "Radau")


def list_integrators() -> tuple[str, ...]:
    """Stiff-capable ``solve_ivp`` methods the simulator accepts.

    >>> list_integrators()
    ('LSODA', 'BDF', 'Radau')
    """
    return _METHODS


@dataclass(frozen=True)
class Segment:
    """An interval of constant feed rate and set points.

    Attributes
    ----------
    start, end : float
        Interval [start, end) from the run start. [s]
    feed_flow : float
        Feed rate. [m^3/s]
    temperature_setpoint : float
        [K]
    volume_setpoint : float or None
        Level controller set point as a volume (None for an overflow unit). [m^3]
    manual_outlet : float or None
        Level controller in manual with this outlet flow (e.g. 0: outlet closed while the unit is
        stopped); its integral term is held, and re-set for a bumpless return to auto. [m^3/s]
    """

    start: float
    end: float
    feed_flow: float
    temperature_setpoint: float
    volume_setpoint: float | None = None
    manual_outlet: float | None = None


@dataclass(frozen=True)
class LevelControl:
    """PI level controller acting on the outlet flow.

    Attributes
    ----------
    gain : float
        Kc, outlet flow per volume error. [1/s]
    integral_time : float
        tau_I; ``math.inf`` for proportional-only. [s]
    """

    gain: float
    integral_time: float = math.inf


@dataclass(frozen=True)
class FeedProfile:
    """Feed concentrations over time: a cubic spline through equally spaced knots (C2-smooth, so
    the integrator takes long steps through the wander; a linear join would put a kink at every knot).

    Attributes
    ----------
    spacing : float
        Knot spacing. [s]
    coefficients : ndarray (4, K - 1, S)
        Piecewise-polynomial coefficients, highest power first, of each knot interval
        (``scipy.interpolate.CubicSpline.c`` layout). [mol/m^3 / s^p]
    """

    spacing: float
    coefficients: np.ndarray

    @classmethod
    def from_knots(cls, spacing: float, values) -> "FeedProfile":
        """Natural cubic spline through ``values`` (K, S) [mol/m^3] at times ``k * spacing`` [s].

        >>> f = FeedProfile.from_knots(10.0, [[0.0], [10.0], [20.0]])
        >>> f.at(15.0).round(9).tolist()
        [15.0]
        """
        values = np.asarray(values, dtype=float)
        knots = np.arange(len(values)) * float(spacing)
        return cls(float(spacing), CubicSpline(knots, values, axis=0, bc_type="natural").c)

    @classmethod
    def constant(cls, conc) -> "FeedProfile":
        """A feed that never changes. ``conc`` [mol/m^3] by species.

        >>> FeedProfile.constant([2.0, 0.0]).at(1e6).tolist()
        [2.0, 0.0]
        """
        c = np.asarray(conc, dtype=float)
        coeffs = np.zeros((4, 1, len(c)))
        coeffs[3, 0] = c
        return cls(math.inf, coeffs)

    def at(self, t: float) -> np.ndarray:
        """Feed concentrations at time ``t`` [s]. [mol/m^3]"""
        c = self.coefficients
        if c.shape[1] == 1 and not math.isfinite(self.spacing):
            return c[3, 0]
        k = min(max(int(t // self.spacing), 0), c.shape[1] - 1)
        w = t - k * self.spacing
        return ((c[0, k] * w + c[1, k]) * w + c[2, k]) * w + c[3, k]

    def on_grid(self, t) -> np.ndarray:
        """Feed concentrations at an array of times [s], shape (N, S). [mol/m^3]"""
        t = np.asarray(t, dtype=float)
        c = self.coefficients
        if not math.isfinite(self.spacing):
            return np.broadcast_to(c[3, 0], (len(t), c.shape[2])).copy()
        k = np.clip((t // self.spacing).astype(int), 0, c.shape[1] - 1)
        w = (t - k * self.spacing)[:, None]
        return ((c[0, k] * w + c[1, k]) * w + c[2, k]) * w + c[3, k]


@dataclass
class CstrRun:
    """Integrated trajectory on the output grid (all SI).

    Attributes
    ----------
    t : (N,) [s]; moles : (N, S) [mol]; volume : (N,) [m^3]; feed_flow, outlet_flow : (N,) [m^3/s];
    temperature, temperature_setpoint : (N,) [K]; activity : (N,) [-];
    fed, withdrawn : (N, S) cumulative moles since t[0] [mol]; extent : (N, R) cumulative extent [mol];
    final_state : state vector after the last segment; n_rhs : right-hand-side evaluations.
    """

    t: np.ndarray
    moles: np.ndarray
    volume: np.ndarray
    feed_flow: np.ndarray
    outlet_flow: np.ndarray
    temperature: np.ndarray
    temperature_setpoint: np.ndarray
    activity: np.ndarray
    fed: np.ndarray
    withdrawn: np.ndarray
    extent: np.ndarray
    final_state: np.ndarray
    n_rhs: int

    @property
    def conc(self) -> np.ndarray:
        """Concentrations C_i = n_i / V. [mol/m^3], shape (N, S)"""
        return self.moles / self.volume[:, None]


def segment_temperatures(segments, initial_temperature: float, time_constant: float) -> list[float]:
    """Reactor temperature at the start of each segment under the first-order lag. [K]

    Parameters
    ----------
    segments : list of Segment
    initial_temperature : float
        [K]
    time_constant : float
        tau_T of the temperature response. [s]

    >>> segs = [Segment(0, 3600, 0.0, 350.0), Segment(3600, 7200, 0.0, 340.0)]
    >>> [round(x, 3) for x in segment_temperatures(segs, 340.0, 3600.0)]
    [340.0, 346.321]
    """
    out, temp = [], float(initial_temperature)
    for seg in segments:
        out.append(temp)
        decay = math.exp(-(seg.end - seg.start) / time_constant) if time_constant > 0 else 0.0
        temp = seg.temperature_setpoint + (temp - seg.temperature_setpoint) * decay
    return out


def integrate_cstr(nu, kinetics: Kinetics, segments, feed: FeedProfile, *, initial_moles, initial_volume,
                   initial_temperature, deactivation_rate=0.0, level_control: LevelControl | None = None,
                   temperature_time_constant=0.0, step=60.0, initial_integral=None, method="LSODA",
                   rtol=1e-8, atol=None) -> CstrRun:
    """Integrate the dynamic CSTR balances over consecutive segments.

    Parameters
    ----------
    nu : array_like (S, R)
        Stoichiometric matrix. [-]
    kinetics : Kinetics
        Rate laws of the reactions, in the same species order.
    segments : list of Segment
        Consecutive, covering the run; ``segments[0].start`` is the first output time.
    feed : FeedProfile
        Feed concentrations over time. [mol/m^3]
    initial_moles : array_like (S,)
        [mol]
    initial_volume : float
        [m^3]
    initial_temperature : float
        [K]
    deactivation_rate : float
        kd of a(t) = exp(-kd t), t from time 0. [1/s]
    level_control : LevelControl, optional
        None for an overflow unit of fixed volume (Q_out = Q_in).
    temperature_time_constant : float
        tau_T of the temperature response to a set-point step (0: immediate). [s]
    step : float
        Output grid spacing. [s]
    initial_integral : float, optional
        Initial integral term (the controller's outlet flow bias); default the first feed rate. [m^3/s]
    method : str
        A ``solve_ivp`` method from :func:`list_integrators`.
    rtol, atol : float
        Tolerances; ``atol`` defaults to ``1e-9`` of the initial holdup scale. [-], [state units]

    Returns
    -------
    CstrRun
        Trajectory on the grid ``segments[0].start + k * step``, ``k`` such that the time is
        before ``segments[-1].end``.

    References
    ----------
    Fogler (2016) ch. 1 and 5; Levenspiel (1999) ch. 21; Petzold (1983); see the module references.

    >>> kin = Kinetics.build(["A", "B"], [("power_law", 1e-3, 0.0, 300.0, {"A": 1}, {}, 1.0)])
    >>> run = integrate_cstr([[-1.0], [1.0]], kin, [Segment(0.0, 60000.0, 1e-3, 300.0)],
    ...                      FeedProfile.constant([1000.0, 0.0]), initial_moles=[0.0, 0.0],
    ...                      initial_volume=1.0, initial_temperature=300.0, step=600.0)
    >>> round(float(run.conc[-1, 0]), 3)   # C0 / (1 + k tau) = 1000 / 2
    500.0
    """
    if method not in _METHODS:
        raise KinetraceError(f"integrator method {method!r} is not available; allowed: {', '.join(_METHODS)}")
    if not segments:
        raise KinetraceError("integrate_cstr needs at least one segment")
    nu = np.asarray(nu, dtype=float)
    ns, nr = nu.shape
    n0 = np.asarray(initial_moles, dtype=float)
    if n0.shape != (ns,) or kinetics.orders.shape != (nr, ns):
        raise KinetraceError(f"shapes disagree: nu {nu.shape}, initial_moles {n0.shape}, "
                             f"kinetics orders {kinetics.orders.shape}")
    for a, b in zip(segments, segments[1:]):
        if a.end != b.start:
            raise KinetraceError(f"segments are not consecutive: one ends at {a.end} s, the next starts at {b.start} s")
    controlled = level_control is not None
    kc = level_control.gain if controlled else 0.0
    ki = kc / level_control.integral_time if controlled else 0.0
    kd = float(deactivation_rate)
    tau_t = float(temperature_time_constant)
    i_v, i_int, i_in, i_out, i_ext = ns, ns + 1, ns + 2, 2 * ns + 2, 3 * ns + 2
    y = np.concatenate([n0, [initial_volume, segments[0].feed_flow if initial_integral is None else initial_integral],
                        np.zeros(2 * ns + nr)])
    if atol is None:
        atol = 1e-9 * max(float(np.abs(n0).max()), float(initial_volume) * 1e3, 1.0)
    t_start = segment_temperatures(segments, initial_temperature, tau_t)
    t0_grid = segments[0].start
    n_total = int(math.ceil((segments[-1].end - t0_grid) / step - 1e-9))
    grid = t0_grid + step * np.arange(n_total)
    states, temps, tsps, n_rhs = [], [], [], 0

    previous_manual = False
    for seg, temp0 in zip(segments, t_start):
        q_in, t_sp, v_sp, ts = seg.feed_flow, seg.temperature_setpoint, seg.volume_setpoint, seg.start
        d_temp = temp0 - t_sp
        manual = seg.manual_outlet if controlled else None
        if controlled and previous_manual and manual is None:
            y[i_int] = q_in - kc * (y[i_v] - v_sp)     # bumpless return to auto: outlet starts at the feed rate
        previous_manual = manual is not None

        def rhs(t, yy, q_in=q_in, t_sp=t_sp, v_sp=v_sp, ts=ts, d_temp=d_temp, manual=manual):
            n = yy[:ns]
            vol = yy[i_v]
            conc = n / vol
            temp = t_sp + d_temp * math.exp(-(t - ts) / tau_t) if tau_t > 0 else t_sp
            r = kinetics.rates(conc, temp, math.exp(-kd * t))
            cin = feed.at(t)
            dy = np.empty_like(yy)
            if manual is not None:
                q_out = manual
                dy[i_int] = 0.0
            elif controlled:
                err = vol - v_sp
                q_out = kc * err + yy[i_int]
                if q_out < 0.0:
                    q_out = 0.0
                    dy[i_int] = ki * err if err > 0 else 0.0   # conditional integration (anti-windup)
                else:
                    dy[i_int] = ki * err
            else:
                q_out = q_in
                dy[i_int] = 0.0
            gen = vol * r
            dy[:ns] = q_in * cin - q_out * conc + nu @ gen
            dy[i_v] = q_in - q_out
            dy[i_in:i_out] = q_in * cin
            dy[i_out:i_ext] = q_out * conc
            dy[i_ext:] = gen
            return dy

        sel = grid[(grid >= seg.start) & (grid < seg.end)]
        t_eval = np.append(sel, seg.end)
        sol = solve_ivp(rhs, (seg.start, seg.end), y, method=method, t_eval=t_eval, rtol=rtol, atol=atol)
        if not sol.success:
            raise KinetraceError(f"integration failed in segment [{seg.start}, {seg.end}) s: {sol.message}")
        n_rhs += sol.nfev
        states.append(sol.y[:, :-1])
        y = sol.y[:, -1].copy()
        dt = sel - seg.start
        temps.append(t_sp + d_temp * np.exp(-dt / tau_t) if tau_t > 0 else np.full(sel.shape, t_sp))
        tsps.append(np.full(sel.shape, t_sp))

    ys = np.concatenate(states, axis=1).T
    vol = ys[:, i_v]
    feed_flow = np.concatenate([np.full(((grid >= s.start) & (grid < s.end)).sum(), s.feed_flow) for s in segments])
    if controlled:
        def per_row(values):
            return np.concatenate([np.full(((grid >= s.start) & (grid < s.end)).sum(), v)
                                   for s, v in zip(segments, values)])
        vsp = per_row([s.volume_setpoint for s in segments])
        man = per_row([np.nan if s.manual_outlet is None else s.manual_outlet for s in segments])
        q_out = np.where(np.isnan(man), np.maximum(kc * (vol - vsp) + ys[:, i_int], 0.0), man)
    else:
        q_out = feed_flow.copy()
    return CstrRun(t=grid, moles=ys[:, :ns], volume=vol, feed_flow=feed_flow, outlet_flow=q_out,
                   temperature=np.concatenate(temps), temperature_setpoint=np.concatenate(tsps),
                   activity=np.exp(-kd * grid), fed=ys[:, i_in:i_out], withdrawn=ys[:, i_out:i_ext],
                   extent=ys[:, i_ext:], final_state=y, n_rhs=n_rhs)
