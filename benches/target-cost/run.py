#!/usr/bin/env python3
"""Exact instruction counts of pi-core's control path on Cortex-M4F and Cortex-M0.

Builds the probe (src/main.rs) for both targets, runs each under QEMU with one
instruction per translation block and an execution trace (-singlestep
-d exec,nochain), and counts, for every measured call, the instructions from
the probe's first one up to its return to the harness, everything it calls
included (the harness brackets each call with `mark_start` and `mark_end`).
Prints per target and scenario the instructions per call (min / mean / max), an
estimate of the cycles, the deepest stack use of the calls (the probe paints the
free stack before a scenario and scans it after), and the bytes of the probe's
own code and of everything it reaches through direct calls; fails if a count
exceeds budgets.txt (worst call and mean) or a scenario has no budget.
Set TARGET_COST_CALLS=1 to print every call's count on stderr.

Usage: run.py QEMU_SYSTEM_ARM [--update-budgets]   (fetch-qemu.sh prints the path)
"""

import os
import re
import statistics
import struct
import subprocess
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
TARGETS = [
    # target triple, QEMU machine, label
    ("thumbv7em-none-eabihf", "mps2-an386", "Cortex-M4F"),
    ("thumbv6m-none-eabi", "microbit", "Cortex-M0"),
]
PROBES = {
    "empty": "probe_empty",
    "pi_linear": "probe_pi_update",
    "pi_saturated_high": "probe_pi_update",
    "pi_saturated_low": "probe_pi_update",
    "pi_bad_input": "probe_pi_update",
    "pi_retune_handover": "probe_pi_update",
    "pi_tustin_mixed": "probe_pi_update",
    "pi_clamping_mixed": "probe_pi_update",
    "pi_weighted_mixed": "probe_pi_update",
    "fixed_pi_linear": "probe_fixed_pi_update",
    "fixed_pi_saturated": "probe_fixed_pi_update",
    "fixed_pi_weighted_mixed": "probe_fixed_pi_update",
    "loop_closed_run": "probe_loop_tick",
    "loop_saturated": "probe_loop_tick",
    "loop_overcurrent_counting": "probe_loop_tick",
    "loop_hot_winding": "probe_loop_tick",
    "loop_faulted": "probe_loop_tick",
    "fixed_loop_closed_run": "probe_fixed_loop_tick",
    "fixed_loop_saturated": "probe_fixed_loop_tick",
    "fixed_loop_overcurrent_counting": "probe_fixed_loop_tick",
    "fixed_loop_hot_winding": "probe_fixed_loop_tick",
    "fixed_loop_faulted": "probe_fixed_loop_tick",
    "loop_worst": "probe_loop_tick",
    "fixed_loop_worst": "probe_fixed_loop_tick",
    "capture_idle": "probe_capture",
    "capture_armed": "probe_capture",
    "capture_filling": "probe_capture",
    "capture_decimated": "probe_capture",
    "design_direct_discrete": "probe_design",
}
TIMEOUT_S = 120

# Estimated cycles per instruction, a simplification of the instruction timing
# tables in Arm's Cortex-M4 and Cortex-M0 Technical Reference Manuals (cited
# from memory): no wait states, no pipelining of back-to-back loads, a taken
# branch refills the pipeline. These are estimates, not measurements.
def cycles_m4(mn, ops, taken):
    base = mn.split(".")[0]
    regs = ops.count(",") + 1 if "{" in ops else 0
    if base.startswith(("vdiv", "vsqrt")):
        return 14
    if base.startswith(("vmla", "vmls", "vfma", "vfms", "vnmla", "vnmls")):
        return 3
    if base.startswith(("vldr", "vstr")):
        return 2
    if base.startswith(("vpush", "vpop", "vldm", "vstm")):
        return 1 + regs
    if base in ("push", "stmdb", "stm", "stmia", "ldm", "ldmia"):
        return 1 + regs
    if base == "pop":
        return 1 + regs + (2 if "pc" in ops else 0)
    if base.startswith(("ldrd", "strd")):
        return 3
    if base.startswith(("ldr", "str")):
        return 2
    if base in ("sdiv", "udiv"):
        return 7
    if base.startswith(("b", "cb")) and not base.startswith(("bic", "bfi", "bfc")) or base in ("bx", "blx"):
        return 3 if taken or base in ("bl", "blx", "bx") else 1
    return 1


def cycles_m0(mn, ops, taken):
    base = mn.split(".")[0]
    regs = ops.count(",") + 1 if "{" in ops else 0
    if base in ("push", "stm", "stmia", "ldm", "ldmia"):
        return 1 + regs
    if base == "pop":
        return 1 + regs + (3 if "pc" in ops else 0)
    if base.startswith(("ldr", "str")):
        return 2
    if base == "bl":
        return 4
    if base in ("bx", "blx"):
        return 3
    if base.startswith("b") and not base.startswith("bic"):
        return 3 if taken else 1
    return 1


