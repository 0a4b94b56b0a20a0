#!/usr/bin/env python3
"""Paired timing of two builds of cagehand on one command: after one
untimed run of each (to warm the file cache), single runs of A and B
alternate (AB, BA, AB, ...), N pairs, so both see the same minutes of a
machine whose speed moves from one minute to the next. Prints the median
and fastest wall time of each, and in how many pairs B was the faster.
A run that exits with an error stops the measurement (its time would
mean nothing).

Usage: benches/tools/paired.py A_BINARY B_BINARY N ARGS...
e.g.   benches/tools/paired.py /tmp/cagehand-old ./target/release/cagehand 30 \\
           plan --all --profile /tmp/geodesic-3.toml

Output goes to /dev/null; the time includes starting the process.
"""
import statistics
import subprocess
import sys
import time


def run(binary: str, args: list[str]) -> float:
    """One run's wall time in ms; exits if the run failed."""
    t0 = time.perf_counter()
    done = subprocess.run([binary] + args, stdout=subprocess.DEVNULL,
                          stderr=subprocess.PIPE, check=False)
    ms = (time.perf_counter() - t0) * 1000.0
    if done.returncode != 0:
        sys.exit(f"{binary} {' '.join(args)}: exit status {done.returncode}\n"
                 f"{done.stderr.decode(errors='replace')}")
    return ms


def main() -> None:
    if len(sys.argv) < 5 or not sys.argv[3].isdigit() or int(sys.argv[3]) < 1:
        sys.exit(__doc__)
    binaries = (sys.argv[1], sys.argv[2])
    n, args = int(sys.argv[3]), sys.argv[4:]
    for binary in binaries:
        run(binary, args)
    times: tuple[list[float], list[float]] = ([], [])
    for i in range(n):
        for side in (0, 1) if i % 2 == 0 else (1, 0):
            times[side].append(run(binaries[side], args))
    ta, tb = times
    faster = sum(1 for x, y in zip(ta, tb) if y < x)
    print(' '.join(args))
    print(f"  A median {statistics.median(ta):.1f} ms, fastest {min(ta):.1f} ms")
    print(f"  B median {statistics.median(tb):.1f} ms, fastest {min(tb):.1f} ms;"
          f" B faster in {faster} of {n} pairs")


if __name__ == "__main__":
    main()
