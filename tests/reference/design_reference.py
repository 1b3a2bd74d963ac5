#!/usr/bin/env python3
"""Reference values for pi-core's design math (tests/design_checks.rs), computed
with python-control, numpy and scipy, independently of the Rust formulas where a
library can do the work:

* gains by direct discrete placement: the characteristic polynomial of the
  sampled loop is built symbolically from numpy polynomials and the gains solved
  from the desired poles by least squares (numpy.linalg.lstsq), not by the
  closed forms of discrete.rs;
* the sampled plant with its sample-to-update delay of D periods (0 <= D <= 1):
  an exact discretisation of the state-space winding (and filter) whose input
  changes D Ts after each sample, from scipy.linalg.expm of the augmented
  matrix (the input of the last period kept as an extra state), not the
  partial fractions of analysis.rs; D = 0 is control.c2d's zero-order hold;
* discrete closed-loop poles of each design: control.feedback(...).poles() on
  the loop built from that plant and the PI;
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
import scipy.linalg  # noqa: E402
import scipy.optimize  # noqa: E402
import scipy.signal  # noqa: E402
from reference_io import write_or_check  # noqa: E402

HERE = Path(__file__).resolve().parent
OUT = HERE / "design_reference.json"

# delay: the sample-to-update delay in control periods.
CASES = [
    dict(name="demo_winding", r=1.9, l=2.4e-3, ts=50e-6, delay=1.0, tau=0.0, settling=2e-3, overshoot=0.05),
    dict(name="demo_no_delay", r=1.9, l=2.4e-3, ts=50e-6, delay=0.0, tau=0.0, settling=1e-3, overshoot=0.10),
    dict(name="solenoid_slow_loop", r=12.0, l=30e-3, ts=200e-6, delay=1.0, tau=0.0, settling=15e-3, overshoot=0.02),
    dict(name="voice_coil_filtered", r=4.0, l=0.6e-3, ts=25e-6, delay=1.0, tau=4e-6, settling=1.2e-3, overshoot=0.05),
    dict(name="demo_centre_sample", r=1.9, l=2.4e-3, ts=50e-6, delay=0.5, tau=0.0, settling=1.5e-3, overshoot=0.05),
    dict(name="fan_short_compute", r=0.8, l=0.9e-3, ts=40e-6, delay=0.3, tau=0.0, settling=1.0e-3, overshoot=0.08),
    dict(name="demo_no_overshoot", r=1.9, l=2.4e-3, ts=50e-6, delay=0.5, tau=0.0, settling=2e-3, overshoot=0.0),
    dict(name="voice_coil_centre_filtered", r=4.0, l=0.6e-3, ts=25e-6, delay=0.5, tau=4e-6, settling=1.2e-3, overshoot=0.05),
]


def critical_settling_wn_ts():
    """wn ts of a critically damped second-order step entering the 2 % band."""
    return scipy.optimize.brentq(lambda x: (1 + x) * math.exp(-x) - 0.02, 1.0, 20.0, xtol=1e-15)


def spec_poles(settling, overshoot):
    if overshoot == 0.0:
        wn = critical_settling_wn_ts() / settling
        return wn, wn, 0.0
    ln = math.log(overshoot)
    zeta = -ln / math.sqrt(math.pi ** 2 + ln ** 2)
    sigma = 4.0 / settling
    wn = sigma / zeta
    wd = wn * math.sqrt(1 - zeta ** 2)
    return sigma, wn, wd


def continuous_plant(c, measured):
    """State space of the winding (state i) and the filter (state y): A, B, C."""
    r, l, tau = c["r"], c["l"], c["tau"]
    if tau > 0:
        a = np.array([[-r / l, 0.0], [1.0 / tau, -1.0 / tau]])
        b = np.array([[1.0 / l], [0.0]])
        out = np.array([[0.0, 1.0]]) if measured else np.array([[1.0, 0.0]])
    else:
        a = np.array([[-r / l]])
        b = np.array([[1.0 / l]])
        out = np.array([[1.0]])
    return a, b, out


def held_integral(a, b, t):
    """(exp(A t), integral_0^t exp(A s) ds B) from the augmented matrix exponential."""
    n = a.shape[0]
    m = np.zeros((n + 1, n + 1))
    m[:n, :n] = a
    m[:n, n:] = b
    e = scipy.linalg.expm(m * t)
    return e[:n, :n], e[:n, n:]


def sampled_plant(c, measured=True):
    """The held plant whose input changes delay * ts after each sample, exactly."""
    ts, dly = c["ts"], c["delay"] * c["ts"]
    a, b, out = continuous_plant(c, measured)
    if dly == 0.0:
        return control.c2d(control.ss(a, b, out, 0.0), ts, method="zoh")
    n = a.shape[0]
    phi, _ = held_integral(a, b, ts)
    phi_late, gamma0 = held_integral(a, b, ts - dly)
    _, early = held_integral(a, b, dly)
    gamma1 = phi_late @ early
    big_a = np.zeros((n + 1, n + 1))
    big_a[:n, :n] = phi
    big_a[:n, n:] = gamma1
    big_b = np.vstack([gamma0, [[1.0]]])
    big_c = np.hstack([out, [[0.0]]])
    return control.ss(big_a, big_b, big_c, 0.0, ts)


def plant_tf(c, measured=True):
    """sampled_plant as a transfer function, with the numerator's leading
    coefficients that are round-off (below 1e-12 of the largest) taken out: at
    D = 1 the input of the period itself has no effect, and a leading 1e-20
    would put a spurious zero near infinity."""
    tf = control.ss2tf(sampled_plant(c, measured))
    num = np.asarray(tf.num[0][0], dtype=float)
    den = np.asarray(tf.den[0][0], dtype=float)
    big = np.max(np.abs(num))
    k = 0
    while k < len(num) - 1 and abs(num[k]) < 1e-12 * big:
        k += 1
    return control.tf(num[k:], den, c["ts"])


def open_loop(c, kp, ti):
    ts = c["ts"]
    z = control.tf([1, 0], [1], ts)
    pi = kp + (kp / ti) * ts * z / (z - 1)
    return pi * plant_tf(c)


def discrete_poles(c, kp, ti):
    return np.asarray(control.feedback(open_loop(c, kp, ti), 1).poles())


def direct_discrete(c):
    """Gains placing the dominant pair; solved numerically from polynomials."""
    ts = c["ts"]
    sigma, _, wd = spec_poles(c["settling"], c["overshoot"])
    p = complex(math.exp(-sigma * ts) * math.cos(wd * ts), math.exp(-sigma * ts) * math.sin(wd * ts))
    pair = np.real(np.poly([p, p.conjugate()]))
    tf = plant_tf(c)
    num = np.trim_zeros(np.asarray(tf.num[0][0], dtype=float), "f")
    den = np.asarray(tf.den[0][0], dtype=float)
    num, den = num / den[0], den / den[0]
    base = np.polymul([1, -1], den)  # (z - 1) den(z)
    # char(z) = base + (k1 z - k0) num(z), unknowns k1, k0 and the remaining factor.
    n = len(base) - 1
    rest = n - 2  # degree of the free factor (monic)
    rows = n + 1
    m = np.zeros((rows, 2 + rest))
    rhs = -np.asarray(base, dtype=float)
    k1_col = np.polymul([1, 0], num)
    k0_col = -np.asarray(num)
    m[rows - len(k1_col):, 0] += k1_col
    m[rows - len(k0_col):, 1] += k0_col
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
    g_true = plant_tf(c, measured=False)
    g_meas = plant_tf(c)
    # u = pi_err (r - ym) + pi_ref r ; i = g_true u ; ym = g_meas u
    loop = pi_err * g_meas
    u_from_r = (pi_err + pi_ref) / (1 + loop)
    y = control.minreal(u_from_r * g_true, verbose=False)
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
    t_sigma = c["delay"] * c["ts"] + c["ts"] / 2 + c["tau"]
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
