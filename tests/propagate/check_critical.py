"""Checks kindling's tanh critical points (edge of chaos) against scipy.

For sigma_b^2 > 0 the critical point solves, along the curve of fixed points q* of
the length map (Poole et al. 2016; Schoenholz et al. 2017),
    sigma_w^2(q) = (q - sigma_b^2) / E[tanh(sqrt(q) z)^2]
    chi(q)       = sigma_w^2(q) E[sech(sqrt(q) z)^4] = 1.
Here the expectations are scipy.integrate.quad over the normal density and the root
is scipy.optimize.brentq, independently of kindling's quadrature and bisection.
sigma_b^2 = 0 has the known answer sigma_w^2 = 1, q* = 0.
Usage: check_critical.py <kindling_propagate_print>
"""
import math
import subprocess
import sys

from scipy import integrate, optimize


def expect(f, q):
    s = math.sqrt(q)
    g = lambda z: f(s * z) * math.exp(-0.5 * z * z) / math.sqrt(2 * math.pi)
    return integrate.quad(g, -40, 40, epsabs=0, epsrel=1e-13, limit=400, points=[0.0])[0]


def chi_minus_one(q, sb2):
    sw2 = (q - sb2) / expect(lambda x: math.tanh(x) ** 2, q)
    return sw2 * expect(lambda x: 1.0 / math.cosh(x) ** 4, q) - 1.0, sw2


def critical(sb2):
    if sb2 == 0.0:
        return 1.0, 0.0
    base = max(sb2, 1.0)
    grid = [sb2 + base * 10 ** (k / 8) for k in range(-64, 65)]
    prev = None
    for q in grid:
        f = chi_minus_one(q, sb2)[0]
        if prev is not None and (prev[1] < 0) != (f < 0):
            root = optimize.brentq(lambda x: chi_minus_one(x, sb2)[0], prev[0], q, xtol=1e-15, rtol=1e-15)
            return chi_minus_one(root, sb2)[1], root
        prev = (q, f)
    raise RuntimeError("no sign change for sigma_b^2 = %r" % sb2)


def main():
    out = subprocess.run([sys.argv[1]], check=True, capture_output=True, text=True).stdout
    failures = 0
    lines = [l.split() for l in out.splitlines() if l.startswith("critical tanh")]
    assert len(lines) >= 5, "expected at least 5 critical points from the printer"
    for fields in lines:
        sb2, exists, sw2, q = float(fields[2]), fields[3] == "1", float(fields[4]), float(fields[5])
        ref_sw2, ref_q = critical(sb2)
        # Tolerance: quad at epsrel 1e-13 and brentq at 1e-15; both sides' expectations
        # are good to ~1e-13, and a root of a function with slope O(1) moves by as much.
        ok = exists and abs(sw2 - ref_sw2) <= 1e-9 * ref_sw2 and abs(q - ref_q) <= 1e-9 * max(ref_q, 1e-12)
        print("sigma_b^2 %-6g kindling sigma_w^2 %.15g q* %.15g | scipy %.15g %.15g %s"
              % (sb2, sw2, q, ref_sw2, ref_q, "ok" if ok else "MISMATCH"))
        failures += 0 if ok else 1
    sys.exit(1 if failures else 0)


if __name__ == "__main__":
    main()
