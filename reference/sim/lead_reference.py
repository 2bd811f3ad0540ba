#!/usr/bin/env python3
"""Reference responses for ctrl-design's simulation of the phase-lead position loop.

The lead C(s) = Kc (T1 s + 1) / (alpha T1 s + 1) is designed here by the closed form for a
crossover wc and phase margin PM (lead phi = PM - (180 + plant phase), sin phi =
(1 - alpha) / (1 + alpha), the largest lead at wc = 1 / (T1 sqrt(alpha)), Kc so that
|C P| = 1 at wc; the usual frequency-response lead design, from memory). It is discretised
with python-control's sample_system(method="tustin", prewarp_frequency=wc), and the closed
loop with the ZOH plant K/(s (T s + 1)) (c2d), an optional delay of d ticks and the
feedforward 1/K speed + T/K acceleration is built from transfer functions (feedback
algebra) and run with forced_response. Nothing here shares code with the Rust simulation.

Also: the l1 norms of the lead loop's pulse responses (voltage at the plant input ->
position, measurement error -> position) that bound the fixed-point loop's drift.

Output: lead_reference.json beside this file, with the library versions. Rerun:

    python3 reference/sim/lead_reference.py

The demo numbers are the invented greenhouse-bench rover's forward axis.
"""

import json
import pathlib
import platform

import control
import numpy as np
import scipy

from linear_reference import trapezoid  # same sampled trapezoid as the PD reference

K, TAU = 180.0, 0.09          # mm/s per V, s (invented demo rover, forward axis)
RATE = 500.0                  # Hz
H = 1.0 / RATE
WC, PM = 30.0, 50.0           # rad/s, deg


def lead_design():
    plant_phase = -90.0 - np.degrees(np.arctan(WC * TAU))
    phi = np.radians(PM - (180.0 + plant_phase))
    alpha = (1 - np.sin(phi)) / (1 + np.sin(phi))
    t1 = 1.0 / (WC * np.sqrt(alpha))
    plant_mag = K / (WC * np.sqrt(1 + (WC * TAU) ** 2))
    kc = np.sqrt(alpha) / plant_mag
    c_s = control.tf([kc * t1, kc], [alpha * t1, 1])
    c_z = control.sample_system(c_s, H, method="tustin", prewarp_frequency=WC)
    num = np.asarray(c_z.num[0][0], dtype=float)
    den = np.asarray(c_z.den[0][0], dtype=float)
    b0, b1 = num / den[0]
    a1 = den[1] / den[0]
    # Check of the design: the continuous loop's phase margin at wc.
    p_s = control.tf([K], [TAU, 1, 0])
    gm, pm, wcg, wcp = control.margin(c_s * p_s)
    return {"kc": kc, "alpha": alpha, "t1": t1, "lead_deg": float(np.degrees(phi)),
            "b0": float(b0), "b1": float(b1), "a1": float(a1),
            "continuous_phase_margin_deg": float(pm), "continuous_crossover_rad_s": float(wcp)}, c_z


def loops(c_z, delay_ticks):
    plant = control.c2d(control.tf([K], [TAU, 1, 0]), H, method="zoh")
    p_d = plant * control.tf([1], [1] + [0] * delay_ticks, H)  # z^-d
    g_r = control.feedback(p_d * c_z, 1)      # r -> y
    g_f = control.feedback(p_d, c_z)          # voltage at the plant input -> y
    return g_r, g_f


def run(case, c_z):
    n = case["ticks"]
    t = np.arange(n) * H
    if case["command"]["kind"] == "step":
        r = np.full(n, case["command"]["distance"])
        spd = np.zeros(n)
        acc = np.zeros(n)
    else:
        c = case["command"]
        # Tick k follows the setpoint of time (k + 1) h.
        r, spd, acc = trapezoid(c["distance"], c["cruise_speed"], c["accel"], t + H)
    uff = spd / K + acc * TAU / K if case["feedforward"] else np.zeros(n)
    g_r, g_f = loops(c_z, case["delay_ticks"])
    y = control.forced_response(g_r, t, r).outputs + control.forced_response(g_f, t, uff).outputs
    y = np.asarray(y).ravel()
    e = r - y
    u = np.asarray(control.forced_response(c_z, t, e).outputs).ravel() + uff
    d = case["delay_ticks"]
    applied = np.concatenate([np.zeros(d), u[: n - d]]) if d else u
    out = dict(case)
    out["position"] = [float(f"{v:.15g}") for v in y]
    out["applied_volts"] = [float(f"{v:.15g}") for v in applied]
    if case["command"]["kind"] == "step":
        info = control.step_info(y, t, final_output=case["command"]["distance"])
        out["step_info"] = {k: info[k] for k in ("RiseTime", "SettlingTime", "Overshoot", "PeakTime")}
    return out


def sensitivity(c_z, delay_ticks, ticks=20000):
    """l1 norms (sum of |pulse response|) from a voltage added at the plant input and from
    a measurement error to the position: |dx| <= l1_volts max|dv| + l1_measurement max|dm|."""
    g_r, g_f = loops(c_z, delay_ticks)
    t = np.arange(ticks) * H
    pulse = np.zeros(ticks)
    pulse[0] = 1.0
    g_v = np.asarray(control.forced_response(g_f, t, pulse).outputs).ravel()
    g_m = np.asarray(control.forced_response(-g_r, t, pulse).outputs).ravel()
    return {"delay_ticks": delay_ticks, "ticks": ticks,
            "l1_volts_to_position": float(np.abs(g_v).sum()),
            "l1_measurement_to_position": float(np.abs(g_m).sum()),
            "tail_volts": float(np.abs(g_v[-100:]).max()),
            "tail_measurement": float(np.abs(g_m[-100:]).max())}


CASES = [
    {"name": "lead_step_delay0", "command": {"kind": "step", "distance": 10.0},
     "delay_ticks": 0, "feedforward": False, "ticks": 500},
    {"name": "lead_step_delay1", "command": {"kind": "step", "distance": 10.0},
     "delay_ticks": 1, "feedforward": False, "ticks": 500},
    {"name": "lead_move_feedforward_delay1",
     "command": {"kind": "move", "distance": 400.0, "cruise_speed": 400.0, "accel": 1200.0},
     "delay_ticks": 1, "feedforward": True, "ticks": 1000},
]

if __name__ == "__main__":
    design, c_z = lead_design()
    result = {
        "generator": "reference/sim/lead_reference.py",
        "versions": {"python": platform.python_version(), "control": control.__version__,
                     "scipy": scipy.__version__, "numpy": np.__version__},
        "plant": {"gain": K, "time_constant_s": TAU, "bias_volts": 0.0},
        "rate_hz": RATE, "crossover_rad_s": WC, "phase_margin_deg": PM,
        "design": design,
        "cases": [run(c, c_z) for c in CASES],
        "sensitivity": [sensitivity(c_z, 0), sensitivity(c_z, 1)],
    }
    path = pathlib.Path(__file__).with_name("lead_reference.json")
    path.write_text(json.dumps(result, indent=1) + "\n")
    print(f"wrote {path}")
