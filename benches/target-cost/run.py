#!/usr/bin/env python3
"""Exact instruction counts of pi-core's control path on Cortex-M4F and Cortex-M0.

Builds the probe (src/main.rs) for both targets, runs each under QEMU with one
instruction per translation block and an execution trace (-singlestep
-d exec,nochain), and counts, for every measured call, the trace entries from
`mark_start` to `mark_end`, less those of the empty probe. Prints per target
and scenario the instructions per call (min / mean / max), the deepest stack use
of the calls (the probe paints the free stack before a scenario and scans it
after), and the size of each probe's own code, and fails if an instruction
count exceeds budgets.txt.

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
    "pi_linear": "probe_pi_update",
    "pi_saturated_high": "probe_pi_update",
    "pi_saturated_low": "probe_pi_update",
    "loop_closed_run": "probe_loop_tick",
    "loop_faulted": "probe_loop_tick",
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
    """Address -> (mnemonic, operands, length in bytes)."""
    text = subprocess.run([objdump, "-d", "--no-show-raw-insn", str(elf)], capture_output=True, text=True, check=True).stdout
    out = {}
    rows = []
    for line in text.splitlines():
        m = re.match(r"\s+([0-9a-f]+):\t(\S+)\t?(.*)", line)
        if m:
            rows.append((int(m.group(1), 16), m.group(2), m.group(3)))
    for k, (addr, mn, ops) in enumerate(rows):
        length = rows[k + 1][0] - addr if k + 1 < len(rows) else 2
        out[addr] = (mn, ops, length)
    return out


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
    e_lo, e_size = syms["probe_empty"]
    empty_body = []
    counts = {}
    traces = {}
    pcs = []
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
                inside = 0
                pcs = []
            elif pc == end and inside is not None:
                counts.setdefault(scenario, []).append(inside)
                traces.setdefault(scenario, []).append(pcs)
                inside = None
            elif inside is not None:
                inside += 1
                pcs.append(pc)
                if scenario == 0 and e_lo <= pc < e_lo + e_size:
                    empty_body.append(pc)
            # A scenario starts at each entry into `announce`.
            if pc == printer and prev_pc != printer:
                scenario += 1
            prev_pc = pc
    result = {}
    call_pcs = {}
    for k, name in enumerate(names):
        if k in counts:
            result[name] = counts[k]
            call_pcs[name] = traces[k]
    # Estimated cycles per call, less those of the empty probe's call.
    dis = disassembly(objdump, elf)
    table = cycles_m4 if target.startswith("thumbv7em") else cycles_m0

    def cycles(seq):
        total = 0
        for j, pc in enumerate(seq):
            mn, ops, length = dis.get(pc, ("?", "", 2))
            nxt = seq[j + 1] if j + 1 < len(seq) else None
            total += table(mn, ops, nxt is not None and nxt != pc + length)
        return total

    est = {name: [cycles(seq) for seq in v] for name, v in call_pcs.items()}
    empty_cycles = min(est.pop("empty"))
    est = {name: [c - empty_cycles for c in v] for name, v in est.items()}
    # raw(f) - raw(empty) leaves out the empty probe's own instructions: add them.
    empty_calls = result.pop("empty")
    base = min(empty_calls) - len(empty_body) // len(empty_calls)
    per = {name: [c - base for c in v] for name, v in result.items()}
    sizes = {PROBES[n]: syms.get(PROBES[n], (0, 0))[1] for n in per}
    return per, sizes, stack, est


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
            t, s, n = line.split()
            budgets[(t, s)] = int(n)
    print(f"instructions per call, exact (QEMU -singlestep trace); {rustc_version()}, release, opt-level 3, LTO")
    print("est cyc: estimated cycles per call (mean), from a simplified per-instruction table; an estimate")
    print("stack B: deepest stack use of the scenario's calls below the harness (painted-stack scan, within 8 bytes)")
    print(f"{'target':<12} {'scenario':<24} {'calls':>5} {'min':>6} {'mean':>8} {'max':>6} {'budget':>7} {'est cyc':>8} {'stack B':>8}  probe bytes")
    failed = []
    measured = {}
    for target, machine, label in TARGETS:
        per, sizes, stack, est = run(qemu, objdump, target, machine)
        for name, v in per.items():
            b = budgets.get((label, name))
            measured[(label, name)] = max(v)
            st = stack.get(name)
            st = "-" if st is None else (f"<={st}" if st <= 16 else str(st))
            print(f"{label:<12} {name:<24} {len(v):>5} {min(v):>6} {statistics.mean(v):>8.1f} {max(v):>6} {b if b else '-':>7} {round(statistics.mean(est[name])):>8} {st:>8}  {sizes[PROBES[name]]}")
            if b is not None and max(v) > b:
                failed.append(f"{label} {name}: {max(v)} instructions, budget {b}")
    if "--update-budgets" in sys.argv:
        lines = ["# Instruction budgets per call (worst case), enforced by run.py in .ci/run.",
                 "# Set at the measured figure plus about 5 %; raise only with a reason in the commit."]
        for (label, name), n in measured.items():
            lines.append(f"{label} {name} {int(n * 1.05) + 2}")
        bfile.write_text("\n".join(lines) + "\n")
        print(f"wrote {bfile}")
        return
    if failed:
        sys.exit("over budget: " + "; ".join(failed))
    print("all within budget")


if __name__ == "__main__":
    main()
