#!/usr/bin/env python3
"""Reference peak storages of modified-rational design hydrographs routed through a pond,
by a general-purpose ODE solver, for a range of rain durations.

Writes routed_storage.csv beside this script. Run: python3 routed_storage.py

Case (test inputs chosen here; not survey or design data):
  IDF: Talbot i = a / (t + b), a = 3000 mm/h.min, b = 15 min (t in min, i in mm/h).
  Catchment: one part, C = 0.6, A = 4.0 ha, Tc = 900 s, no lag.
  Inflow (modified rational): Qe = C i A / 360 m3/s (i mm/h, A ha; 1 mm/h on 1 ha = 1/360
  m3/s); with m = min(Tr, Tc): Q(t) = Qe (m/Tc) min(t, Tr + Tc - t, m)/m on [0, Tr + Tc].
  Pond: basin floor 100.0 m, bottom 30 m x 15 m, side slope 3:1 (H:V), 2.5 m deep;
    area A(y) = (L + 2zy)(W + 2zy), volume V(y) = L W y + (L + W) z y^2 + 4/3 z^2 y^3
    (prismoidal formula, exact for this shape). Starts empty (stage 100.0 m).
  Outlet: orifice equation Q = Cd a sqrt(2 g (h - z_c)), d = 0.30 m, Cd = 0.61,
    centroid z_c = 100.15 m, g = 9.80665 m/s2.
  Releases: 'capped' = min(permit, orifice) with permit 0.15 m3/s (a perfect controller
    limited by the outlet's capacity); 'orifice' = the orifice alone (gate held open).
Continuity: dS/dt = I(t) - Q(h), integrated in the stage, dh/dt = (I - Q(h)) / A(h), with
the released volume R, dR/dt = Q(h); integration restarts at every corner of I(t).
Peak storage: the largest V(h) sampled every 1 s (dS/dt = 0 at the peak, so sampling costs
< 1e-3 m3).

Self-checks (asserted, and written into the header):
  1. a run at rtol 1e-12 against the recorded run (rtol 1e-10): max peak-storage difference;
  2. mass balance V(h(t)) - V(h0) - int_0^t I + R(t) at every sample, which also checks that
     V(y) is the integral of A(y) (the solver only sees A).
"""
import math
import pathlib

import numpy as np
import scipy
from scipy.integrate import solve_ivp

G = 9.80665
A_IDF, B_IDF = 3000.0, 15.0
C, AREA_HA, TC = 0.6, 4.0, 900.0
FLOOR, L, W, Z, DEPTH = 100.0, 30.0, 15.0, 3.0, 2.5
CD, D_ORF, ZC = 0.61, 0.30, 100.15
A_ORF = math.pi * D_ORF**2 / 4.0
PERMIT = 0.15
DURATIONS = list(range(600, 7201, 300))


def area(h):
    y = max(h - FLOOR, 0.0)
    return (L + 2 * Z * y) * (W + 2 * Z * y)


def volume(h):
    y = max(h - FLOOR, 0.0)
    return L * W * y + (L + W) * Z * y**2 + 4.0 / 3.0 * Z**2 * y**3


def orifice(h):
    return CD * A_ORF * math.sqrt(2 * G * (h - ZC)) if h > ZC else 0.0


RELEASES = {"capped": lambda h: min(PERMIT, orifice(h)), "orifice": orifice}


def hydrograph(tr):
    i = A_IDF / (tr / 60.0 + B_IDF)
    qe = C * i * AREA_HA / 360.0
    m = min(tr, TC)
    base = tr + TC
    peak = qe * m / TC

    def q(t):
        if t <= 0 or t >= base:
            return 0.0
        return peak * min(t, base - t, m) / m

    def vol(t):
        """Closed-form integral of q from 0 to t (trapezoid: rise m, plateau, fall m)."""
        t = min(max(t, 0.0), base)
        v = 0.5 * peak * min(t, m) ** 2 / m
        if t > m:
            v += peak * (min(t, base - m) - m)
        if t > base - m:
            r = base - t
            v += 0.5 * peak * m - 0.5 * peak * r * r / m
        return v

    corners = sorted({0.0, float(m), float(base - m), float(base)})
    return i, qe, q, vol, corners


