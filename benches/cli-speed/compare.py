#!/usr/bin/env python3
"""Side by side: `ampwright simulate` on a 10^6-tick averaged run (the demo
scenario made 50 s long, every tick written to the CSV), this checkout
against an older revision built from a git worktree, alternating runs.

Usage: benches/cli-speed/compare.py BASE_REV [RUNS]

Prints each run's wall time, the medians and the ratio. The
machine's load moves single runs; the alternation and the median keep the
comparison fair. Not run in CI (timing is not a test).
"""

import os
import re
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "benches"))
from side_by_side import build_both  # noqa: E402


def build(src: Path, target: Path) -> Path:
    subprocess.run(
        ["cargo", "build", "--release", "-q", "-p", "host-sim", "--target-dir", str(target)],
        cwd=src,
        check=True,
    )
    return target / "release" / "ampwright"


def timed(binary: Path, scenario: Path, out: Path) -> float:
    t0 = time.perf_counter()
    subprocess.run(
        [str(binary), "simulate", str(scenario), "--out", str(out), "--quiet"],
        stdout=subprocess.DEVNULL,
        check=False,
    )
    return time.perf_counter() - t0


def main() -> None:
    if len(sys.argv) < 2:
        sys.exit(__doc__)
    base_rev, runs = sys.argv[1], int(sys.argv[2]) if len(sys.argv) > 2 else 5
    new, old = build_both("cli-speed", base_rev, build)
    template = (ROOT / "host-sim" / "scenarios" / "carousel_step.toml").read_text()
    text = re.sub(r"^duration_s = .*$", "duration_s = 50.0", template, flags=re.M)
    text = re.sub(r"^mode = .*$", 'mode = "averaged"', text, flags=re.M)
    with tempfile.TemporaryDirectory() as tmp:
        scenario = Path(tmp) / "million.toml"
        scenario.write_text(text)
        times = {"base": [], "this": []}
        for k in range(runs):
            for name, binary in (("base", old), ("this", new)):
                elapsed = timed(binary, scenario, Path(tmp) / name)
                times[name].append(elapsed)
                print(f"run {k + 1} {name}: {elapsed:.3f} s")
        size = sum(p.stat().st_size for p in (Path(tmp) / "this").glob("*.csv"))
    base, this = statistics.median(times["base"]), statistics.median(times["this"])
    print(f"median: base {base:.3f} s, this {this:.3f} s; this is {base / this:.2f}x faster "
          f"(spread {min(times['base']) / max(times['this']):.2f}x to {max(times['base']) / min(times['this']):.2f}x); "
          f"{size / 1e6:.0f} MB of CSV")


if __name__ == "__main__":
    os.environ.setdefault("CARGO_TERM_COLOR", "never")
    main()
