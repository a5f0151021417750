#!/usr/bin/python3
"""Prints the constants of include/kindling/detail/dmath.hpp as C++ hex-float literals.

Every polynomial there is a truncated Taylor series (exact rational or pi-power
coefficients, rounded once to the target type), so this script is the whole
derivation: run it with /usr/bin/python3 (standard library and numpy) and compare.
"""
from decimal import Decimal as D, getcontext
from math import factorial

import numpy as np

getcontext().prec = 60


def machin_pi():
    """pi = 16 atan(1/5) - 4 atan(1/239) (Machin 1706), in 60-digit decimals."""
    def atan_inv(n):
        x, total, k = D(1) / n, D(0), 0
        term = x
        while term != 0:
            total += term / (2 * k + 1) * (-1) ** k
            k += 1
            term = x ** (2 * k + 1)
            if term < D(10) ** -70:
                break
        return total
    return 16 * atan_inv(5) - 4 * atan_inv(239)


PI = machin_pi()


def hexd(x):
    return float(x).hex()


def hexf(x):
    return float(np.float32(float(x))).hex()


def split(x, keep_bits):
    """x = hi + lo with hi holding keep_bits significant bits (so k * hi is exact)."""
    e = int(np.floor(np.log2(float(x))))
    scale = D(2) ** (keep_bits - 1 - e)
    hi = (x * scale).to_integral_value(rounding="ROUND_FLOOR") / scale
    return hi, x - hi


ln2 = D(2).ln()
hi, lo = split(ln2, 32)
print("ln2 double hi/lo:", hexd(hi), hexd(lo))
hi, lo = split(ln2, 12)
print("ln2 float  hi/lo:", hexf(hi), hexf(lo))
print("1/ln2:", hexd(1 / ln2))

# log: log(1+f) = 2 atanh(s), s = f/(2+f); R(z) = sum_{j>=1} 2/(2j+1) z^j, z = s^2
print("log R coefficients (2/(2j+1)), j = 1..9:", [hexd(D(2) / (2 * j + 1)) for j in range(1, 10)])
print("log R float, j = 1..4:", [hexf(D(2) / (2 * j + 1)) for j in range(1, 5)])

# sin(pi t / 2) = t * S(t^2), cos(pi t / 2) = C(t^2), |t| <= 1/2
h = PI / 2
S = [(-1) ** k * h ** (2 * k + 1) / D(factorial(2 * k + 1)) for k in range(9)]
C = [(-1) ** k * h ** (2 * k) / D(factorial(2 * k)) for k in range(9)]
print("sin double k=0..8:", [hexd(c) for c in S])
print("cos double k=0..8:", [hexd(c) for c in C])
print("sin float k=0..4:", [hexf(c) for c in S[:5]])
print("cos float k=0..5:", [hexf(c) for c in C[:6]])

# exp(r) = sum r^n / n!, |r| <= ln2/2, n = 0..13
print("exp 1/n! n=0..13:", [hexd(D(1) / factorial(n)) for n in range(14)])

print("1/sqrt(2):", hexd(1 / D(2).sqrt()), " 1/sqrt(2 pi):", hexd(1 / (2 * PI).sqrt()),
      " 1/sqrt(pi):", hexd(1 / PI.sqrt()))
