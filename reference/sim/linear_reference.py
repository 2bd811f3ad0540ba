#!/usr/bin/env python3
"""Reference responses for ctrl-design's simulation with every nonlinearity off.

With exact position reading (no encoder counts), no supply limit, no friction bias and the
f64 loop, the simulated loop is linear: a zero-order-hold plant K/(s (T s + 1)) sampled at
the loop rate, an optional computation delay of d ticks, the PD law (derivative on error or
on measurement, backward difference) and the feedforward 1/K speed + T/K acceleration.
This script builds that closed loop from transfer functions with python-control (c2d with
ZOH, feedback algebra), runs forced_response on the sampled setpoints, and computes
step_info on the step cases. Nothing here shares code with the Rust simulation.

Output: linear_reference.json beside this file (positions and applied voltages at every
tick, and step_info figures), with the library versions. Rerun:

    python3 reference/sim/linear_reference.py

The demo numbers are the invented greenhouse-bench rover's forward axis.
"""

import json
import pathlib
import platform

import control
import numpy as np
import scipy

K, TAU = 180.0, 0.09          # mm/s per V, s (invented demo rover, forward axis)
RATE = 500.0                  # Hz
KP, KD = 0.12, 0.004          # V/mm, V per mm/s
H = 1.0 / RATE


def trapezoid(distance, cruise, accel, t):
    """Sampled rest-to-rest trapezoid (triangle when cruise is not reached)."""
    d = abs(distance)
    sgn = np.sign(distance)
    vp = min(cruise, np.sqrt(accel * d))
    ta = vp / accel
    tc = max((d - vp * vp / accel) / vp, 0.0)
    p = np.zeros_like(t)
    v = np.zeros_like(t)
    a = np.zeros_like(t)
    for i, ti in enumerate(t):
        if ti <= 0:
            pass
        elif ti < ta:
            p[i], v[i], a[i] = 0.5 * accel * ti * ti, accel * ti, accel
        elif ti < ta + tc:
            p[i], v[i] = 0.5 * accel * ta * ta + vp * (ti - ta), vp
        elif ti < 2 * ta + tc:
            r = 2 * ta + tc - ti
            p[i], v[i], a[i] = d - 0.5 * accel * r * r, accel * r, -accel
        else:
            p[i] = d
    return sgn * p, sgn * v, sgn * a


def run(case):
    n = case["ticks"]
    t = np.arange(n) * H
    z = control.tf([1, 0], [1], H)
    plant = control.c2d(control.tf([K], [TAU, 1, 0]), H, method="zoh")
    delay = control.tf([1], [1] + [0] * case["delay_ticks"], H)  # z^-d
    pd_ = plant * delay
    kdf = KD * RATE
    if case["command"]["kind"] == "step":
        r = np.full(n, case["command"]["distance"])
        spd = np.zeros(n)
        acc = np.zeros(n)
    else:
        c = case["command"]
        # Tick k follows the setpoint of time (k + 1) h (the profile advances, then hands
        # out its setpoint).
        r, spd, acc = trapezoid(c["distance"], c["cruise_speed"], c["accel"], t + H)
    uff = spd / K + acc * TAU / K if case["feedforward"] else np.zeros(n)
    if case["derivative"] == "on_error":
        # u = (kp + kdf (1 - z^-1)) (r - y) + uff
        ctrl = (KP + kdf) - kdf * (1 / z)
        g_r = control.feedback(pd_ * ctrl, 1)
        g_f = control.feedback(pd_, ctrl)
    else:
        # u = kp (r - y) - kdf (1 - z^-1) y + uff
        ctrl_y = (KP + kdf) - kdf * (1 / z)
        g_r = control.feedback(pd_, ctrl_y) * KP
        g_f = control.feedback(pd_, ctrl_y)
    y = control.forced_response(g_r, t, r).outputs + control.forced_response(g_f, t, uff).outputs
    y = np.asarray(y).ravel()
    # The command computed at each tick, then delayed.
    e = r - y
    prev_e = np.concatenate([[0.0], e[:-1]])
    prev_y = np.concatenate([[0.0], y[:-1]])
    if case["derivative"] == "on_error":
        u = KP * e + kdf * (e - prev_e) + uff
    else:
        u = KP * e - kdf * (y - prev_y) + uff
    d = case["delay_ticks"]
    applied = np.concatenate([np.zeros(d), u[: n - d]]) if d else u
    out = dict(case)
    out["position"] = [float(f"{v:.15g}") for v in y]
    out["applied_volts"] = [float(f"{v:.15g}") for v in applied]
    if case["command"]["kind"] == "step":
        info = control.step_info(y, t, final_output=case["command"]["distance"])
        out["step_info"] = {k: info[k] for k in ("RiseTime", "SettlingTime", "Overshoot", "PeakTime")}
    return out


