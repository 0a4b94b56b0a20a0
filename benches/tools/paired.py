#!/usr/bin/env python3
"""Paired timing of two builds of cagehand on one command: single runs of A
and B alternate (ABBA...), N pairs, so both see the same minutes of a
machine whose speed moves from one minute to the next. Prints the median
and fastest wall time of each, and in how many pairs B was the faster.

Usage: benches/tools/paired.py A_BINARY B_BINARY N ARGS...
e.g.   benches/tools/paired.py /tmp/cagehand-old ./target/release/cagehand 30 \\
           plan --all --profile /tmp/geodesic-3.toml

Output goes to /dev/null; the time includes starting the process.
"""
import statistics
import subprocess
import sys
import time


def main() -> None:
    if len(sys.argv) < 5:
        sys.exit(__doc__)
    a, b, n, args = sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4:]
    times = {a: [], b: []}
    for i in range(n):
        for binary in (a, b) if i % 2 == 0 else (b, a):
            t0 = time.perf_counter()
            subprocess.run([binary] + args, stdout=subprocess.DEVNULL,
                           stderr=subprocess.DEVNULL, check=False)
            times[binary].append((time.perf_counter() - t0) * 1000.0)
    ta, tb = times[a], times[b]
    faster = sum(1 for x, y in zip(ta, tb) if y < x)
    print(f"{' '.join(args)}")
    print(f"  A median {statistics.median(ta):.1f} ms, fastest {min(ta):.1f} ms")
    print(f"  B median {statistics.median(tb):.1f} ms, fastest {min(tb):.1f} ms;"
          f" B faster in {faster} of {n} pairs")


if __name__ == "__main__":
    main()
