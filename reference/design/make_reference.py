#!/usr/bin/env python3
"""Reference figures for ctrl-design's `analysis` and `tune` modules, computed with the
Python control-systems library (python-control) and numpy.

Rerun:  python3 reference/design/make_reference.py --out reference/design
Writes  expected.json   (deterministic: library versions, cases, figures)
        provenance.json (date and interpreter; not compared)

The Rust tests (ctrl-design/tests/analysis_reference.rs) recompute every figure with the
crate and compare: times within 1 % relative or 1 ms, margins within 0.5 deg / 0.2 dB,
discrete pole magnitudes within 1e-6.

Definitions (python-control's step_info; the crate uses the same ones):
  final value = DC gain; overshoot = 100 (max y - yf) / yf; peak time = time of max y
  (recorded only with overshoot > 0); rise time = first t with y >= 0.9 yf minus first t
  with y >= 0.1 yf; settling time = first grid time after the last sample with
  |y / yf - 1| >= band.
Continuous responses use a 400,001-point grid over 18 / (slowest decay rate); discrete
ones the loop's own samples over ceil(18 / -ln(max |pole|)) ticks (at least 200).

The plants, gains and rates are invented test cases; the first two plants are the demo
rover's invented forward and rotation axes.
"""

import argparse
import datetime
import json
import math
import os
import platform
import sys
import warnings

import numpy as np
import scipy
import control as ct

PLANTS = [
    # name, K (units/s per V), T (s)
    ("demo_forward", 180.0, 0.09),
    ("demo_rotation", 2.6, 0.07),
    ("small_fast", 40.0, 0.02),
    ("heavy_slow", 1000.0, 0.3),
    ("mid", 250.0, 0.12),
]

# (damping, settling time as a fraction of the longest allowed 8 T for the 2 % band)
PD_DESIGNS = [(0.5, 0.4), (0.8, 0.5), (0.7, 0.9), (1.3, 0.3)]
RATES = [100.0, 250.0, 500.0, 1000.0]
# (crossover as a multiple of 1/T, phase margin in degrees)
LEAD_DESIGNS = [(1.5, 50.0), (3.0, 45.0), (1.0, 60.0)]
# (bandwidth as a multiple of 1/T, damping)
PI_DESIGNS = [(3.0, 0.8), (6.0, 0.7)]
BAND = 0.02
GRID = 400001


def opt(x):
    x = float(x)
    return None if (math.isinf(x) or math.isnan(x)) else x


def step_figures(sys, t):
    info = ct.step_info(sys, T=t, SettlingTimeThreshold=BAND, RiseTimeLimits=(0.1, 0.9))
    os_ = float(info["Overshoot"])
    return {
        "overshoot_pct": os_,
        "peak_time_s": float(info["PeakTime"]) if os_ > 1e-7 else None,
        "rise_time_s": opt(info["RiseTime"]),
        "settling_time_s": opt(info["SettlingTime"]),
    }


def margins(loop):
    """python-control's stability_margins (default method, all crossings), then python-
    control's own selection rule (gain margin closest to 0 dB, smallest |phase margin|),
    with two corrections found while comparing with the crate, each checked by hand:
    - a phase crossover reported at w = 0 (the integrator's infinite gain, e.g. a PI loop)
      is not a crossing and is dropped;
    - a discrete loop is real at the Nyquist frequency; stability_margins 0.10.2 does not
      report a crossing exactly there, so when L(-1) (evaluated by python-control) is
      negative real, 1 / |L(-1)| at w = pi / dt is added as a gain-margin candidate.
      (Scaling such a loop by that margin puts a closed-loop pole at z = -1: checked in
      the Rust tests.)
    """
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        gms, pms, _sms, wpcs, wgcs, _wms = ct.stability_margins(loop, returnall=True)
    gms = [float(g) for g, w in zip(gms, wpcs) if float(w) > 1e-9 and not math.isinf(float(g))]
    wpcs = [float(w) for w in wpcs if float(w) > 1e-9]
    if loop.isdtime(strict=True):
        nyq = math.pi / loop.dt
        l_nyq = complex(loop(-1.0))
        if l_nyq.real < 0 and abs(l_nyq.imag) <= 1e-9 * abs(l_nyq) and not any(
            abs(w - nyq) < 1e-6 * nyq for w in wpcs
        ):
            gms.append(1.0 / abs(l_nyq))
            wpcs.append(nyq)
    out = {"gain_margin_db": None, "phase_crossover_rad_s": None,
           "phase_margin_deg": None, "gain_crossover_rad_s": None}
    if gms:
        i = min(range(len(gms)), key=lambda j: abs(math.log(gms[j])))
        out["gain_margin_db"] = 20.0 * math.log10(gms[i])
        out["phase_crossover_rad_s"] = wpcs[i]
    pms = [float(p) for p in pms]
    if pms:
        i = min(range(len(pms)), key=lambda j: abs(pms[j]))
        out["phase_margin_deg"] = pms[i]
        out["gain_crossover_rad_s"] = float(wgcs[i])
    return out


