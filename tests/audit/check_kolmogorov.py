#!/usr/bin/python3
"""Compares kindling's Kolmogorov-Smirnov test with scipy (Debian python3-scipy).

- limit:  kolmogorov_limit_survival(x) against scipy.stats.kstwobign.sf(x), to 1e-10.
- pvalue: ks_p_value(n, d) against scipy.stats.kstwo.sf(d, n), the exact finite-n
          distribution: to 1e-5 relative on the exact path (Marsaglia-Tsang-Wang;
          scipy itself switches to the Pelz-Good series above n = 140, good to about
          5-6 digits, so closer agreement cannot be asked), and
          to 2% relative on the limiting path (Stephens' correction), where p > 1e-4.
- sample: statistic and p-value of samples against scipy.stats.kstest with the same
          CDF (norm, uniform, truncnorm); statistic to 1e-9, p-value as above.
Exits non-zero with every mismatch listed.
"""
import subprocess
import sys

from scipy import stats

out = subprocess.run([sys.argv[1]], check=True, capture_output=True, text=True).stdout
bad = []
counts = {"limit": 0, "pvalue": 0, "sample": 0}


def close(ours, ref, exact, what):
    if exact:
        ok = abs(ours - ref) <= 1e-5 * ref if ref > 1e-6 else abs(ours - ref) <= 1e-9
    else:
        ok = abs(ours - ref) <= 0.02 * ref + 1e-6 if ref > 1e-4 else abs(ours - ref) <= 1e-5
    if not ok:
        bad.append(f"{what}: ours {ours!r}, scipy {ref!r}")


for line in out.splitlines():
    f = line.split()
    kind = f[0]
    counts[kind] += 1
    if kind == "limit":
        x, ours = float(f[1]), float(f[2])
        ref = stats.kstwobign.sf(x)
        if abs(ours - ref) > 1e-10:
            bad.append(f"limit x={x}: ours {ours!r}, kstwobign {ref!r}")
    elif kind == "pvalue":
        n, d, ours, exact = int(f[1]), float(f[2]), float(f[3]), f[4] == "1"
        close(ours, stats.kstwo.sf(d, n), exact, f"pvalue n={n} d={d}")
    else:
        name, a, b, c, e = f[1], float(f[2]), float(f[3]), float(f[4]), float(f[5])
        stat, p, exact = float(f[6]), float(f[7]), f[8] == "1"
        values = [float(v) for v in f[9:]]
        if name == "norm":
            res = stats.kstest(values, "norm", args=(a, b), method="exact")
        elif name == "uniform":
            res = stats.kstest(values, "uniform", args=(a, b), method="exact")
        else:
            res = stats.kstest(values, "truncnorm", args=(a, b, c, e), method="exact")
        if abs(stat - res.statistic) > 1e-9:
            bad.append(f"sample {name} n={len(values)}: D ours {stat!r}, kstest {res.statistic!r}")
        close(p, res.pvalue, exact, f"sample {name} n={len(values)} D={stat}")

print(f"compared {counts['limit']} limiting values, {counts['pvalue']} p-values, {counts['sample']} samples")
if bad:
    print("\n".join(bad))
    sys.exit(1)
