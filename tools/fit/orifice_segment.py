"""Coefficients of the circular segment polynomial in core/src/hydraulics/orifice.rs.

The wetted area of a circle of diameter D filled to depth y is D²/8·(θ − sin θ) with
θ = 4·asin(√u), u = y/D (the segment of a circle; any handbook of plane geometry). For
0 ≤ u ≤ 1/2 the excess θ − sin θ equals u^1.5·g(u) with g analytic on |u| < 1 (its Taylor
series starts 32/3 + 16/5·u + ...). This script fits g on [0, 1/2] by Chebyshev
interpolation (numpy) of values computed at 50 digits (mpmath), converts the fit to powers of
u, and checks the polynomial, evaluated the way the Rust code does (second-order Horner in
the order of `segment_g`, f32 coefficients, f32 arithmetic emulated with numpy.float32; Horner is
printed beside it), against mpmath on 20,001 points: the largest relative error is printed
and must stay under 3e-7 (a few f32 ulp).

    python3 tools/fit/orifice_segment.py      # numpy 2.4.6, mpmath 1.3.0 when last run
"""

import mpmath as mp
import numpy as np
from numpy.polynomial import chebyshev as C

mp.mp.dps = 50
DEGREE = 11
HALF = mp.mpf(1) / 2


def g(u):
    """(θ − sin θ)/u^1.5 at 50 digits, its limit 32/3 at u = 0."""
    u = mp.mpf(u)
    if u == 0:
        return mp.mpf(32) / 3
    t = 4 * mp.asin(mp.sqrt(u))
    return (t - mp.sin(t)) / u**mp.mpf(1.5)


# Chebyshev points of the second kind on [0, 1/2], as x in [-1, 1].
n = 200
x = np.cos(np.pi * np.arange(n + 1) / n)
u = (x + 1) / 4
vals = np.array([float(g(mp.mpf(float(ui)))) for ui in u])
cheb = C.chebfit(x, vals, DEGREE)
# x = 4u − 1: power series in u.
power_x = C.cheb2poly(cheb)
power_u = np.zeros(DEGREE + 1)
for k, c in enumerate(power_x):
    # (4u − 1)^k expanded.
    term = np.polynomial.polynomial.polypow([-1.0, 4.0], k)
    power_u[: len(term)] += c * term
coef32 = power_u.astype(np.float32)


def horner32(v):
    v = np.float32(v)
    acc = np.float32(coef32[-1])
    for c in coef32[-2::-1]:
        acc = np.float32(np.float32(acc * v) + c)
    return acc


def horner_list32(cs, v):
    acc = cs[-1]
    for c in cs[-2::-1]:
        acc = np.float32(np.float32(acc * v) + c)
    return acc


def second_order32(v):
    """The order of `segment_g` in orifice.rs (even and odd Horner sums in v², then
    even + v·odd), every operation rounded to f32."""
    v = np.float32(v)
    w = np.float32(v * v)
    even = horner_list32(coef32[0::2], w)
    odd = horner_list32(coef32[1::2], w)
    return np.float32(even + np.float32(v * odd))


worst = {"Horner": 0.0, "second-order Horner": 0.0}
for ui in np.linspace(0.0, 0.5, 20001):
    want = g(mp.mpf(float(np.float32(ui))))
    for name, fn in (("Horner", horner32), ("second-order Horner", second_order32)):
        got = fn(np.float32(ui))
        err = abs(float((mp.mpf(float(got)) - want) / want))
        worst[name] = max(worst[name], err)
print(f"numpy {np.__version__}, mpmath {mp.__version__}, degree {DEGREE}")
for name, w in worst.items():
    print(f"largest relative error of g in f32 {name} on [0, 1/2]: {w:.3e}")
assert worst["second-order Horner"] < 3e-7, worst
print("const SEGMENT_G: [f32; %d] = [" % (DEGREE + 1))
for c in coef32:
    print(f"    {float(c)!r},")
print("];")