def continuous_block(loop, closed):
    poles = closed.poles()
    sigma = min(-p.real for p in poles)
    t = np.linspace(0.0, 18.0 / sigma, GRID)
    out = step_figures(closed, t)
    out.update(margins(loop))
    out["stable"] = bool(all(p.real < 0 for p in poles))
    return out


def discrete_block(loop, closed, dt):
    poles = closed.poles()
    mags = sorted((float(abs(p)) for p in poles), reverse=True)
    rho = mags[0]
    out = {"pole_magnitudes": mags, "max_pole_magnitude": rho, "stable": rho < 1.0}
    out.update(margins(loop))
    if rho < 1.0:
        n = max(200, math.ceil(18.0 / -math.log(rho))) if rho > 0 else 200
        t = np.arange(n) * dt
        out.update(step_figures(closed, t))
    return out


def zdelay(dt):
    return ct.tf([1.0], [1.0, 0.0], dt)


def pd_case(name, k, tc, zeta, ts):
    c = 4.0
    wn = c / (zeta * ts)
    kp = wn * wn * tc / k
    kd = (2.0 * zeta * wn * tc - 1.0) / k
    p = ct.tf([k], [tc, 1.0, 0.0])
    case = {"plant": name, "gain": k, "time_constant_s": tc, "damping": zeta,
            "settling_time_s": ts, "kp": kp, "kd": kd, "forms": {}}
    for form in ("error", "measurement"):
        c_s = ct.tf([kd, kp], [1.0])
        loop = c_s * p
        closed = ct.feedback(loop, 1) if form == "error" else kp * ct.feedback(p, c_s)
        blocks = {"continuous": continuous_block(loop, closed), "discrete": {}}
        for rate in RATES:
            dt = 1.0 / rate
            pd_ = ct.c2d(p, dt, "zoh")
            c_z = ct.tf([kp + kd * rate, -kd * rate], [1.0, 0.0], dt)
            for delayed in (False, True):
                pz = pd_ * zdelay(dt) if delayed else pd_
                loop_z = c_z * pz
                closed_z = ct.feedback(loop_z, 1) if form == "error" else kp * ct.feedback(pz, c_z)
                key = f"{rate:g}{'_delayed' if delayed else ''}"
                blocks["discrete"][key] = discrete_block(loop_z, closed_z, dt)
        case["forms"][form] = blocks
    return case


def lead_case(name, k, tc, wc_mult, pm):
    wc = wc_mult / tc
    plant_phase = -90.0 - math.degrees(math.atan(wc * tc))
    phi = pm - (180.0 + plant_phase)
    s = math.sin(math.radians(phi))
    alpha = (1.0 - s) / (1.0 + s)
    t1 = 1.0 / (wc * math.sqrt(alpha))
    p = ct.tf([k], [tc, 1.0, 0.0])
    mag = abs(p(1j * wc))
    kc = math.sqrt(alpha) / mag
    c_s = ct.tf([kc * t1, kc], [alpha * t1, 1.0])
    loop = c_s * p
    closed = ct.feedback(loop, 1)
    case = {"plant": name, "gain": k, "time_constant_s": tc, "crossover_rad_s": wc,
            "phase_margin_deg": pm, "lead_deg": phi, "kc": kc, "alpha": alpha, "t1": t1,
            "continuous": continuous_block(loop, closed), "discrete": {}}
    for rate in RATES:
        dt = 1.0 / rate
        if wc >= math.pi * rate:
            continue
        c_z = ct.c2d(c_s, dt, "tustin", prewarp_frequency=wc)
        num = np.asarray(c_z.num[0][0], dtype=float)
        den = np.asarray(c_z.den[0][0], dtype=float)
        coeffs = {"b0": num[0] / den[0], "b1": num[1] / den[0], "a1": den[1] / den[0]}
        pd_ = ct.c2d(p, dt, "zoh")
        for delayed in (False, True):
            pz = pd_ * zdelay(dt) if delayed else pd_
            loop_z = c_z * pz
            key = f"{rate:g}{'_delayed' if delayed else ''}"
            block = discrete_block(loop_z, ct.feedback(loop_z, 1), dt)
            block["coefficients"] = coeffs
            case["discrete"][key] = block
    return case


