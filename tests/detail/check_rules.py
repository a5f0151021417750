"""Compare kindling's Gauss-Hermite rules and computed gains with numpy and scipy.

Usage: check_rules.py PROGRAM   (PROGRAM is kindling_gauss_hermite_print)

References (Debian python3-numpy, python3-scipy on this machine):
- numpy.polynomial.hermite_e.hermegauss(n): probabilists' Gauss-Hermite rule; its
  weights sum to sqrt(2 pi), ours to 1.  Tolerances: nodes 1e-13 * max(1, |x|),
  weights 1e-11 relative (numpy itself is accurate to a few 1e-15 relative).
- scipy.integrate.quad of phi(z)^2 and phi'(z)^2 against the normal density, split at
  0, for the forward gain 1/sqrt(E[phi^2]) and the backward gain 1/sqrt(E[phi'^2]);
  tolerance 1e-12 relative (quad's requested accuracy is 2e-14).
"""
import math
import subprocess
import sys

import numpy as np
from numpy.polynomial.hermite_e import hermegauss
from scipy import integrate, special

SELU_ALPHA = 1.6732632423543772848  # Klambauer et al. 2017
SELU_LAMBDA = 1.0507009873554804934


def activation(name, p):
    """Return (phi, phi') for one of kindling's activations."""
    sig = special.expit
    table = {
        "identity": (lambda z: z, lambda z: 1.0),
        "sigmoid": (sig, lambda z: sig(z) * (1 - sig(z))),
        "tanh": (math.tanh, lambda z: 1 - math.tanh(z) ** 2),
        "relu": (lambda z: max(z, 0.0), lambda z: 1.0 if z >= 0 else 0.0),
        "leaky_relu": (lambda z: z if z > 0 else p * z, lambda z: 1.0 if z >= 0 else p),
        "elu": (lambda z: z if z > 0 else p * math.expm1(z),
                lambda z: 1.0 if z >= 0 else p * math.exp(z)),
        "selu": (lambda z: SELU_LAMBDA * (z if z > 0 else SELU_ALPHA * math.expm1(z)),
                 lambda z: SELU_LAMBDA * (1.0 if z >= 0 else SELU_ALPHA * math.exp(z))),
        "gelu": (lambda z: 0.5 * z * special.erfc(-z / math.sqrt(2)),
                 lambda z: 0.5 * special.erfc(-z / math.sqrt(2))
                 + z * math.exp(-z * z / 2) / math.sqrt(2 * math.pi)),
        "silu": (lambda z: z * sig(z), lambda z: sig(z) * (1 + z * (1 - sig(z)))),
    }
    return table[name]


def normal_second_moment(f):
    pdf = lambda z: f(z) ** 2 * math.exp(-z * z / 2) / math.sqrt(2 * math.pi)
    lo = integrate.quad(pdf, -np.inf, 0, epsabs=0, epsrel=2e-14, limit=400)[0]
    hi = integrate.quad(pdf, 0, np.inf, epsabs=0, epsrel=2e-14, limit=400)[0]
    return lo + hi


def main():
    out = subprocess.run([sys.argv[1]], check=True, capture_output=True, text=True).stdout
    rules, gains = {}, []
    for line in out.splitlines():
        parts = line.split()
        if parts[0] == "rule":
            n = int(parts[1])
            rules.setdefault(n, []).append((float(parts[3]), float(parts[4])))
        elif parts[0] == "gain":
            gains.append((parts[1], *map(float, parts[2:])))
    failures = []
    for n, rows in sorted(rules.items()):
        x_ref, w_ref = hermegauss(n)
        w_ref = w_ref / math.sqrt(2 * math.pi)
        x = np.array([r[0] for r in rows])
        w = np.array([r[1] for r in rows])
        dx = np.max(np.abs(x - x_ref) / np.maximum(1.0, np.abs(x_ref)))
        dw = np.max(np.abs(w - w_ref) / w_ref)
        print(f"n={n:3d}: max node error {dx:.2e}, max relative weight error {dw:.2e}")
        if not (dx <= 1e-13 and dw <= 1e-11):
            failures.append(f"Gauss-Hermite n={n}: node error {dx:.3e}, weight error {dw:.3e}")
    if sorted(rules) != [1, 2, 3, 5, 10, 20, 33, 50, 64, 100, 128, 150, 200]:
        failures.append(f"unexpected rule sizes {sorted(rules)}")
    for name, p, fwd, bwd, table in gains:
        phi, dphi = activation(name, p)
        ref_fwd = 1 / math.sqrt(normal_second_moment(phi))
        ref_bwd = 1 / math.sqrt(normal_second_moment(dphi))
        print(f"{name}({p}): forward {fwd!r} vs {ref_fwd!r}, backward {bwd!r} vs {ref_bwd!r},"
              f" table {table!r}")
        for what, ours, ref in (("forward", fwd, ref_fwd), ("backward", bwd, ref_bwd)):
            if abs(ours - ref) > 1e-12 * ref:
                failures.append(f"{name}({p}) {what} gain {ours!r}, scipy {ref!r}")
        # Computed table entries must be the forward gain (elu, gelu, silu).
        if name in ("elu", "gelu", "silu") and abs(table - ref_fwd) > 1e-12 * ref_fwd:
            failures.append(f"{name}({p}) table gain {table!r}, scipy {ref_fwd!r}")
    if len(gains) != 10:
        failures.append(f"expected 10 gain lines, got {len(gains)}")
    for f in failures:
        print("FAIL:", f)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
