"""Simulated plants of the tests' own, for the self-calibration checks (not the demo plant's numbers).

Invented scenario: Harrow Fen works, two catalytic CSTRs.

* **K-41** (saturating single reaction A -> P, -r = a k C_A / (1 + K C_A)): volume fixed, flows in
  L/min, temperature in degF, concentrations in mol/L; feed of A analysed online and wandering.
* **K-42** (series network A + B -> P, P + B -> Q, both on the catalyst, r1 = a k1 C_A C_B / (1 + K C_A),
  r2 = a k2 C_P C_B): flows in m3/h, temperature in degC.

The dynamic balances of the ideal CSTR are integrated with scipy's solve_ivp (independent of
kinetrace's own solvers and simulator), with smooth feed-rate and feed-composition changes,
temperature steps with a first-order response, and hourly means of 5-minute values. Noise is that of hourly means of minute readings (flows 0.3-0.4 %,
analyzers 0.4-1 %, temperature 0.05 K; common practice, no source). Catalyst activity a = exp(-kd t) in time on stream, restarting at
1 at the catalyst change; temperature steps; measurement noise on hourly readings. Written as a wide
CSV export with tags of the plant's own style.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from scipy import interpolate, optimize
from scipy.integrate import solve_ivp

R = 8.314462618   # J/(mol K), CODATA 2018
HOUR = 3600.0
DAY = 86400.0
START = pd.Timestamp("2027-03-01T00:00:00Z")


@dataclass(frozen=True)
class Truth:
    k_ref: dict            # reaction -> k_ref [SI]
    activation_energy: dict  # reaction -> Ea [J/mol]
    adsorption: float      # K_A [m^3/mol]
    reference_temperature: float  # [K]
    kd: float              # [1/s]
    change_day: float      # catalyst change [d from START]
    frame: pd.DataFrame    # hourly truth


def _arr(k_ref, ea, t_ref, temp):
    return k_ref * np.exp(-ea / R * (1.0 / temp - 1.0 / t_ref))


def _wander(rng, days, sigma, hours_corr):
    """A smooth random wander (AR(1) at 6-h knots, cubic spline between them) as a function of t [s]."""
    step = 6.0
    n = int(days * 24 / step) + 3
    phi = np.exp(-step / hours_corr)
    e = rng.normal(0.0, sigma * np.sqrt(1 - phi * phi), n)
    vals = np.empty(n)
    acc = rng.normal(0.0, sigma)
    for i in range(n):       # test data generator, not a hot path
        acc = phi * acc + e[i]
        vals[i] = acc
    return interpolate.CubicSpline(np.arange(n) * step * HOUR, vals)


def _simulate(days, temps, change_day, kd, vol, q_fn, feed_fn, rates_fn, nu, c_init, tau_t=1800.0):
    """Dynamic CSTR, dC/dt = (Q/V)(C_in - C) + nu r(C, T, a), integrated with scipy's solve_ivp (LSODA)
    segment by segment (temperature set point every 9 days, first-order approach with ``tau_t`` [s];
    activity a = exp(-kd t_on_stream), 1 at the catalyst change). Returns hourly means (labelled at
    the start of the hour) of C, T, Q, C_in and a on a 5-minute grid."""
    breaks = sorted({*np.arange(0.0, days, 9.0), change_day, days})
    t_grid = np.arange(0.0, days * DAY, 300.0) + 150.0
    out_c = np.empty((t_grid.size, len(c_init)))
    temp_out = np.empty(t_grid.size)
    c, temp0 = np.asarray(c_init, dtype=float), float(temps[0])
    for a_day, b_day in zip(breaks[:-1], breaks[1:]):
        t0, t1 = a_day * DAY, b_day * DAY
        t_sp = float(temps[int(a_day // 9) % len(temps)])
        origin = 0.0 if a_day < change_day else change_day * DAY

        def temp_at(t, t0=t0, t_sp=t_sp, temp0=temp0):
            return t_sp + (temp0 - t_sp) * np.exp(-(t - t0) / tau_t)

        def rhs(t, y, temp_at=temp_at, origin=origin):
            q = q_fn(t)
            a = np.exp(-kd * (t - origin))
            return q / vol * (feed_fn(t) - y) + nu @ rates_fn(y, temp_at(t), a)
        sel = (t_grid >= t0) & (t_grid < t1)
        sol = solve_ivp(rhs, (t0, t1), c, method="LSODA", t_eval=np.r_[t_grid[sel], t1], rtol=1e-9, atol=1e-6)
        out_c[sel] = sol.y[:, :-1].T
        temp_out[sel] = temp_at(t_grid[sel])
        c, temp0 = sol.y[:, -1], float(temp_at(t1))
    tos = np.where(t_grid < change_day * DAY, t_grid, t_grid - change_day * DAY)
    frame = pd.DataFrame(out_c, columns=[f"c{i}" for i in range(len(c_init))])
    frame["temperature"] = temp_out
    frame["feed_flow"] = q_fn(t_grid)
    feed = np.array([feed_fn(t) for t in t_grid])
    for i in range(feed.shape[1]):
        frame[f"in{i}"] = feed[:, i]
    frame["activity"] = np.exp(-kd * tos)
    frame.index = START + pd.to_timedelta(t_grid - 150.0, unit="s")
    return frame.resample("1h").mean()


def saturating_plant(seed: int, *, days: float = 110.0, temps=(343.0, 351.0, 347.0, 355.0), change_day: float = 62.0,
                     kd_per_day: float = 0.006):
    """K-41: hourly truth of the saturating single-reaction unit. Returns (Truth, readings frame)."""
    rng = np.random.default_rng(seed)
    k_ref, ea, k_ads, t_ref = 4.2e-4, 65e3, 0.8e-3, 350.0
    vol = 14.0                                   # m3
    wander = _wander(rng, days, 0.02, 36.0)

    def q_fn(t):
        return (7.0 + 0.6 * np.sin(2 * np.pi * t / (13.0 * DAY))) / HOUR          # m3/s, 6.4-7.6 m3/h

    def feed_fn(t):
        return np.array([2000.0 * (1 + 0.15 * np.sin(2 * np.pi * t / (7.3 * DAY)) + wander(t)), 0.0])

    def rates_fn(c, temp, a):
        return np.array([a * _arr(k_ref, ea, t_ref, temp) * c[0] / (1 + k_ads * c[0])])

    h = _simulate(days, temps, change_day, kd_per_day / DAY, vol, q_fn, feed_fn, rates_fn,
                  np.array([[-1.0], [1.0]]), [1000.0, 1000.0])
    n = len(h)
    truth = pd.DataFrame({"feed_flow": h["feed_flow"], "temperature": h["temperature"], "c_a0": h["in0"],
                          "c_a": h["c0"], "c_p": h["c1"], "activity": h["activity"],
                          "k_ref_true": k_ref * h["activity"], "volume": vol}, index=h.index)
    t = Truth({"conversion": k_ref}, {"conversion": ea}, k_ads, t_ref, kd_per_day / DAY, change_day, truth)
    lpm = 1000.0 * 60.0
    q = truth["feed_flow"].to_numpy()
    readings = pd.DataFrame({
        "K41_FEED_LPM": q * lpm * (1 + 0.003 * rng.standard_normal(n)),
        "K41_OUT_LPM": q * lpm * (1 + 0.004 * rng.standard_normal(n)),
        "K41_TEMP_F": (truth["temperature"] + 0.05 * rng.standard_normal(n)) * 1.8 - 459.67,
        "K41_FEED_A_MOLL": truth["c_a0"] / 1000.0 * (1 + 0.004 * rng.standard_normal(n)),
        "K41_OUT_A_MOLL": truth["c_a"] / 1000.0 * (1 + 0.004 * rng.standard_normal(n)),
        "K41_OUT_P_MOLL": truth["c_p"] / 1000.0 * (1 + 0.004 * rng.standard_normal(n)),
    }, index=truth.index)
    return t, readings


def series_plant(seed: int, *, days: float = 110.0, temps=(333.0, 341.0, 337.0, 345.0), change_day: float = 62.0,
                 kd_per_day: float = 0.009):
    """K-42: hourly truth of the series-network unit. Returns (Truth, readings frame)."""
    rng = np.random.default_rng(seed)
    k1, ea1, k_ads, k2, ea2, t_ref = 1.2e-7, 60e3, 0.5e-3, 2.5e-8, 75e3, 340.0   # m3/(mol s), J/mol, m3/mol
    vol = 9.0
    wander = _wander(rng, days, 0.015, 36.0)

    def q_fn(t):
        return (5.0 + 0.5 * np.sin(2 * np.pi * t / (11.0 * DAY))) / HOUR

    def feed_fn(t):
        return np.array([1500.0 * (1 + 0.12 * np.sin(2 * np.pi * t / (6.1 * DAY)) + wander(t)), 4000.0, 0.0, 0.0])

    def rates_fn(c, temp, a):
        ca, cb, cp = c[0], c[1], c[2]
        return np.array([a * _arr(k1, ea1, t_ref, temp) * ca * cb / (1 + k_ads * ca),
                         a * _arr(k2, ea2, t_ref, temp) * cp * cb])

    nu = np.array([[-1.0, 0.0], [-1.0, -1.0], [1.0, -1.0], [0.0, 1.0]])   # A, B, P, Q
    h = _simulate(days, temps, change_day, kd_per_day / DAY, vol, q_fn, feed_fn, rates_fn, nu,
                  [800.0, 3200.0, 650.0, 50.0])
    n = len(h)
    truth = pd.DataFrame({"feed_flow": h["feed_flow"], "temperature": h["temperature"], "c_a0": h["in0"],
                          "c_a": h["c0"], "c_b": h["c1"], "c_p": h["c2"], "c_q": h["c3"], "activity": h["activity"],
                          "k_ref_true": k1 * h["activity"], "volume": vol}, index=h.index)
    t = Truth({"coupling": k1, "overreaction": k2}, {"coupling": ea1, "overreaction": ea2}, k_ads, t_ref,
              kd_per_day / DAY, change_day, truth)
    q = truth["feed_flow"].to_numpy()
    readings = pd.DataFrame({
        "k42.feed.m3h": q * HOUR * (1 + 0.003 * rng.standard_normal(n)),
        "k42.outlet.m3h": q * HOUR * (1 + 0.004 * rng.standard_normal(n)),
        "k42.temp.degc": truth["temperature"] - 273.15 + 0.05 * rng.standard_normal(n),
        "k42.feed.a": truth["c_a0"] / 1000.0 * (1 + 0.004 * rng.standard_normal(n)),
        "k42.out.a": truth["c_a"] / 1000.0 * (1 + 0.004 * rng.standard_normal(n)),
        "k42.out.p": truth["c_p"] / 1000.0 * (1 + 0.004 * rng.standard_normal(n)),
        "k42.out.q": truth["c_q"] / 1000.0 * (1 + 0.01 * rng.standard_normal(n)),
    }, index=truth.index)
    return t, readings


def _k41_outlet(a, q, temp, c_a0, t: Truth):
    k = _arr(t.k_ref["conversion"], t.activation_energy["conversion"], t.reference_temperature, temp) * a
    tau = 14.0 / q
    c_a = optimize.brentq(lambda c: (c_a0 - c) / tau - k * c / (1 + t.adsorption * c), 0.0, c_a0, xtol=1e-12)
    return q * (c_a0 - c_a)                  # product rate [mol/s]


def _k42_outlet(a, q, temp, c_a0, t: Truth):
    kk1 = _arr(t.k_ref["coupling"], t.activation_energy["coupling"], t.reference_temperature, temp) * a
    kk2 = _arr(t.k_ref["overreaction"], t.activation_energy["overreaction"], t.reference_temperature, temp) * a
    tau = 9.0 / q

    def f(x):
        ca, cb, cp = c_a0 - x[0], 4000.0 - x[0] - x[1], x[0] - x[1]
        return [x[0] / tau - kk1 * ca * cb / (1 + t.adsorption * ca), x[1] / tau - kk2 * cp * cb]
    x = optimize.fsolve(f, [0.5 * c_a0, 0.05 * c_a0], xtol=1e-12)
    return q * (x[0] - x[1])


def product_rate(kind: str, t: Truth, activity: float, hours: int = 24) -> float:
    """True product rate [mol/s] at the last ``hours``' median operating point and a given activity."""
    last = t.frame.iloc[-hours:]
    f = _k41_outlet if kind == "saturating" else _k42_outlet
    return f(activity, float(last["feed_flow"].median()), float(last["temperature"].median()),
             float(last["c_a0"].median()), t)


