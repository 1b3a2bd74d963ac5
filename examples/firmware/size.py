#!/usr/bin/env python3
"""Flash and RAM of a linked Cortex-M ELF, from its section headers.

Flash: every allocated section with contents (code, read-only data, the
vector table, and the initial image of .data, which is copied to RAM at
reset). RAM: every allocated writable section (.data, .bss, .uninit); the
stack is not in it (cortex-m-rt starts it at the top of RAM and it grows
down into what is left).
"""
import struct
import sys

SHF_WRITE, SHF_ALLOC = 0x1, 0x2
SHT_NOBITS = 8


def sections(path):
    data = open(path, "rb").read()
    assert data[:4] == b"\x7fELF" and data[4] == 1, "an ELF32 file"
    shoff, = struct.unpack_from("<I", data, 0x20)
    shentsize, shnum, shstrndx = struct.unpack_from("<HHH", data, 0x2E)
    heads = [struct.unpack_from("<IIIIIIIIII", data, shoff + k * shentsize) for k in range(shnum)]
    strtab = heads[shstrndx]
    names = data[strtab[4]:strtab[4] + strtab[5]]
    for h in heads:
        name = names[h[0]:names.index(b"\0", h[0])].decode()
        yield name, h[1], h[2], h[5]  # name, type, flags, size


def main():
    flash = ram = 0
    rows = []
    for name, kind, flags, size in sections(sys.argv[1]):
        if not flags & SHF_ALLOC or size == 0:
            continue
        if kind != SHT_NOBITS:
            flash += size
        if flags & SHF_WRITE:
            ram += size
        rows.append((name, size))
    for name, size in rows:
        print(f"  {name:<16} {size:>7} bytes")
    print(f"flash {flash} bytes ({flash / 1024:.1f} KiB), RAM {ram} bytes ({ram / 1024:.1f} KiB) before the stack")


main()
