#!/usr/bin/env python3
"""The simulator against python-control on the same linear loop, side by side
in one run: the first case of tests/reference/closed_loop_reference.py (the
invented demo winding under the backward-Euler PI with a one-sample delay),
N ticks each, the best of three wall times each.

* ours: benches/linear_ticks.rs, the simulator running the real pi-core PI on
  the R-L model and an ideal averaged bridge, every tick kept in its trace;
* theirs: control.forced_response on the closed loop built as in the reference
  script (c2d of the winding, the PI, the delay, feedback).

Both produce the same current to 1e-6 (tests/external_checks.rs); this script
only times them. Usage (with the pinned venv of tests/reference):

    .venv-reference/bin/python benches/vs-python/compare.py [TICKS]

Not run in CI (timing is not a test).
"""

import math
import os
import subprocess
import sys
import time
from pathlib import Path

os.environ.setdefault("OPENBLAS_CORETYPE", "Haswell")

import control  # noqa: E402
import numpy as np  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]


def python_control(ticks: int) -> tuple[float, float]:
    r, l, ts = 1.9, 2.4e-3, 50e-6
    kp, ti = l * 2 * math.pi * 800.0, l / r
    gd = control.c2d(control.ss([[-r / l]], [[1.0 / l]], [[1.0]], [[0.0]]), ts, method="zoh")
    z = control.tf([1, 0], [1], ts)
    pi = kp + kp / ti * ts * z / (z - 1)
    loop = control.feedback(pi * (1 / z) * gd, 1)
    t = np.arange(ticks) * ts
    u = np.ones(ticks)
    best, last = math.inf, 0.0
    for _ in range(3):
        t0 = time.perf_counter()
        res = control.forced_response(loop, T=t, U=u)
        best = min(best, time.perf_counter() - t0)
        last = float(np.asarray(res.outputs).reshape(-1)[-1])
    return best, last


def ours(ticks: int) -> tuple[float, float]:
    subprocess.run(
        ["cargo", "build", "--release", "-q", "-p", "ampwright-benches", "--example", "linear_ticks"],
        cwd=ROOT,
        check=True,
    )
    out = subprocess.run(
        [str(ROOT / "target" / "release" / "examples" / "linear_ticks"), str(ticks)],
        capture_output=True,
        text=True,
        check=True,
    ).stdout.split()
    return float(out[3]), float(out[5])


def main() -> None:
    ticks = int(sys.argv[1]) if len(sys.argv) > 1 else 200_000
    ours_s, ours_i = ours(ticks)
    theirs_s, theirs_i = python_control(ticks)
    print(f"{ticks} ticks of the same loop (final current {ours_i:.6f} A here, {theirs_i:.6f} A there)")
    print(f"simulator:      {ours_s:.4f} s, {ticks / ours_s / 1e6:.2f} M ticks/s")
    print(f"forced_response: {theirs_s:.4f} s, {ticks / theirs_s / 1e6:.2f} M ticks/s (python-control {control.__version__})")
    print(f"the simulator is {theirs_s / ours_s:.1f}x python-control's forced_response")


if __name__ == "__main__":
    main()
