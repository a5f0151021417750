#!/usr/bin/python3
"""Compile time of a user's file that includes kindling, against the same file with an
mt19937 loop (bench/compile/*.cpp), measured as the compiler's CPU time (user + system
of the child, from getrusage), which a shared machine disturbs far less than wall time.

Prints, from the medians of --repeat compiles of each file:
  ratio compile_core_vs_mt19937 X      core.cpp over baseline.cpp
  ratio compile_audit_vs_mt19937 X     audit.cpp over baseline.cpp
  seconds compile_eigen_trainer X      trainer.cpp
for the header-only build (the default way to use kindling), and with --compiled the
same three for the compiled mode (suffix _compiled): the user's files built with
KINDLING_COMPILED and KINDLING_COMPILED_ORTHOGONAL, as the kindling::compiled CMake
target sets them, the kernels coming from its library, whose own compile (once per
build of kindling, not per user file) is printed beside them. With --before DIR, the
same files against DIR/include as well (another tree, e.g. main's), suffix _before.
Every variant is compiled in the same interleaved rounds, so a burst of load falls on
all of them alike.
For these ratios SMALLER is better (our time over the baseline's), unlike bench/ratios.
Targets (issue: a header-only build that compiles fast): core <= 3, core + audits <= 5,
the Eigen trainer file <= 8 s.

  bench/compile_times.py [--cxx g++] [--flags "-O2"] [--repeat 3] [--compiled] [--before DIR]
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
compiled_defines = ["-DKINDLING_COMPILED", "-DKINDLING_COMPILED_ORTHOGONAL"]


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
    p.add_argument("--compiled", action="store_true", help="also measure the compiled mode")
    p.add_argument("--before", metavar="DIR", help="also measure the headers of DIR/include")
    a = p.parse_args()
    if a.repeat < 1:
        sys.exit("compile_times.py: --repeat must be at least 1")
    files = ["baseline", "core", "audit", "trainer"]
    # variant -> (include directory, extra flags)
    variants = {"": (os.path.join(root, "include"), [])}
    if a.compiled:
        variants["_compiled"] = (os.path.join(root, "include"), compiled_defines)
    if a.before:
        variants["_before"] = (os.path.join(os.path.abspath(a.before), "include"), [])
    times = {(v, f): [] for v in variants for f in files}
    with tempfile.TemporaryDirectory() as tmp:

        def compile_cmd(include, extra, source, out):
            return [a.cxx, "-std=c++17", *a.flags.split(), *extra, "-I", include, "-isystem",
                    "/usr/include/eigen3", "-c", source, "-o", os.path.join(tmp, out)]

        for _ in range(a.repeat):
            for f in files:
                for v, (include, extra) in variants.items():
                    source = os.path.join(here, "compile", f + ".cpp")
                    times[(v, f)].append(cpu_seconds(compile_cmd(include, extra, source, f + v + ".o")))
        library = None
        if a.compiled:
            library = cpu_seconds(compile_cmd(os.path.join(root, "include"), compiled_defines,
                                              os.path.join(root, "src", "compiled.cpp"), "compiled.o"))
    med = {k: statistics.median(t) for k, t in times.items()}
    for v in variants:
        base = med[(v, "baseline")]
        print(f"ratio compile_core_vs_mt19937{v} {med[(v, 'core')] / base:.2f}")
        print(f"ratio compile_audit_vs_mt19937{v} {med[(v, 'audit')] / base:.2f}")
        print(f"seconds compile_eigen_trainer{v} {med[(v, 'trainer')]:.2f}")
    for v in variants:
        for f in files:
            print(f"median {f}{v} {med[(v, f)]:.2f} s ({a.cxx} {a.flags}, {a.repeat} compiles)")
    if library is not None:
        print(f"once src/compiled.cpp {library:.2f} s (the compiled mode's library, built once)")


if __name__ == "__main__":
    main()