def sensitivity(delay_ticks, ticks=20000):
    """l1 norms (sum of |pulse response|) of the closed loop with the PD on error, from a
    voltage added at the plant input and from a measurement error, to the position. They
    bound how far a perturbed loop can drift from the exact one:
    |dx| <= l1_volts * max|dv| + l1_measurement * max|dm|."""
    z = control.tf([1, 0], [1], H)
    plant = control.c2d(control.tf([K], [TAU, 1, 0]), H, method="zoh")
    pd_ = plant * control.tf([1], [1] + [0] * delay_ticks, H)
    kdf = KD * RATE
    ctrl = (KP + kdf) - kdf * (1 / z)
    t = np.arange(ticks) * H
    pulse = np.zeros(ticks)
    pulse[0] = 1.0
    g_v = np.asarray(control.forced_response(control.feedback(pd_, ctrl), t, pulse).outputs).ravel()
    g_m = np.asarray(control.forced_response(-control.feedback(pd_ * ctrl, 1), t, pulse).outputs).ravel()
    return {"delay_ticks": delay_ticks, "derivative": "on_error", "ticks": ticks,
            "l1_volts_to_position": float(np.abs(g_v).sum()),
            "l1_measurement_to_position": float(np.abs(g_m).sum()),
            "tail_volts": float(np.abs(g_v[-100:]).max()),
            "tail_measurement": float(np.abs(g_m[-100:]).max())}


CASES = [
    {"name": "step_on_measurement", "command": {"kind": "step", "distance": 10.0},
     "derivative": "on_measurement", "delay_ticks": 0, "feedforward": False, "ticks": 500},
    {"name": "step_on_error_delay1", "command": {"kind": "step", "distance": 10.0},
     "derivative": "on_error", "delay_ticks": 1, "feedforward": False, "ticks": 500},
    {"name": "move_feedforward_delay1",
     "command": {"kind": "move", "distance": 400.0, "cruise_speed": 400.0, "accel": 1200.0},
     "derivative": "on_error", "delay_ticks": 1, "feedforward": True, "ticks": 1000},
    {"name": "move_feedback_only",
     "command": {"kind": "move", "distance": -30.0, "cruise_speed": 400.0, "accel": 1200.0},
     "derivative": "on_measurement", "delay_ticks": 0, "feedforward": False, "ticks": 400},
]

if __name__ == "__main__":
    result = {
        "generator": "reference/sim/linear_reference.py",
        "versions": {"python": platform.python_version(), "control": control.__version__,
                     "scipy": scipy.__version__, "numpy": np.__version__},
        "plant": {"gain": K, "time_constant_s": TAU, "bias_volts": 0.0},
        "rate_hz": RATE, "kp": KP, "kd": KD,
        "cases": [run(c) for c in CASES],
        "sensitivity": [sensitivity(0), sensitivity(1)],
    }
    path = pathlib.Path(__file__).with_name("linear_reference.json")
    path.write_text(json.dumps(result, indent=1) + "\n")
    print(f"wrote {path}")
