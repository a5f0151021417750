#!/usr/bin/python3
"""Checks kindling's normal CDF, quantile, truncated-normal stddev, float16 rounding and
generated samples against scipy.stats / numpy (Debian python3-scipy, python3-numpy).

Usage: scipy_reference.py PATH_TO_kindling_sample_reference

Tolerances, and why:
  norm.cdf   scipy's ndtr rounds x/sqrt(2), so its own relative error grows like
             x^2 2^-53 in the lower tail; we allow 4e-16 (1 + x^2) relative (x < 0),
             2.3e-16 absolute (x >= 0).
  norm.ppf   PPND16 (double) 1e-15 relative; PPND7 (float) 5e-7 relative (Wichura 1988
             states about 1e-7 for PPND7; float rounding adds the rest).
  truncnorm  .std() against truncated_normal_stddev, 1e-13 relative.
  float16    numpy's float32 -> float16 cast rounds to nearest even: bits must match.
  kstest     p-value >= 0.01 against scipy.stats.norm / truncnorm / uniform: false
             alarm 1% per sample over random seeds (the streams here are fixed, so the
             result is deterministic).
"""
import subprocess
import sys

import numpy as np
from scipy import stats

failures = []


def check(ok, what):
    if not ok:
        failures.append(what)


def main():
    out = subprocess.run([sys.argv[1]], check=True, capture_output=True, text=True).stdout
    n_cdf = n_ppf = n_std = 0
    f16_in, f16_out, bf16_out = [], [], []
    samples = []
    for line in out.splitlines():
        w = line.split()
        tag = w[0]
        if tag == "cdf":
            x, got = float.fromhex(w[1]), float.fromhex(w[2])
            if x < 0:
                want = stats.norm.cdf(x)
                if want > 0:
                    tol = 4e-16 * (1 + x * x)
                    check(abs(got / want - 1) <= tol, f"Phi({x}) = {got!r}, scipy {want!r}")
            else:
                want = stats.norm.cdf(x)
                check(abs(got - want) <= 2.3e-16, f"Phi({x}) = {got!r}, scipy {want!r}")
            n_cdf += 1
        elif tag == "ppf":
            p, zd, zf = (float.fromhex(v) for v in w[1:4])
            want = stats.norm.ppf(p)
            if want == 0:
                check(zd == 0 and zf == 0, f"Phi^-1(0.5) = {zd!r} / {zf!r}")
            else:
                check(abs(zd / want - 1) <= 1e-15, f"PPND16({p!r}) = {zd!r}, scipy {want!r}")
                pf = float(np.float32(p))
                if pf >= 1.2e-38:  # normal floats only
                    wf = stats.norm.ppf(pf)
                    check(abs(zf / wf - 1) <= 5e-7, f"PPND7({pf!r}) = {zf!r}, scipy {wf!r}")
            n_ppf += 1
        elif tag == "tstd":
            a, b, got = (float.fromhex(v) for v in w[1:4])
            want = stats.truncnorm(a, b).std()
            check(abs(got / want - 1) <= 1e-13, f"truncated std [{a}, {b}] = {got!r}, scipy {want!r}")
            n_std += 1
        elif tag == "f16":
            f16_in.append(int(w[1], 16))
            f16_out.append(int(w[2], 16))
            bf16_out.append(int(w[3], 16))
        elif tag == "sample":
            name, kind = w[1], w[2]
            m, s, a, b = (float.fromhex(v) for v in w[3:7])
            values = np.array([float.fromhex(v) for v in w[7:]])
            samples.append((name, kind, m, s, a, b, values))

    floats = np.array(f16_in, dtype=np.uint32).view(np.float32)
    with np.errstate(over="ignore"):  # large floats become inf, as they should
        want16 = floats.astype(np.float16).view(np.uint16)
    bad = np.nonzero(want16 != np.array(f16_out, dtype=np.uint16))[0]
    check(len(bad) == 0, f"float16 rounding differs from numpy for {len(bad)} inputs, e.g. "
                         f"{[hex(f16_in[i]) for i in bad[:5]]}")
    # bfloat16 has no numpy type: reference by exact nearest-even on the top 16 bits,
    # computed here in Python integers from the definition.
    bits = np.array(f16_in, dtype=np.uint64)
    keep, rest = bits >> 16, bits & 0xFFFF
    up = (rest > 0x8000) | ((rest == 0x8000) & (keep & 1 == 1))
    want_bf = ((keep + up) & 0xFFFF).astype(np.uint16)
    bad = np.nonzero(want_bf != np.array(bf16_out, dtype=np.uint16))[0]
    check(len(bad) == 0, f"bfloat16 rounding differs for {len(bad)} inputs")

    for name, kind, m, s, a, b, values in samples:
        if name.startswith("normal"):
            ref = stats.norm(loc=m, scale=s)
        elif name.startswith("trunc"):
            ref = stats.truncnorm(a, b, loc=m, scale=s)
            lo, hi = m + s * a, m + s * b
            check(values.min() >= lo and values.max() <= hi, f"{name}: a value outside [{lo}, {hi}]")
        else:
            ref = stats.uniform(loc=a, scale=b - a)
            check(values.min() >= a and values.max() < b, f"{name}: a value outside [{a}, {b})")
        p = stats.kstest(values, ref.cdf).pvalue
        print(f"{name} ({kind}, n = {len(values)}): kstest p = {p:.4f}")
        check(p >= 0.01, f"{name}: kstest p-value {p} < 0.01")

    print(f"compared {n_cdf} Phi, {n_ppf} Phi^-1, {n_std} truncated stddev values, "
          f"{len(f16_in)} float16/bfloat16 roundings, {len(samples)} samples")
    for f in failures[:40]:
        print("FAIL:", f)
    if failures:
        print(f"{len(failures)} failures")
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
