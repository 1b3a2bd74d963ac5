#!/usr/bin/env python3
"""Reference values for the LED string of host-sim (host-sim/src/plant/led.rs),
computed with numpy and scipy independently of the Rust code.

The string: n diodes in series, each the Shockley equation with an ideality
factor N and a series resistance R_s, at the thermal voltage V_T = k T / q
(k and q as the SI defines them exactly):

    v(i) = n (N V_T ln(1 + i / I_s) + R_s i)          numpy.log1p

and its inverse, the current at a string voltage v, in closed form with the
Lambert W function (scipy.special.lambertw): per diode, with a = N V_T and
u = v / n,

    i = (a / R_s) W((I_s R_s / a) exp((u + I_s R_s) / a)) - I_s

and, for the first string behind a 100 uH inductor, the current over 40
periods of 50 us from a start under a held voltage, L di/dt = v - v(i), by
scipy.integrate.solve_ivp (Radau, tolerances 1e-12 relative, 1e-15 absolute,
a first step of 1e-13 s: the knee at zero current is stiff): the rise from
zero, a fall to a lower level, and a switch-off to zero volts.

The parameter sets are INVENTED (a white, a red and a hot power string).

Usage: led_reference.py [--check]   (see closed_loop_reference.py)
"""

import math
import os
from pathlib import Path

os.environ.setdefault("OPENBLAS_CORETYPE", "Haswell")  # see design_reference.py

import numpy as np
from scipy.integrate import solve_ivp
from scipy.special import lambertw

from reference_io import write_or_check

K = 1.380649e-23
Q = 1.602176634e-19

STRINGS = [
    # count, I_s (A), N, R_s (ohm), junction (C)
    {"count": 6, "saturation_current_a": 1e-24, "ideality": 2.0, "series_resistance_ohm": 0.5, "junction_c": 25.0},
    {"count": 10, "saturation_current_a": 1e-20, "ideality": 1.8, "series_resistance_ohm": 1.0, "junction_c": 40.0},
    {"count": 3, "saturation_current_a": 1e-22, "ideality": 2.2, "series_resistance_ohm": 0.2, "junction_c": 85.0},
]
CURRENTS = [1e-6, 1e-3, 0.01, 0.1, 0.35, 0.7, 1.5]


def case(s):
    vt = K * (s["junction_c"] + 273.15) / Q
    a = s["ideality"] * vt
    n, i_s, r = s["count"], s["saturation_current_a"], s["series_resistance_ohm"]
    i = np.array(CURRENTS)
    v = n * (a * np.log1p(i / i_s) + r * i)
    u = v / n
    w = lambertw((i_s * r / a) * np.exp((u + i_s * r) / a)).real
    back = (a / r) * w - i_s
    return {"string": s, "currents_a": CURRENTS, "voltages_v": v.tolist(), "currents_at_voltages_a": back.tolist()}


def string_voltage(s, i):
    vt = K * (s["junction_c"] + 273.15) / Q
    a = s["ideality"] * vt
    i = max(i, 0.0)
    return s["count"] * (a * math.log1p(i / s["saturation_current_a"]) + s["series_resistance_ohm"] * i)


def trajectory(s, inductance_h, start_a, volts, periods=40, period_s=50e-6):
    out, i = [], start_a
    for _ in range(periods):
        sol = solve_ivp(
            lambda t, y: [(volts - string_voltage(s, y[0])) / inductance_h],
            [0.0, period_s],
            [i],
            method="Radau",
            rtol=1e-12,
            atol=1e-15,
            first_step=1e-13,
        )
        i = max(float(sol.y[0][-1]), 0.0)
        out.append(i)
    return {"start_a": start_a, "volts": volts, "inductance_h": inductance_h, "period_s": period_s, "currents_a": out}


def main():
    white = STRINGS[0]
    runs = [
        trajectory(white, 100e-6, 0.0, string_voltage(white, 0.7)),
        trajectory(white, 100e-6, 0.7, string_voltage(white, 0.35)),
        trajectory(white, 100e-6, 0.7, 0.0),
    ]
    fresh = {"cases": {"strings": [case(s) for s in STRINGS], "runs": runs}}
    write_or_check(Path(__file__).with_name("led_reference.json"), fresh, "LED string", 1e-9)


if __name__ == "__main__":
    main()
