#!/usr/bin/env python3
"""Reference step responses of the linear, unsaturated discrete current loop,
computed with python-control, for tests/external_checks.rs.

Each case is a plant (resistance, inductance, optionally a free rotor with
back-EMF, torque constant, inertia and viscous friction), a PI controller and a
control period. The loop is built exactly as the firmware runs it:

    plant   Gd(z) = c2d(G(s), Ts, 'zoh')         (PWM volts held over a period)
    delay   z^-1                                (one-sample computation delay)
    PI      backward Euler: Kp + Ki Ts z / (z - 1)
            Tustin:         Kp + Ki Ts / 2 (z + 1) / (z - 1)
    loop    feedback(PI * z^-1 * Gd, 1), unit step on the setpoint

and simulated with control.forced_response. The response is the current at the
sampling instants. control.step_info gives the reference rise time, overshoot
and peak for the same response.

Usage:
    python closed_loop_reference.py            write closed_loop_reference.json
    python closed_loop_reference.py --check    recompute and compare with it

The case values are invented (the demo's AW-C24 winding and two others).
Package versions are pinned in requirements.txt beside this script.
"""

import math
import os
import sys
from pathlib import Path

# numpy and scipy pick their BLAS kernels by CPU, and those differ in the last
# digits (2.6e-12 relative between the AVX-512 and the AVX2 kernels on the same
# pinned versions): one fixed choice, the AVX2 kernels the committed values were
# made with, keeps them reproducible from machine to machine. Set before numpy
# loads.
os.environ.setdefault("OPENBLAS_CORETYPE", "Haswell")

import control  # noqa: E402
import numpy as np  # noqa: E402
import scipy  # noqa: E402
from reference_io import write_or_check  # noqa: E402

HERE = Path(__file__).resolve().parent
OUT = HERE / "closed_loop_reference.json"

CASES = [
    # name, R ohm, L H, Ts s, Kp V/A, Ti s, rule, rotor (Ke, Kt, J, B) or None, ticks
    dict(name="demo_winding_backward_euler", r=1.9, l=2.4e-3, ts=50e-6,
         kp=2.4e-3 * 2 * math.pi * 800.0, ti=2.4e-3 / 1.9, rule="backward_euler", rotor=None, ticks=200),
    dict(name="demo_winding_tustin_fast", r=1.9, l=2.4e-3, ts=50e-6,
         kp=2.4e-3 * 2 * math.pi * 1500.0, ti=2.4e-3 / 1.9, rule="tustin", rotor=None, ticks=200),
    dict(name="small_coil_slow_loop", r=12.0, l=30e-3, ts=200e-6,
         kp=30e-3 * 2 * math.pi * 60.0, ti=1.5e-3, rule="backward_euler", rotor=None, ticks=300),
    dict(name="free_rotor_backward_euler", r=1.9, l=2.4e-3, ts=50e-6,
         kp=2.4e-3 * 2 * math.pi * 800.0, ti=2.4e-3 / 1.9, rule="backward_euler",
         rotor=dict(ke=0.031, kt=0.031, j=5.0e-6, b=2.0e-6), ticks=400),
]


def plant(case):
    r, l = case["r"], case["l"]
    rot = case["rotor"]
    if rot is None:
        return control.ss([[-r / l]], [[1.0 / l]], [[1.0]], [[0.0]])
    ke, kt, j, b = rot["ke"], rot["kt"], rot["j"], rot["b"]
    a = [[-r / l, -ke / l], [kt / j, -b / j]]
    return control.ss(a, [[1.0 / l], [0.0]], [[1.0, 0.0]], [[0.0]])


def response(case):
    ts = case["ts"]
    gd = control.c2d(plant(case), ts, method="zoh")
    z = control.tf([1, 0], [1], ts)
    ki = case["kp"] / case["ti"]
    if case["rule"] == "backward_euler":
        pi = case["kp"] + ki * ts * z / (z - 1)
    else:
        pi = case["kp"] + ki * ts / 2 * (z + 1) / (z - 1)
    loop = control.feedback(pi * (1 / z) * gd, 1)
    n = case["ticks"]
    t = np.arange(n) * ts
    res = control.forced_response(loop, T=t, U=np.ones(n))
    y = np.asarray(res.outputs).reshape(-1)
    info = control.step_info(y, T=t, yfinal=1.0, SettlingTimeThreshold=0.02, RiseTimeLimits=(0.1, 0.9))
    return y, {k: float(info[k]) for k in ("RiseTime", "Overshoot", "Peak", "PeakTime", "SettlingTime")}


def generate():
    out = {
        "generated_by": "tests/reference/closed_loop_reference.py",
        "versions": {
            "python": sys.version.split()[0],
            "control": control.__version__,
            "numpy": np.__version__,
            "scipy": scipy.__version__,
        },
        "cases": [],
    }
    for case in CASES:
        y, info = response(case)
        out["cases"].append({**case, "current_a": [float(v) for v in y], "step_info": info})
    return out


def main():
    write_or_check(OUT, generate(), "closed-loop", 1e-12)


if __name__ == "__main__":
    main()
