"""Shared by the side-by-side timing scripts (cli-speed, sim-speed): builds
this checkout and an older revision, the latter in a git worktree under
target/<name>/ that is removed again afterwards.

`build_both(name, base_rev, build, prepare)` returns (this, base): what
`build(tree, target_dir)` returned for each; `prepare(tree)` may change the
older tree before it is built (to add the workload it lacks)."""

import subprocess
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def build_both(name, base_rev, build, prepare=lambda tree: None):
    work = ROOT / "target" / name
    work.mkdir(parents=True, exist_ok=True)
    base_src = work / "base-src"
    if base_src.exists():
        subprocess.run(["git", "worktree", "remove", "--force", str(base_src)], cwd=ROOT, check=False)
    subprocess.run(["git", "worktree", "add", "-q", "--detach", str(base_src), base_rev], cwd=ROOT, check=True)
    try:
        prepare(base_src)
        this = build(ROOT, ROOT / "target")
        base = build(base_src, work / "base-target")
    finally:
        subprocess.run(["git", "worktree", "remove", "--force", str(base_src)], cwd=ROOT, check=False)
    return this, base
