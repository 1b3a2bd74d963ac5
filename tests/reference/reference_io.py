"""Writing and checking the committed reference values, shared by the scripts
in this folder: `write_or_check(path, fresh, what, tolerance)` writes the JSON,
or with --check recomputes and compares every number with the committed file
(relative to max(1, |value|)) and exits non-zero beyond `tolerance`."""

import json
import sys


def flat(v):
    """Every number in a JSON value, in a fixed order."""
    if isinstance(v, dict):
        for k in sorted(v):
            yield from flat(v[k])
    elif isinstance(v, list):
        for x in v:
            yield from flat(x)
    elif isinstance(v, (int, float)) and not isinstance(v, bool):
        yield float(v)


def write_or_check(path, fresh, what, tolerance):
    if "--check" not in sys.argv:
        path.write_text(json.dumps(fresh, indent=1) + "\n")
        print(f"wrote {path}")
        return
    kept = json.loads(path.read_text())
    a, b = list(flat(fresh["cases"])), list(flat(kept["cases"]))
    if len(a) != len(b):
        sys.exit(f"{path.name} has a different shape from a fresh run; regenerate it")
    worst = max((abs(x - y) / max(1.0, abs(y)) for x, y in zip(a, b)), default=0.0)
    print(f"{what} reference values reproduced; largest relative difference {worst:.3e}")
    if worst > tolerance:
        sys.exit(f"the committed {path.name} differs from a fresh run by {worst:.3e}; regenerate it")
