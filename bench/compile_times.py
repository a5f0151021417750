#!/usr/bin/python3
"""Compile time of a user's file that includes kindling, against the same file with an
mt19937 loop (bench/compile/*.cpp), measured as the compiler's CPU time (user + system
of the child, from getrusage), which a shared machine disturbs far less than wall time.

Prints, from the medians of --repeat compiles of each file:
  ratio compile_core_vs_mt19937 X      core.cpp over baseline.cpp
  ratio compile_audit_vs_mt19937 X     audit.cpp over baseline.cpp
  seconds compile_eigen_trainer X      trainer.cpp
For these ratios SMALLER is better (our time over the baseline's), unlike bench/ratios.
Targets (issue: a header-only build that compiles fast): core <= 3, core + audits <= 5,
the Eigen trainer file <= 8 s.

  bench/compile_times.py [--cxx g++] [--flags "-O2"] [--repeat 3]
"""
import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile

here = os.path.dirname(os.path.abspath(__file__))
root = os.path.dirname(here)


def cpu_seconds(cmd):
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    subprocess.run(cmd, check=True)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def main():
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--cxx", default="g++")
    p.add_argument("--flags", default="-O2")
    p.add_argument("--repeat", type=int, default=3)
    a = p.parse_args()
    if a.repeat < 1:
        sys.exit("compile_times.py: --repeat must be at least 1")
    files = ["baseline", "core", "audit", "trainer"]
    times = {f: [] for f in files}
    with tempfile.TemporaryDirectory() as tmp:
        for _ in range(a.repeat):  # interleaved, so a burst of load falls on every file alike
            for f in files:
                cmd = [a.cxx, "-std=c++17", *a.flags.split(), "-I", os.path.join(root, "include"),
                       "-isystem", "/usr/include/eigen3", "-c", os.path.join(here, "compile", f + ".cpp"),
                       "-o", os.path.join(tmp, f + ".o")]
                times[f].append(cpu_seconds(cmd))
    med = {f: statistics.median(t) for f, t in times.items()}
    print(f"ratio compile_core_vs_mt19937 {med['core'] / med['baseline']:.2f}")
    print(f"ratio compile_audit_vs_mt19937 {med['audit'] / med['baseline']:.2f}")
    print(f"seconds compile_eigen_trainer {med['trainer']:.2f}")
    for f in files:
        print(f"median {f} {med[f]:.2f} s ({a.cxx} {a.flags}, {a.repeat} compiles)")


if __name__ == "__main__":
    main()
