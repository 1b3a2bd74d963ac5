#!/usr/bin/env python3
"""10,000 averaged-mode runs of the demo through `ampwright sweep`, on one
thread and on every thread, side by side in one run (the whole process:
parsing, 10,000 runs, the reduction and the files).

    cargo build --release -p host-sim
    python3 benches/sweep_speed.py [RUNS]
"""
import os
import subprocess
import sys
import tempfile
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BIN = os.path.join(ROOT, "target", "release", "ampwright")


def main():
    runs = sys.argv[1] if len(sys.argv) > 1 else "10000"
    with open(os.path.join(ROOT, "host-sim", "scenarios", "carousel_step.toml")) as f:
        text = f.read().replace('mode = "switching"', 'mode = "averaged"')
    with tempfile.TemporaryDirectory() as d:
        scenario = os.path.join(d, "carousel_averaged.toml")
        with open(scenario, "w") as f:
            f.write(text)
        times = {}
        for threads in ["1", str(os.cpu_count())]:
            t0 = time.perf_counter()
            subprocess.run(
                [BIN, "sweep", scenario, "--runs", runs, "--threads", threads, "--quiet", "--out", d],
                check=True,
                stdout=subprocess.DEVNULL,
            )
            times[threads] = time.perf_counter() - t0
            print(f"{runs} runs on {threads} thread(s): {times[threads]:.2f} s")
        one, many = times["1"], times[str(os.cpu_count())]
        print(f"{os.cpu_count()} threads over 1: {one / many:.2f}x")


main()