def pi_case(name, k, tc, bw_mult, zeta, wn_from_rust=None):
    # The natural frequency is solved so that the -3 dB bandwidth of the closed loop is
    # the target; python-control's bandwidth() then checks it independently.
    bw = bw_mult / tc

    def bandwidth_of(wn):
        kp = (2.0 * zeta * wn * tc - 1.0) / k
        ki = wn * wn * tc / k
        cl = ct.feedback(ct.tf([kp, ki], [1.0, 0.0]) * ct.tf([k], [tc, 1.0]), 1)
        return float(ct.bandwidth(cl))

    lo, hi = 1.0 / (2.0 * zeta * tc) * 1.0000001, bw * 4.0
    for _ in range(100):
        mid = 0.5 * (lo + hi)
        if bandwidth_of(mid) < bw:
            lo = mid
        else:
            hi = mid
    wn = 0.5 * (lo + hi)
    kp = (2.0 * zeta * wn * tc - 1.0) / k
    ki = wn * wn * tc / k
    p = ct.tf([k], [tc, 1.0])
    c_s = ct.tf([kp, ki], [1.0, 0.0])
    loop = c_s * p
    closed = ct.feedback(loop, 1)
    case = {"plant": name, "gain": k, "time_constant_s": tc, "bandwidth_rad_s": bw,
            "damping": zeta, "kp": kp, "ki": ki, "measured_bandwidth_rad_s": float(ct.bandwidth(closed)),
            "continuous": continuous_block(loop, closed), "discrete": {}}
    for rate in RATES:
        dt = 1.0 / rate
        pd_ = ct.c2d(p, dt, "zoh")
        c_z = ct.tf([kp + ki * dt, -kp], [1.0, -1.0], dt)
        for delayed in (False, True):
            pz = pd_ * zdelay(dt) if delayed else pd_
            loop_z = c_z * pz
            key = f"{rate:g}{'_delayed' if delayed else ''}"
            case["discrete"][key] = discrete_block(loop_z, ct.feedback(loop_z, 1), dt)
    return case


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--out", required=True, help="directory for expected.json and provenance.json")
    args = ap.parse_args()
    pd_cases, lead_cases, pi_cases = [], [], []
    for name, k, tc in PLANTS:
        for zeta, frac in PD_DESIGNS:
            pd_cases.append(pd_case(name, k, tc, zeta, frac * 8.0 * tc))
        for wc_mult, pm in LEAD_DESIGNS:
            lead_cases.append(lead_case(name, k, tc, wc_mult, pm))
        for bw_mult, zeta in PI_DESIGNS:
            pi_cases.append(pi_case(name, k, tc, bw_mult, zeta))
    expected = {
        "generator": "reference/design/make_reference.py",
        "versions": {
            "python": platform.python_version(),
            "control": ct.__version__,
            "numpy": np.__version__,
            "scipy": scipy.__version__,
        },
        "band": BAND,
        "continuous_grid_points": GRID,
        "rates_hz": RATES,
        "pd": pd_cases,
        "lead": lead_cases,
        "pi": pi_cases,
    }
    os.makedirs(args.out, exist_ok=True)
    with open(os.path.join(args.out, "expected.json"), "w") as f:
        json.dump(expected, f, indent=1, sort_keys=True)
        f.write("\n")
    with open(os.path.join(args.out, "provenance.json"), "w") as f:
        json.dump({
            "date_utc": datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC"),
            "python": sys.version.split()[0],
            "platform": platform.platform(),
            "command": "python3 reference/design/make_reference.py --out reference/design",
            "versions": expected["versions"],
        }, f, indent=1, sort_keys=True)
        f.write("\n")


if __name__ == "__main__":
    main()
