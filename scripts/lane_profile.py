#!/usr/bin/env python3
"""Instructions per ray of a `trace_throughput` case, attributed to the functions that were
inlined into the packet loop (inclusive counts), from valgrind's callgrind.

    cargo build --release --example trace_throughput
    scripts/lane_profile.py target/release/examples/trace_throughput [CASE [TOP]]

Runs the case at 50 000 and 250 000 rays and divides the difference by 200 000, so start-up
costs drop out; each executed instruction is charged to every function of its inline chain
(addr2line -i), so `cross_packet` includes the `lane_query` inlined into it. Needs valgrind,
addr2line (binutils) and a build with line tables (the release profile keeps them).
"""
import collections
import re
import subprocess
import sys
import tempfile

RAYS = (50_000, 250_000)


def counts(binary, case, rays):
    """Executed instructions per address of `binary` (file offsets) for one run."""
    with tempfile.NamedTemporaryFile(suffix=".callgrind") as out:
        subprocess.run(
            ["valgrind", "--tool=callgrind", "--dump-instr=yes", "--compress-pos=no",
             "--compress-strings=no", "--callgrind-out-file=" + out.name,
             binary, case, str(rays)],
            capture_output=True, check=True)
        cnt, obj, skip = collections.Counter(), "", False
        for line in open(out.name):
            if line.startswith("ob="):
                obj = line[3:].strip()
                continue
            if line.startswith("calls="):
                skip = True  # the next line is the call's inclusive cost
                continue
            if skip:
                skip = False
                continue
            if obj != binary:
                continue
            m = re.match(r"^(0x[0-9a-f]+)\s+\d+\s+(\d+)", line)
            if m:
                cnt[int(m.group(1), 16)] += int(m.group(2))
        return cnt


def inline_chains(binary, addrs):
    """Function names of each address's inline chain, innermost first."""
    out = subprocess.run(["addr2line", "-a", "-f", "-i", "-C", "-e", binary]
                         + [hex(a) for a in addrs],
                         capture_output=True, text=True, check=True).stdout.splitlines()
    chains, cur, i = {}, None, 0
    while i < len(out):
        if re.match(r"^0x[0-9a-f]+$", out[i]):
            cur = int(out[i], 16)
            chains[cur] = []
            i += 1
            continue
        name = re.sub(r"::h[0-9a-f]{16}$", "", out[i])
        for _ in range(3):
            name = re.sub(r"<[^<>]*>", "", name)
        chains[cur].append(name)
        i += 2
    return chains


def main():
    if len(sys.argv) < 2:
        sys.exit(__doc__)
    binary = sys.argv[1]
    case = sys.argv[2] if len(sys.argv) > 2 else "pyramids-bare"
    top = int(sys.argv[3]) if len(sys.argv) > 3 else 40
    small, large = (counts(binary, case, n) for n in RAYS)
    per_ray = (RAYS[1] - RAYS[0])
    diff = {a: c - small.get(a, 0) for a, c in large.items() if c > small.get(a, 0)}
    chains = inline_chains(binary, sorted(diff))
    inclusive = collections.Counter()
    for a, c in diff.items():
        for name in set(chains.get(a, ["??"])):
            if "closure" in name or name.startswith("core::"):
                continue
            inclusive[name] += c
    print(f"{case}: {sum(diff.values()) / per_ray:.1f} instructions per ray")
    for name, c in inclusive.most_common(top):
        print(f"{c / per_ray:9.1f}  {name}")


if __name__ == "__main__":
    main()