def disassembly(objdump, elf):
    """Address -> (mnemonic, operands, length in bytes), and the direct branch
    targets (bl, b, b.w, ...) found at each address."""
    text = subprocess.run([objdump, "-d", "--no-show-raw-insn", str(elf)], capture_output=True, text=True, check=True).stdout
    out = {}
    targets = {}
    rows = []
    for line in text.splitlines():
        m = re.match(r"\s+([0-9a-f]+):\t(\S+)\t?(.*)", line)
        if m:
            rows.append((int(m.group(1), 16), m.group(2), m.group(3)))
    for k, (addr, mn, ops) in enumerate(rows):
        length = rows[k + 1][0] - addr if k + 1 < len(rows) else 2
        out[addr] = (mn, ops, length)
        t = re.match(r"([0-9a-f]+) <", ops)
        if t and (mn.startswith("b") or mn.startswith("cb")) and not mn.startswith("bic"):
            targets[addr] = int(t.group(1), 16)
    return out, targets


def code_sizes(syms, targets):
    """Per function: (own bytes, bytes with every function it reaches through
    direct calls and tail branches)."""
    funcs = sorted((a, s, n) for n, (a, s) in syms.items() if s > 0)
    starts = {a: n for a, s, n in funcs}
    callees = {n: set() for _, _, n in funcs}
    for a, s, n in funcs:
        for pc, t in targets.items():
            if a <= pc < a + s and not (a <= t < a + s) and t in starts:
                callees[n].add(starts[t])
    sizes = {}
    for _, s, n in funcs:
        seen, todo = {n}, [n]
        while todo:
            for c in callees[todo.pop()]:
                if c not in seen:
                    seen.add(c)
                    todo.append(c)
        sizes[n] = (s, sum(syms[f][1] for f in seen))
    return sizes


def symbols(elf):
    """Function symbols of an ELF32 file: name -> (address, size)."""
    data = elf.read_bytes()
    shoff, = struct.unpack_from("<I", data, 0x20)
    shentsize, shnum, shstrndx = struct.unpack_from("<HHH", data, 0x2E)
    sections = [struct.unpack_from("<IIIIIIIIII", data, shoff + k * shentsize) for k in range(shnum)]
    out = {}
    for sec in sections:
        if sec[1] != 2:  # SHT_SYMTAB
            continue
        strtab = sections[sec[6]]
        for off in range(sec[4], sec[4] + sec[5], 16):
            name_off, value, size, info, _, _ = struct.unpack_from("<IIIBBH", data, off)
            if info & 0xF != 2:  # STT_FUNC
                continue
            start = strtab[4] + name_off
            name = data[start:data.index(b"\0", start)].decode()
            out[name] = (value & ~1, size)
    return out


def run(qemu, objdump, target, machine):
    env = dict(os.environ)
    subprocess.run(["cargo", "build", "--release", "--locked", "--target", target], cwd=HERE, check=True, env=env)
    elf = HERE / "target" / target / "release" / "target-cost"
    log = HERE / "target" / f"trace-{target}.log"
    cmd = [qemu, "-machine", machine, "-nographic", "-monitor", "none", "-serial", "none",
           "-semihosting-config", "enable=on,target=native", "-icount", "shift=0",
           "-singlestep", "-d", "exec,nochain", "-D", str(log), "-kernel", str(elf)]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=TIMEOUT_S)
    if done.returncode != 0:
        sys.exit(f"{target}: the probe exited with {done.returncode}: {done.stdout} {done.stderr}")
    # Semihosting console output arrives on stderr with -nographic.
    console = done.stdout + done.stderr
    names = []
    stack = {}
    for l in console.splitlines():
        if l.startswith("scenario "):
            names.append(l.split()[1])
        elif l.startswith("stack ") and names:
            stack[names[-1]] = int(l.split()[1])
    syms = symbols(elf)
    start, end, printer = syms["mark_start"][0], syms["mark_end"][0], syms["announce"][0]
    pattern = re.compile(r"\[[0-9a-f]+/([0-9a-f]+)/")
    segments = {}
    scenario = -1
    inside = None
    prev_pc = None
    with open(log) as f:
        for line in f:
            m = pattern.search(line)
            if not m:
                continue
            pc = int(m.group(1), 16)
            if pc == start:
                inside = []
            elif pc == end and inside is not None:
                segments.setdefault(scenario, []).append(inside)
                inside = None
            elif inside is not None:
                inside.append(pc)
            # A scenario starts at each entry into `announce`.
            if pc == printer and prev_pc != printer:
                scenario += 1
            prev_pc = pc
    dis, targets = disassembly(objdump, elf)
    table = cycles_m4 if target.startswith("thumbv7em") else cycles_m0

    def cycles(seq):
        total = 0
        for j, pc in enumerate(seq):
            mn, ops, length = dis.get(pc, ("?", "", 2))
            nxt = seq[j + 1] if j + 1 < len(seq) else None
            total += table(mn, ops, nxt is not None and nxt != pc + length)
        return total

    # A call is counted from the probe's first instruction up to the return
    # address of the harness's call instruction (the one executed just before
    # the probe's entry), so everything the probe calls or tail-calls is
    # included and the harness around it is not.
    per, est = {}, {}
    for k, name in enumerate(names):
        lo, _ = syms[PROBES[name]]
        for seq in segments.get(k, []):
            first = seq.index(lo)
            caller = seq[first - 1]
            ret = caller + dis[caller][2]
            back = seq.index(ret, first)
            call = seq[first:back]
            per.setdefault(name, []).append(len(call))
            est.setdefault(name, []).append(cycles(call))
    sizes = code_sizes(syms, targets)
    # The empty probe runs straight through: its count must be its own length.
    lo, size = syms[PROBES["empty"]]
    empty_length = sum(1 for a in dis if lo <= a < lo + size)
    if os.environ.get("TARGET_COST_CALLS"):
        for name, v in per.items():
            print(f"{target} {name}: {v}", file=sys.stderr)
    return per, sizes, stack, est, empty_length