def route(tr, release, rtol):
    i, qe, q, vol, corners = hydrograph(tr)

    def rhs(t, x):
        o = release(x[0])
        return [(q(t) - o) / area(x[0]), o]

    x = [FLOOR, 0.0]
    best = (volume(FLOOR), FLOOR, 0.0)
    balance = 0.0
    for a, b in zip(corners[:-1], corners[1:]):
        te = np.arange(a, b, 1.0)
        te = np.append(te, b)
        sol = solve_ivp(rhs, (a, b), x, method="DOP853", rtol=rtol, atol=rtol * 1e-2,
                        t_eval=te)
        assert sol.success, sol.message
        for t, h, r in zip(sol.t, sol.y[0], sol.y[1]):
            v = volume(h)
            balance = max(balance, abs(v - volume(FLOOR) - vol(t) + r))
            if v > best[0]:
                best = (v, h, t)
        x = [sol.y[0][-1], sol.y[1][-1]]
    return i, qe, vol(corners[-1]), best, balance


def main():
    rows = []
    tight = 0.0
    worst_balance = 0.0
    for name, rel in RELEASES.items():
        for tr in DURATIONS:
            i, qe, vin, (s, h, t), bal = route(tr, rel, 1e-10)
            _, _, _, (s2, _, _), _ = route(tr, rel, 1e-12)
            tight = max(tight, abs(s - s2))
            worst_balance = max(worst_balance, bal)
            assert h < FLOOR + DEPTH, "reference must stay inside the basin"
            rows.append((0 if name == "capped" else 1, tr, i, qe, vin, s, h, t))
    assert tight < 1e-4, tight
    assert worst_balance < 1e-4, worst_balance
    out = pathlib.Path(__file__).with_name("routed_storage.csv")
    with out.open("w") as f:
        f.write("# script: tests/reference/sizing/routed_storage.py\n")
        f.write(f"# library: scipy {scipy.__version__} (solve_ivp, DOP853, rtol 1e-10, atol 1e-12), "
                f"numpy {np.__version__}\n")
        f.write("# formulas: continuity dS/dt = I - Q; modified-rational trapezoid, Qe = C i A / 360; "
                "Talbot i = a/(t+b); prismoidal basin volume; orifice equation Q = Cd a sqrt(2 g (h - z_c))\n")
        f.write(f"# case: Talbot a {A_IDF} b {B_IDF} min; C {C}, A {AREA_HA} ha, Tc {TC} s; basin floor "
                f"{FLOOR} m, {L} x {W} m, side {Z}:1, depth {DEPTH} m, empty at start; orifice d {D_ORF} m "
                f"Cd {CD} centroid {ZC} m; g {G}; permit {PERMIT} m3/s\n")
        f.write("# release: 0 = min(permit, orifice), 1 = orifice alone\n")
        f.write(f"# self-check: max |peak storage(rtol 1e-10) - (rtol 1e-12)| = {tight:.3e} m3; "
                f"max mass-balance residual = {worst_balance:.3e} m3\n")
        f.write("release,duration_s,intensity_mm_h,equilibrium_m3s,inflow_volume_m3,"
                "peak_storage_m3,peak_stage_m,peak_time_s\n")
        for r in rows:
            f.write(f"{r[0]},{r[1]},{r[2]:.9g},{r[3]:.9g},{r[4]:.9g},{r[5]:.9g},{r[6]:.9f},{r[7]:.1f}\n")
    print(f"wrote {out}: {len(rows)} rows, tight {tight:.2e}, balance {worst_balance:.2e}")


if __name__ == "__main__":
    main()