def target_for_crossing(kind: str, t: Truth, days_after_end: float, molar_mass: float) -> tuple[float, pd.Timestamp]:
    """Target [kg/d] met exactly when the true activity reaches its value ``days_after_end`` after the
    data end, at the last day's operating point; and that true crossing time."""
    end = t.frame.index[-1]
    a_end = float(t.frame["activity"].iloc[-1])
    a_star = a_end * np.exp(-t.kd * days_after_end * DAY)
    return product_rate(kind, t, a_star) * molar_mass * DAY, end + pd.Timedelta(days=days_after_end)


def write_export(readings: pd.DataFrame, path: Path) -> Path:
    """Wide CSV export: a ``time`` column (ISO 8601, UTC) and one column per tag."""
    frame = readings.copy()
    frame.index = frame.index.strftime("%Y-%m-%dT%H:%M:%SZ")
    frame.index.name = "time"
    frame.to_csv(path, float_format="%.7g")
    return path


_K41 = """
[site]
name = "Harrow Fen works (invented)"
timezone = "UTC"

[source]
kind = "csv"
path = "{csv}"
layout = "wide"
columns = {{ timestamp = "time" }}

[analysis]
grid = "1 h"
output_dir = "{out}"

[[units]]
id = "K-41"
key_reactant = "A"
[units.volume]
fixed = "14 m3"
[[units.species]]
name = "A"
molar_mass = "0.1 kg/mol"
[[units.species]]
name = "P"
molar_mass = "0.1 kg/mol"
[[units.reactions]]
id = "conversion"
equation = "A -> P"
[units.reactions.rate_law]
method = "saturating"
k_ref = "{k_ref}"
activation_energy = "{ea}"
reference_temperature = "350 K"
orders = {{ A = 1 }}
adsorption = {{ A = "{k_ads}" }}
{extra_law}
[units.feed]
A = "2.0 mol/L"
P = "0 mol/L"
[[units.tags]]
tag = "K41_FEED_LPM"
role = "feed_flow"
unit = "L/min"
sigma = "0.3 %"
[[units.tags]]
tag = "K41_OUT_LPM"
role = "outlet_flow"
unit = "L/min"
sigma = "0.4 %"
[[units.tags]]
tag = "K41_TEMP_F"
role = "temperature"
unit = "degF"
sigma = "0.1 delta_degF"
[[units.tags]]
tag = "K41_FEED_A_MOLL"
role = "feed_conc"
species = "A"
unit = "mol/L"
sigma = "0.4 %"
[[units.tags]]
tag = "K41_OUT_A_MOLL"
role = "outlet_conc"
species = "A"
unit = "mol/L"
sigma = "0.4 %"
[[units.tags]]
tag = "K41_OUT_P_MOLL"
role = "outlet_conc"
species = "P"
unit = "mol/L"
sigma = "0.4 %"
[units.target]
species = "P"
rate = "{target}"
[units.limits]
temperature = ["330 K", "365 K"]
feed_flow = ["60 L/min", "160 L/min"]
[units.activity]
fresh_period = ["2027-03-01T00:00:00Z", "2027-03-02T00:00:00Z"]
catalyst_changes = ["{change}"]
"""