def rustc_version():
    return subprocess.run(["rustc", "--version"], capture_output=True, text=True).stdout.strip()


def main():
    if len(sys.argv) < 2:
        sys.exit("give the path of qemu-system-arm")
    qemu = sys.argv[1]
    objdump = str(Path(qemu).resolve().parent / "root" / "usr" / "bin" / "arm-none-eabi-objdump")
    budgets = {}
    bfile = HERE / "budgets.txt"
    for line in bfile.read_text().splitlines():
        if line.strip() and not line.startswith("#"):
            t, s, worst, mean = line.split()
            budgets[(t, s)] = (int(worst), float(mean))
    print(f"instructions per call, exact (QEMU -singlestep trace), from the probe's first instruction to its return; "
          f"{rustc_version()}, release, opt-level 3, LTO, codegen-units 1")
    print("est cyc: estimated cycles per call (mean), from a simplified per-instruction table; an estimate")
    print("stack B: deepest stack use of the scenario's calls below the harness (painted-stack scan, within 8 bytes)")
    print("bytes: the probe's own code / with every function it reaches by direct calls")
    print("budget: worst / mean allowed by budgets.txt")
    print(f"{'target':<12} {'scenario':<26} {'calls':>5} {'min':>6} {'mean':>8} {'max':>6} {'budget':>12} {'est cyc':>8} {'stack B':>8}  {'bytes':>11}")
    failed = []
    measured = {}
    for target, machine, label in TARGETS:
        per, sizes, stack, est, empty_length = run(qemu, objdump, target, machine)
        for name in PROBES:
            if name not in per:
                failed.append(f"{label} {name}: not measured")
        for name, v in per.items():
            b = budgets.get((label, name))
            st = stack.get(name)
            st = "-" if st is None else (f"<={st}" if st <= 16 else str(st))
            own, total = sizes[PROBES[name]]
            mean = statistics.mean(v)
            shown = f"{b[0]}/{b[1]:g}" if b else "-"
            print(f"{label:<12} {name:<26} {len(v):>5} {min(v):>6} {mean:>8.1f} {max(v):>6} "
                  f"{shown:>12} {round(statistics.mean(est[name])):>8} {st:>8}  {f'{own}/{total}':>11}")
            if name == "empty":
                if min(v) != max(v) or min(v) != empty_length:
                    failed.append(f"{label} empty probe: counted {v}, its code has {empty_length} instructions")
                continue
            measured[(label, name)] = (max(v), mean)
            if b is None:
                failed.append(f"{label} {name}: no budget in {bfile.name}")
            elif max(v) > b[0] or mean > b[1]:
                failed.append(f"{label} {name}: worst {max(v)}, mean {mean:.1f} instructions; budget {b[0]}, {b[1]:g}")
    if "--update-budgets" in sys.argv:
        lines = ["# Instruction budgets per call, enforced by run.py in .ci/run: target, scenario,",
                 "# worst call, mean over the scenario's calls. Set at the measured figures plus",
                 "# about 5 %; raise only with a reason in the commit."]
        for (label, name), (worst, mean) in measured.items():
            lines.append(f"{label} {name} {int(worst * 1.05) + 2} {round(mean * 1.05 + 1, 1):g}")
        bfile.write_text("\n".join(lines) + "\n")
        print(f"wrote {bfile}")
        return
    if failed:
        sys.exit("over budget: " + "; ".join(failed))
    print("all within budget")


if __name__ == "__main__":
    main()
