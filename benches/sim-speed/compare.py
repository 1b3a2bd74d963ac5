#!/usr/bin/env python3
"""Side by side: the simulator's core on the demo scenario (bridge averaged and
switching), this checkout against an older revision built from a git
worktree, alternating runs. The workload is `benches/demo_ticks.rs`: fresh
runs of 2000 control ticks each, the shape of `benches/sim_ticks.rs`, with
nothing else in the process. The example is copied into the older tree (it
uses only the API that revision already had) and built with that tree's own
profile.

Usage: benches/sim-speed/compare.py BASE_REV [RUNS]

Prints each run's wall time, ticks per second, the medians and the ratio.
Single runs move with the machine's load; the alternation and the median
keep the comparison fair. Not run in CI (timing is not a test).
"""

import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "benches"))
from side_by_side import build_both  # noqa: E402
TICKS, RUNS_PER_PROCESS = 2000, 1000
EXAMPLE = """
[[example]]
name = "demo_ticks"
path = "demo_ticks.rs"
"""


def build(src: Path, target: Path) -> Path:
    subprocess.run(
        ["cargo", "build", "--release", "-q", "-p", "ampwright-benches", "--example", "demo_ticks",
         "--target-dir", str(target)],
        cwd=src,
        check=True,
    )
    return target / "release" / "examples" / "demo_ticks"


def timed(binary: Path, mode: str) -> float:
    t0 = time.perf_counter()
    subprocess.run([str(binary), mode, str(TICKS), str(RUNS_PER_PROCESS)], stdout=subprocess.DEVNULL, check=True)
    return time.perf_counter() - t0


def main() -> None:
    if len(sys.argv) < 2:
        sys.exit(__doc__)
    base_rev, runs = sys.argv[1], int(sys.argv[2]) if len(sys.argv) > 2 else 7
    def add_workload(tree: Path) -> None:
        (tree / "benches" / "demo_ticks.rs").write_text((ROOT / "benches" / "demo_ticks.rs").read_text())
        manifest = tree / "benches" / "Cargo.toml"
        if "demo_ticks" not in manifest.read_text():
            manifest.write_text(manifest.read_text() + EXAMPLE)

    new, old = build_both("sim-speed", base_rev, build, add_workload)
    ticks = TICKS * RUNS_PER_PROCESS
    for mode in ("averaged", "switching"):
        times = {"base": [], "this": []}
        for k in range(runs):
            for name, binary in (("base", old), ("this", new)):
                elapsed = timed(binary, mode)
                times[name].append(elapsed)
                print(f"{mode} run {k + 1} {name}: {elapsed:.3f} s, {ticks / elapsed / 1e6:.2f} M ticks/s")
        base, this = statistics.median(times["base"]), statistics.median(times["this"])
        print(f"{mode} median: base {ticks / base / 1e6:.2f} M ticks/s, this {ticks / this / 1e6:.2f} M ticks/s; "
              f"this is {base / this:.2f}x "
              f"(spread {min(times['base']) / max(times['this']):.2f}x to {max(times['base']) / min(times['this']):.2f}x)")


if __name__ == "__main__":
    os.environ.setdefault("CARGO_TERM_COLOR", "never")
    main()
