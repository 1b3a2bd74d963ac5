#!/usr/bin/env python3
"""Reference values for pi-core's design math (tests/design_checks.rs), computed
with python-control, numpy and scipy, independently of the Rust formulas where a
library can do the work:

* gains by direct discrete placement: the characteristic polynomial of the
  sampled loop is built symbolically from numpy polynomials and the gains solved
  from the desired poles by least squares (numpy.linalg.lstsq), not by the
  closed forms of discrete.rs;
* discrete closed-loop poles of each design: control.feedback(...).poles() on the
  loop built from control.c2d (zero-order hold), the PI and the delay;
* gain and phase margins: control.stability_margins on the same open loop;
* the largest stable control period: bisection on the pole magnitude of the
  loop rebuilt at each period;
* the continuous root-locus design: the closed-form gains, checked by
  scipy.signal on the continuous closed loop (its poles).

Usage: design_reference.py [--check]   (see closed_loop_reference.py)
Case values are invented.
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
import scipy.signal  # noqa: E402
from reference_io import write_or_check  # noqa: E402

HERE = Path(__file__).resolve().parent
OUT = HERE / "design_reference.json"

CASES = [
    dict(name="demo_winding", r=1.9, l=2.4e-3, ts=50e-6, delay=True, tau=0.0, settling=2e-3, overshoot=0.05),
    dict(name="demo_no_delay", r=1.9, l=2.4e-3, ts=50e-6, delay=False, tau=0.0, settling=1e-3, overshoot=0.10),
    dict(name="solenoid_slow_loop", r=12.0, l=30e-3, ts=200e-6, delay=True, tau=0.0, settling=15e-3, overshoot=0.02),
    dict(name="voice_coil_filtered", r=4.0, l=0.6e-3, ts=25e-6, delay=True, tau=4e-6, settling=1.2e-3, overshoot=0.05),
]


def spec_poles(settling, overshoot):
    ln = math.log(overshoot)
    zeta = -ln / math.sqrt(math.pi ** 2 + ln ** 2)
    sigma = 4.0 / settling
    wn = sigma / zeta
    wd = wn * math.sqrt(1 - zeta ** 2)
    return sigma, wn, wd


def measured_plant(c):
    """The current as the controller sees it: winding, then the filter if any."""
    g = control.tf([1.0], [c["l"], c["r"]])
    if c["tau"] > 0:
        g = g * control.tf([1.0], [c["tau"], 1.0])
    return g


def open_loop(c, kp, ti):
    ts = c["ts"]
    gd = control.c2d(measured_plant(c), ts, method="zoh")
    z = control.tf([1, 0], [1], ts)
    pi = kp + (kp / ti) * ts * z / (z - 1)
    loop = pi * gd
    if c["delay"]:
        loop = loop * (1 / z)
    return loop


def discrete_poles(c, kp, ti):
    return np.asarray(control.feedback(open_loop(c, kp, ti), 1).poles())


def direct_discrete(c):
    """Gains placing the dominant pair; solved numerically from polynomials."""
    ts = c["ts"]
    a = math.exp(-c["r"] * ts / c["l"])
    b = (1 - a) / c["r"]
    sigma, _, wd = spec_poles(c["settling"], c["overshoot"])
    p = complex(math.exp(-sigma * ts) * math.cos(wd * ts), math.exp(-sigma * ts) * math.sin(wd * ts))
    pair = np.real(np.poly([p, p.conjugate()]))
    base = np.polymul([1, -1], [1, -a])  # (z - 1)(z - a)
    if c["delay"]:
        base = np.polymul(base, [1, 0])
    # char(z) = base + b (k1 z - k0), unknowns k1, k0 and the remaining factor.
    n = len(base) - 1
    rest = n - 2  # degree of the free factor (monic)
    # Unknowns x = [k1, k0, r_1..r_rest]: base + b k1 z - b k0 = pair * (z^rest + r_1 z^(rest-1) + ...)
    rows = n + 1
    m = np.zeros((rows, 2 + rest))
    rhs = -np.asarray(base, dtype=float)
    m[rows - 2, 0] += b
    m[rows - 1, 1] -= b
    lead = np.polymul(pair, [1] + [0] * rest)
    rhs = rhs + lead
    for j in range(rest):
        mono = [0] * (j + 1) + [1] + [0] * (rest - j - 1)
        col = np.polymul(pair, mono)
        col = np.concatenate([np.zeros(rows - len(col)), col])
        m[:, 2 + j] -= col
    x, *_ = np.linalg.lstsq(m, rhs, rcond=None)
    k1, k0 = x[0], x[1]
    kp = k0
    ki_ts = k1 - k0
    return kp, kp * ts / ki_ts


def step_metrics(c, kp, ti, b):
    """Unit setpoint step of the sampled loop with setpoint weight b, on the true
    current (not the filtered one): control.forced_response and step_info."""
    ts = c["ts"]
    z = control.tf([1, 0], [1], ts)
    ki_ts = kp / ti * ts
    pi_err = kp + ki_ts * z / (z - 1)          # acts on e = r - y
    pi_ref = (b - 1) * kp                       # extra proportional action on r
    g_true = control.c2d(control.tf([1.0], [c["l"], c["r"]]), ts, method="zoh")
    g_meas = control.c2d(measured_plant(c), ts, method="zoh")
    d = (1 / z) if c["delay"] else control.tf([1], [1], ts)
    # u = pi_err (r - ym) + pi_ref r ; i = g_true d u ; ym = g_meas d u
    loop = pi_err * d * g_meas
    u_from_r = (pi_err + pi_ref) / (1 + loop)
    y = control.minreal(u_from_r * d * g_true, verbose=False)
    n = int(6 * c["settling"] / ts)
    t = np.arange(n) * ts
    res = control.forced_response(y, T=t, U=np.ones(n))
    out = np.asarray(res.outputs).reshape(-1)
    info = control.step_info(out, T=t, yfinal=1.0, SettlingTimeThreshold=0.02, RiseTimeLimits=(0.1, 0.9))
    return dict(
        overshoot=float(max(0.0, out.max() - 1.0)),
        settling_time_s=float(info["SettlingTime"]),
        rise_time_s=float(info["RiseTime"]),
    )


def largest_stable_period(c, kp, ti):
    def stable(ts):
        cc = dict(c, ts=ts)
        return np.max(np.abs(discrete_poles(cc, kp, ti))) < 1.0

    lo = hi = c["ts"]
    if stable(lo):
        while stable(hi):
            lo = hi
            hi *= 1.25
    else:
        while not stable(lo):
            hi = lo
            lo *= 0.8
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        if stable(mid):
            lo = mid
        else:
            hi = mid
    return lo


def case_values(c):
    sigma, wn, wd = spec_poles(c["settling"], c["overshoot"])
    out = dict(c)
    designs = {}
    kp_rl = 2 * sigma * c["l"] - c["r"]
    if kp_rl > 0:
        designs["root_locus"] = (kp_rl, kp_rl / (c["l"] * wn ** 2))
        cont = control.feedback(control.tf([kp_rl, kp_rl / designs["root_locus"][1]], [1, 0]) * control.tf([1], [c["l"], c["r"]]), 1)
        den = np.asarray(cont.den[0][0], dtype=float)
        out["root_locus_continuous_poles"] = [[float(z.real), float(z.imag)] for z in np.roots(den)]
        # scipy cross-check of the same continuous loop.
        _, p_sp, _ = scipy.signal.tf2zpk([kp_rl, kp_rl / designs["root_locus"][1]], np.polyadd(np.polymul([1, 0], [c["l"], c["r"]]), [kp_rl, kp_rl / designs["root_locus"][1]]))
        assert np.allclose(sorted(p_sp, key=lambda z: z.imag), sorted(np.roots(den), key=lambda z: z.imag))
    t_sigma = (c["ts"] if c["delay"] else 0.0) + c["ts"] / 2 + c["tau"]
    designs["modulus_optimum"] = (c["l"] / (2 * t_sigma), c["l"] / c["r"])
    if c["tau"] == 0:
        designs["direct_discrete"] = direct_discrete(c)
    out["designs"] = {}
    for name, (kp, ti) in designs.items():
        poles = discrete_poles(c, kp, ti)
        gm, pm, _sm, _wpc, wgc, _wms = control.stability_margins(open_loop(c, kp, ti))
        out["designs"][name] = dict(
            kp=float(kp),
            ti=float(ti),
            discrete_poles=[[float(z.real), float(z.imag)] for z in poles],
            gain_margin=float(gm) if np.isfinite(gm) else None,
            phase_margin_deg=float(pm) if np.isfinite(pm) else None,
            crossover_hz=float(wgc) / (2 * math.pi) if np.isfinite(wgc) else None,
            largest_stable_period_s=float(largest_stable_period(c, kp, ti)),
            step_b1=step_metrics(c, kp, ti, 1.0),
            step_b0=step_metrics(c, kp, ti, 0.0),
        )
    return out


def generate():
    return {
        "generated_by": "tests/reference/design_reference.py",
        "versions": {
            "python": sys.version.split()[0],
            "control": control.__version__,
            "numpy": np.__version__,
            "scipy": scipy.__version__,
        },
        "cases": [case_values(c) for c in CASES],
    }


def main():
    write_or_check(OUT, generate(), "design", 1e-9)


if __name__ == "__main__":
    main()
