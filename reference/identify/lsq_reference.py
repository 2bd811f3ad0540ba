#!/usr/bin/env python3
"""Outside reference for the least-squares core of `ctrl-design identify`.

Writes three small INVENTED logs (a fixed-seed simulation of a first-order drive) and solves
the same least-squares problems as the Rust code with general-purpose solvers:

  1. step fit (ctrl_design::identify::fit::fit_step) on a quantized position step log:
     x(tau) = x0 + w_ss (tau - T (1 - exp(-tau/T))) + w0 T (1 - exp(-tau/T)), tau = t - t_step,
     over the rows from the step on; scipy.optimize.least_squares (MINPACK "lm").
  2. steady-speed line (fit::fit_steady_line): sign(v) w_ss = K |v| - K bias;
     numpy.linalg.lstsq.
  3. output-error fit (fit::fit_output_error) of the discrete first-order model with bias
     over a whole staircase log, once for a speed log and once for a quantized position log:
     voltage held over each row's interval, exact step
        g = K sign(v) max(|v| - bias, 0),  a = exp(-dt/T)
        w[k+1] = g + (w[k] - g) a,  x[k+1] = x[k] + g dt + (w[k] - g) T (1 - a)
     with free initial speed (and position); scipy.optimize.least_squares ("lm").

Usage:  python3 reference/identify/lsq_reference.py [--out DIR] [--date YYYY-MM-DD]

DIR defaults to this script's directory; it receives step.csv, stairs_speed.csv,
stairs_position.csv and expected.json. The output is deterministic apart from the date,
which defaults to today; pass the committed file's date to rerun and diff:
    python3 reference/identify/lsq_reference.py --out /tmp/ref \
        --date "$(python3 -c 'import json;print(json.load(open("reference/identify/expected.json"))["provenance"]["date"])')"
    diff -r reference/identify /tmp/ref   (only the script itself differs: it is not copied)
"""

import argparse
import datetime
import json
import os
import platform
import sys

import numpy as np
import scipy
from scipy.optimize import least_squares

DT = 0.002
TRUE = {"gain": 250.0, "time_constant_s": 0.06, "bias_volts": 0.55}
COUNT = 2.0


def effective(v, b):
    return np.sign(v) * np.maximum(np.abs(v) - b, 0.0)


def run_model(t, v, k, tc, b, x0, w0):
    """Positions and speeds at each row (state at row k, voltage v[k] held to row k+1)."""
    n = len(t)
    x = np.empty(n)
    w = np.empty(n)
    xk, wk = x0, w0
    for i in range(n):
        x[i] = xk
        w[i] = wk
        if i + 1 < n:
            dt = t[i + 1] - t[i]
            a = np.exp(-dt / tc)
            c = tc * (1.0 - a)
            g = k * effective(v[i], b)
            d = wk - g
            xk = xk + g * dt + d * c
            wk = g + d * a
    return x, w


def simulate(v, seed, kind):
    rng = np.random.default_rng(seed)
    n = len(v)
    t = np.arange(n) * DT
    x, w = run_model(t, v, TRUE["gain"], TRUE["time_constant_s"], TRUE["bias_volts"], 0.0, 0.0)
    noise = rng.normal(0.0, 3.0, n)
    if kind == "speed":
        return t, w + noise
    drift = np.concatenate([[0.0], np.cumsum(noise[:-1] * DT)])
    phase = rng.uniform(0.0, COUNT)
    return t, np.floor((x + drift + phase) / COUNT) * COUNT


def write_csv(path, t, v, col, y):
    with open(path, "w") as f:
        f.write(f"time_s,volts,{col}\n")
        for a, b, c in zip(t, v, y):
            f.write(f"{float(a)!r},{float(b)!r},{float(c)!r}\n")


def fit_step(t, v, x):
    k0 = int(np.nonzero(np.diff(v))[0][0]) + 1
    tau = t[k0:] - t[k0]
    y = x[k0:]

    def resid(p):
        x0, w0, wss, tc = p
        e = np.exp(-tau / tc)
        c = tc * (1.0 - e)
        return x0 + wss * (tau - c) + w0 * c - y

    p0 = [y[0], 0.0, (y[-1] - y[0]) / tau[-1], 0.05]
    r = least_squares(resid, p0, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=20000)
    x0, w0, wss, tc = r.x
    return {
        "step_row": k0,
        "initial_position": x0,
        "initial_speed": w0,
        "steady_speed": wss,
        "time_constant_s": tc,
        "sum_of_squares": float(np.sum(r.fun**2)),
        "solver_status": int(r.status),
    }


