#!/usr/bin/env python3
"""Reference fits for `ampwright identify` (tests/identify.rs), computed with
numpy and scipy on the committed captures, independently of the Rust code:

* the model is the one host-sim's second stage fits (host-sim/src/bench/refine.rs),
  written out again here: i[0] = i0, i[k+1] = a i[k] + b v[k-d],
  y[k] = i[k] + offset, a = exp(-R Ts / L), b = (1 - a) / R, with the voltage
  before the capture's start taken as its first value;
* the start of each fit: a one-step least squares on the same model solved by
  numpy.linalg.lstsq (y[k+1] = a y[k] + b v[k-d] + c);
* the fit: scipy.optimize.least_squares with method "lm" (MINPACK's
  Levenberg-Marquardt) on R, L, offset and i0, tolerances at their floor;
* the voltage delay d: 0 to 4 samples, the one whose fit leaves the least
  sum of squares, as host-sim chooses it.

The captures: host-sim/captures/valve_coil_bench.csv and the two beside this
script (tests/reference/captures/*.csv, each made by `ampwright simulate` of
the TOML beside it; all three INVENTED loads), read by column name: time t_s,
current measured_a (the noisy reading the controller saw), voltage duty x bus_v.

Usage: identify_reference.py [--check]   (see closed_loop_reference.py)
"""

import csv
import math
import os
from pathlib import Path

os.environ.setdefault("OPENBLAS_CORETYPE", "Haswell")  # see design_reference.py

import numpy as np  # noqa: E402
import scipy  # noqa: E402
import scipy.optimize  # noqa: E402
from reference_io import write_or_check  # noqa: E402

HERE = Path(__file__).resolve().parent
ROOT = HERE.parents[1]
OUT = HERE / "identify_reference.json"
CAPTURES = [
    ("valve_coil_bench", ROOT / "host-sim" / "captures" / "valve_coil_bench.csv"),
    ("pump_winding", HERE / "captures" / "pump_winding.csv"),
    ("relay_coil", HERE / "captures" / "relay_coil.csv"),
]
MAX_DELAY = 4


def read(path):
    with open(path, newline="") as f:
        rows = list(csv.DictReader(f))
    t = np.array([float(r["t_s"]) for r in rows])
    y = np.array([float(r["measured_a"]) for r in rows])
    v = np.array([float(r["duty"]) * float(r["bus_v"]) for r in rows])
    dt = np.diff(t)
    period = float(np.sort(dt)[len(dt) // 2])  # the median as host-sim takes it (upper middle)
    return period, y, v


def delayed(v, d):
    return np.concatenate([np.full(d, v[0]), v[: len(v) - d]]) if d else v


def simulate(theta, ts, vd):
    r, l, offset, i0 = theta
    a = math.exp(-r * ts / l)
    b = -math.expm1(-r * ts / l) / r
    out = np.empty(len(vd))
    i = i0
    for k, vk in enumerate(vd):
        out[k] = i + offset
        i = a * i + b * vk
    return out


def start(ts, y, vd):
    """One-step least squares: y[k+1] = a y[k] + b v[k] + c."""
    x = np.column_stack([y[:-1], vd[:-1], np.ones(len(y) - 1)])
    (a, b, c), *_ = np.linalg.lstsq(x, y[1:], rcond=None)
    r = (1.0 - a) / b
    l = -r * ts / math.log(a)
    offset = c / (1.0 - a) if a != 1.0 else 0.0
    return [r, l, offset, y[0] - offset]


def fit(ts, y, v, d):
    vd = delayed(v, d)
    x0 = start(ts, y, vd)
    res = scipy.optimize.least_squares(
        lambda th: simulate(th, ts, vd) - y, x0, method="lm", xtol=3e-16, ftol=3e-16, gtol=3e-16, max_nfev=20000
    )
    return res.x, float(2.0 * res.cost)


def generate():
    cases = []
    for name, path in CAPTURES:
        ts, y, v = read(path)
        tried = [(fit(ts, y, v, d), d) for d in range(MAX_DELAY + 1)]
        ((theta, sse), d) = min(tried, key=lambda t: t[0][1])
        cases.append(
            dict(
                name=name,
                delay_samples=d,
                resistance_ohm=float(theta[0]),
                inductance_h=float(theta[1]),
                offset_a=float(theta[2]),
                initial_current_a=float(theta[3]),
                sse_a2=sse,
            )
        )
        print(f"{name}: delay {d}, R {theta[0]:.9g} ohm, L {theta[1]:.9g} H, offset {theta[2]:.3e} A, sse {sse:.6e}")
    return dict(
        generated_by="tests/reference/identify_reference.py",
        versions=dict(numpy=np.__version__, scipy=scipy.__version__),
        cases=cases,
    )


def main():
    write_or_check(OUT, generate(), "identify", 1e-9)


if __name__ == "__main__":
    main()