_K42 = """
[site]
name = "Harrow Fen works (invented)"
timezone = "UTC"

[source]
kind = "csv"
path = "{csv}"
layout = "wide"
columns = {{ timestamp = "time" }}

[analysis]
grid = "1 h"
output_dir = "{out}"

[[units]]
id = "K-42"
key_reactant = "A"
[units.volume]
fixed = "9 m3"
[[units.species]]
name = "A"
molar_mass = "0.08 kg/mol"
[[units.species]]
name = "B"
molar_mass = "0.03 kg/mol"
[[units.species]]
name = "P"
molar_mass = "0.11 kg/mol"
[[units.species]]
name = "Q"
molar_mass = "0.14 kg/mol"
[[units.reactions]]
id = "coupling"
equation = "A + B -> P"
[units.reactions.rate_law]
method = "saturating"
k_ref = "{k1}"
activation_energy = "{ea1}"
reference_temperature = "340 K"
orders = {{ A = 1, B = 1 }}
adsorption = {{ A = "{k_ads}" }}
{extra_law}
[[units.reactions]]
id = "overreaction"
equation = "P + B -> Q"
[units.reactions.rate_law]
method = "power_law"
k_ref = "{k2}"
activation_energy = "{ea2}"
reference_temperature = "340 K"
orders = {{ P = 1, B = 1 }}
[units.feed]
A = "1.5 mol/L"
B = "4.0 mol/L"
P = "0 mol/L"
Q = "0 mol/L"
[[units.tags]]
tag = "k42.feed.m3h"
role = "feed_flow"
unit = "m3/h"
sigma = "0.3 %"
[[units.tags]]
tag = "k42.outlet.m3h"
role = "outlet_flow"
unit = "m3/h"
sigma = "0.4 %"
[[units.tags]]
tag = "k42.temp.degc"
role = "temperature"
unit = "degC"
sigma = "0.05 K"
[[units.tags]]
tag = "k42.feed.a"
role = "feed_conc"
species = "A"
unit = "mol/L"
sigma = "0.4 %"
[[units.tags]]
tag = "k42.out.a"
role = "outlet_conc"
species = "A"
unit = "mol/L"
sigma = "0.4 %"
[[units.tags]]
tag = "k42.out.p"
role = "outlet_conc"
species = "P"
unit = "mol/L"
sigma = "0.4 %"
[[units.tags]]
tag = "k42.out.q"
role = "outlet_conc"
species = "Q"
unit = "mol/L"
sigma = "1 %"
[units.target]
species = "P"
rate = "{target}"
[units.limits]
temperature = ["320 K", "355 K"]
feed_flow = ["3 m3/h", "8 m3/h"]
[units.activity]
fresh_period = ["2027-03-01T00:00:00Z", "2027-03-02T00:00:00Z"]
catalyst_changes = ["{change}"]
"""


def write_config(kind: str, folder: Path, csv: Path, *, start: dict, target: str, change_day: float,
                 extra_law: str = "") -> Path:
    """Config of K-41 (``kind="saturating"``) or K-42 (``"series"``) with the given starting values."""
    text = (_K41 if kind == "saturating" else _K42).format(
        csv=csv.as_posix(), out=(folder / "out").as_posix(), target=target, extra_law=extra_law,
        change=(START + pd.Timedelta(days=change_day)).strftime("%Y-%m-%dT%H:%M:%SZ"), **start)
    path = folder / f"{kind}.toml"
    path.write_text(text)
    return path
