#!/usr/bin/env python3
"""Side-by-side speed of the same linear sweep: python-control versus `ctrl-design sweep`.

The sweep: the invented demo rover's forward axis (K = 180 mm/s/V, T = 0.09 s), a PD loop
(kp = 0.12 V/mm, kd = 0.004 V per mm/s, derivative on error) with speed and acceleration
feedforward, one tick of computation delay at 500 Hz, a 400 mm move at 400 mm/s and
1200 mm/s^2, 1000 ticks per run, over a grid of K and T within +-20 % (the bias is 0, so
the third grid axis repeats each plant; both sides run the same list). Everything is
linear here (exact position reading, no supply limit, no friction): python-control
simulates it with ZOH c2d, feedback and forced_response per plant; the Rust side runs the
CLI with --arithmetic f64. Both report the worst overshoot and tracking error, which must
agree, and the script prints the time per run of each and the ratio.

Not part of CI. Run from the repository root:

    cargo build --release -p ctrl-design
    python3 reference/speed/compare_sweep.py [--grid 10] [--bin target/release/ctrl-design]
"""

import argparse
import json
import os
import platform
import subprocess
import time

import control
import numpy as np

K, TAU, RATE = 180.0, 0.09, 500.0
KP, KD = 0.12, 0.004
DIST, CRUISE, ACCEL = 400.0, 400.0, 1200.0
TICKS, SPREAD = 1000, 0.2
H = 1.0 / RATE


def trapezoid(t):
    vp = min(CRUISE, np.sqrt(ACCEL * DIST))
    ta = vp / ACCEL
    tc = max((DIST - vp * vp / ACCEL) / vp, 0.0)
    p, v, a = np.zeros_like(t), np.zeros_like(t), np.zeros_like(t)
    up = (t > 0) & (t < ta)
    cr = (t >= ta) & (t < ta + tc)
    dn = (t >= ta + tc) & (t < 2 * ta + tc)
    end = t >= 2 * ta + tc
    p[up], v[up], a[up] = 0.5 * ACCEL * t[up] ** 2, ACCEL * t[up], ACCEL
    p[cr], v[cr] = 0.5 * ACCEL * ta * ta + vp * (t[cr] - ta), vp
    r = 2 * ta + tc - t[dn]
    p[dn], v[dn], a[dn] = DIST - 0.5 * ACCEL * r * r, ACCEL * r, -ACCEL
    p[end] = DIST
    return p, v, a


def grid(points):
    f = [0.0] if points == 1 else [-1 + 2 * i / (points - 1) for i in range(points)]
    return [(K * (1 + SPREAD * a), TAU * (1 + SPREAD * b)) for a in f for b in f for _ in f]


def python_sweep(plants):
    t = np.arange(TICKS) * H
    r, spd, acc = trapezoid(t + H)   # tick k follows the setpoint of time (k + 1) h
    uff = spd / K + acc * TAU / K    # feedforward from the nominal plant
    z = control.tf([1, 0], [1], H)
    kdf = KD * RATE
    ctrl = (KP + kdf) - kdf * (1 / z)
    delay = control.tf([1], [1, 0], H)
    worst_os, worst_track = 0.0, 0.0
    for gain, tau in plants:
        p = control.c2d(control.tf([gain], [tau, 1, 0]), H, method="zoh") * delay
        y = (control.forced_response(control.feedback(p * ctrl, 1), t, r).outputs
             + control.forced_response(control.feedback(p, ctrl), t, uff).outputs)
        worst_os = max(worst_os, max(0.0, (y.max() - DIST) / DIST * 100))
        worst_track = max(worst_track, np.abs(r - y).max())
    return worst_os, worst_track


def rust_sweep(binary, points):
    cmd = [binary, "sweep", "--plant-gain", str(K), "--time-constant", str(TAU), "--bias", "0",
           "--kp", str(KP), "--kd", str(KD), "--derivative", "on-error", "--rate", str(RATE),
           "--delay-ticks", "1", "--distance", str(DIST), "--cruise-speed", str(CRUISE),
           "--accel", str(ACCEL), "--duration", str(TICKS / RATE), "--spread", str(SPREAD * 100),
           "--grid", str(points), "--arithmetic", "f64", "--format", "json", "--quiet"]
    start = time.perf_counter()
    out = subprocess.run(cmd, check=True, capture_output=True, text=True).stdout
    wall = time.perf_counter() - start
    return json.loads(out), wall


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--grid", type=int, default=10, help="points per constant (runs = grid^3)")
    ap.add_argument("--python-runs", type=int, default=300,
                    help="runs python-control simulates (its time per run is extrapolated)")
    ap.add_argument("--bin", default=os.path.join(
        os.environ.get("CARGO_TARGET_DIR", "target"), "release", "ctrl-design"))
    a = ap.parse_args()
    plants = grid(a.grid)
    rust, wall = rust_sweep(a.bin, a.grid)
    n_py = min(a.python_runs, len(plants))
    start = time.perf_counter()
    # Every a-th plant, so the python subset spans the grid.
    step = max(1, len(plants) // n_py)
    subset = plants[::step][:n_py]
    py_os, py_track = python_sweep(subset)
    py_time = time.perf_counter() - start
    py_full_os, py_full_track = (py_os, py_track) if n_py == len(plants) else (None, None)
    rust_per_run = rust["elapsed_s"] / rust["runs"]
    py_per_run = py_time / n_py
    print(f"python {platform.python_version()}, python-control {control.__version__}, "
          f"numpy {np.__version__}; {os.cpu_count()} CPUs")
    print(f"rust   : {rust['runs']} runs x {TICKS} ticks in {rust['elapsed_s']:.3f} s "
          f"(process wall {wall:.3f} s), {rust_per_run * 1e6:.2f} us/run, "
          f"{rust['ticks_per_s'] / 1e6:.1f} M ticks/s")
    print(f"python : {n_py} runs x {TICKS} ticks in {py_time:.3f} s, {py_per_run * 1e6:.0f} us/run")
    print(f"ratio  : python-control / rust per run = {py_per_run / rust_per_run:.0f}x")
    w = rust["worst"]
    print(f"worst overshoot  rust {w['overshoot_pct']['value']:.6f} %   "
          f"python (subset) {py_os:.6f} %")
    print(f"worst tracking   rust {w['max_tracking_error']['value']:.6f} mm  "
          f"python (subset) {py_track:.6f} mm")
    if py_full_os is not None:
        assert abs(py_full_os - w["overshoot_pct"]["value"]) < 1e-6
        assert abs(py_full_track - w["max_tracking_error"]["value"]) < 1e-6
        print("worst cases agree")


if __name__ == "__main__":
    main()