def fit_line(points):
    vs = np.array([p[0] for p in points])
    ws = np.array([p[1] for p in points])
    a = np.column_stack([np.abs(vs), np.ones_like(vs)])
    y = np.sign(vs) * ws
    (k, c), *_ = np.linalg.lstsq(a, y, rcond=None)
    return {"points": points, "gain": k, "bias_volts": -c / k}


def fit_oe(t, v, y, kind, start):
    def resid(p):
        if kind == "position":
            k, tc, b, w0, x0 = p
        else:
            k, tc, b, w0 = p
            x0 = 0.0
        x, w = run_model(t, v, k, tc, b, x0, w0)
        return (x if kind == "position" else w) - y

    p0 = [start["gain"], start["time_constant_s"], start["bias_volts"], 0.0]
    if kind == "position":
        p0.append(y[0])
    r = least_squares(resid, p0, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=20000)
    out = {
        "gain": r.x[0],
        "time_constant_s": r.x[1],
        "bias_volts": r.x[2],
        "initial_speed": r.x[3],
        "sum_of_squares": float(np.sum(r.fun**2)),
        "solver_status": int(r.status),
    }
    if kind == "position":
        out["initial_position"] = r.x[4]
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--out", default=os.path.dirname(os.path.abspath(__file__)))
    ap.add_argument("--date", default=datetime.date.today().isoformat())
    args = ap.parse_args()
    os.makedirs(args.out, exist_ok=True)

    step_v = np.concatenate([np.zeros(50), np.full(300, 4.0)])
    t, x = simulate(step_v, 1, "position")
    write_csv(os.path.join(args.out, "step.csv"), t, step_v, "position", x)
    step = fit_step(t, step_v, x)

    levels = [(0.0, 25), (2.0, 100), (4.5, 100), (-3.0, 100), (6.0, 100), (0.0, 75)]
    stairs_v = np.concatenate([np.full(n, lv) for lv, n in levels])
    ts, ws = simulate(stairs_v, 2, "speed")
    write_csv(os.path.join(args.out, "stairs_speed.csv"), ts, stairs_v, "speed", ws)
    tp, xp = simulate(stairs_v, 3, "position")
    write_csv(os.path.join(args.out, "stairs_position.csv"), tp, stairs_v, "position", xp)
    start = {"gain": 200.0, "time_constant_s": 0.05, "bias_volts": 0.3}
    oe_speed = fit_oe(ts, stairs_v, ws, "speed", start)
    oe_pos = fit_oe(tp, stairs_v, xp, "position", start)

    # Invented steady speeds (units/s) at several voltages for the line fit.
    line = fit_line([[1.5, 238.1], [3.0, 611.9], [4.5, 987.0], [-4.5, -990.4], [6.0, 1362.2]])

    expected = {
        "provenance": {
            "script": "reference/identify/lsq_reference.py",
            "date": args.date,
            "python": platform.python_version(),
            "numpy": np.__version__,
            "scipy": scipy.__version__,
            "solvers": "scipy.optimize.least_squares(method='lm', xtol=ftol=gtol=1e-15); numpy.linalg.lstsq",
            "data": "INVENTED: fixed-seed simulation (numpy default_rng seeds 1, 2, 3), true constants below",
        },
        "true_constants": TRUE,
        "count_size": COUNT,
        "step": {"file": "step.csv", **step},
        "steady_line": line,
        "output_error_speed": {"file": "stairs_speed.csv", "start": start, **oe_speed},
        "output_error_position": {"file": "stairs_position.csv", "start": start, **oe_pos},
    }
    with open(os.path.join(args.out, "expected.json"), "w") as f:
        json.dump(expected, f, indent=2, default=float)
        f.write("\n")
    print(json.dumps(expected, indent=2, default=float))
    return 0


if __name__ == "__main__":
    sys.exit(main())
