#!/usr/bin/env python3
"""Reference level-pool routing of a nonlinear pond by a general-purpose ODE solver.

Writes pond_ode.csv beside this script. Run: python3 pond_ode.py

Pond (a test case, chosen here; not survey data): a rectangular-bottomed basin with uniform
side slopes, floor at 100.0 m, bottom 40 m x 20 m, side slope 3:1 (H:V), 2.5 m deep.
  area   A(y) = (L + 2zy)(W + 2zy)
  volume V(y) = L W y + (L + W) z y^2 + 4/3 z^2 y^3   (prismoidal formula, exact for this shape)
Outlet: a circular orifice (Torricelli / orifice equation Q = Cd a sqrt(2 g (h - z_c)),
d = 0.30 m, Cd = 0.61, centroid z_c = 100.15 m) plus a rectangular weir
(Q = Cw L_w (h - crest)^1.5, Cw = 1.70 m^0.5/s, L_w = 3.0 m, crest = 101.80 m).
Inflow: triangular hydrograph, 0 at t = 0, peak 1.5 m3/s at t = 1800 s, back to 0 at 5400 s.
Start: water at the orifice centroid (no flow).

Continuity: dS/dt = I(t) - Q(h), solved for the stage h with dh/dt = (I - Q(h)) / A(h),
together with the released volume R, dR/dt = Q(h).

Self-checks written into the header:
  1. a run at rtol 1e-12 against the recorded run (rtol 1e-10): max stage difference;
  2. mass balance V(h(t)) - V(h0) - int_0^t I + R(t) along the run, which also checks that
     the V(y) polynomial is the integral of A(y) (the solver only ever sees A).
"""
import math
import pathlib

import numpy as np
import scipy
from scipy.integrate import solve_ivp

G = 9.80665
FLOOR, L, W, Z, DEPTH = 100.0, 40.0, 20.0, 3.0, 2.5
CD, D_ORF, ZC = 0.61, 0.30, 100.15
A_ORF = math.pi * D_ORF**2 / 4.0
CW, LW, CREST = 1.70, 3.0, 101.80
QP, TP, TB = 1.5, 1800.0, 5400.0
T_END, DT_OUT = 14400.0, 60.0


def area(h):
    y = max(h - FLOOR, 0.0)
    return (L + 2 * Z * y) * (W + 2 * Z * y)


def volume(h):
    y = max(h - FLOOR, 0.0)
    return L * W * y + (L + W) * Z * y**2 + 4.0 / 3.0 * Z**2 * y**3


def outflow(h):
    q = 0.0
    if h > ZC:
        q += CD * A_ORF * math.sqrt(2 * G * (h - ZC))
    if h > CREST:
        q += CW * LW * (h - CREST) ** 1.5
    return q


def inflow(t):
    if t <= 0 or t >= TB:
        return 0.0
    return QP * t / TP if t <= TP else QP * (TB - t) / (TB - TP)


def inflow_volume(t):
    """Closed-form integral of the triangle from 0 to t."""
    if t <= 0:
        return 0.0
    if t <= TP:
        return 0.5 * QP * t * t / TP
    if t <= TB:
        rem = TB - t
        return 0.5 * QP * TB - 0.5 * QP * rem * rem / (TB - TP)
    return 0.5 * QP * TB


def rhs(t, x):
    h = x[0]
    q = outflow(h)
    return [(inflow(t) - q) / area(h), q]


def run(rtol):
    t_eval = np.arange(0.0, T_END + 0.5 * DT_OUT, DT_OUT)
    # Split at the hydrograph's kinks so the solver never steps across one.
    pieces = [(0.0, TP), (TP, TB), (TB, T_END)]
    x = [ZC, 0.0]
    ts, hs, rs = [], [], []
    for a, b in pieces:
        te = t_eval[(t_eval >= a) & (t_eval <= b)]
        sol = solve_ivp(rhs, (a, b), x, method="DOP853", rtol=rtol, atol=rtol * 1e-2,
                        t_eval=te, dense_output=False)
        assert sol.success, sol.message
        for t, h, r in zip(sol.t, sol.y[0], sol.y[1]):
            if ts and t == ts[-1]:
                continue
            ts.append(t); hs.append(h); rs.append(r)
        x = [sol.y[0][-1], sol.y[1][-1]]
    return np.array(ts), np.array(hs), np.array(rs)


def main():
    t, h, r = run(1e-10)
    t2, h2, _ = run(1e-12)
    assert np.allclose(t, t2)
    tight = float(np.max(np.abs(h - h2)))
    v0 = volume(ZC)
    balance = max(abs(volume(hh) - v0 - inflow_volume(tt) + rr) for tt, hh, rr in zip(t, h, r))
    assert tight < 1e-7, tight
    assert balance < 1e-4, balance
    assert h.max() < FLOOR + DEPTH, "reference must stay inside the basin"
    out = pathlib.Path(__file__).with_name("pond_ode.csv")
    with out.open("w") as f:
        f.write("# script: tests/reference/routing/pond_ode.py\n")
        f.write(f"# library: scipy {scipy.__version__} (solve_ivp, DOP853, rtol 1e-10), numpy {np.__version__}\n")
        f.write("# formulas: continuity dS/dt = I - Q; prismoidal basin volume; orifice equation "
                "Q = Cd a sqrt(2 g (h - z_c)); rectangular weir Q = Cw L (h - crest)^1.5\n")
        f.write(f"# pond: floor {FLOOR} m, {L} x {W} m bottom, side slope {Z}:1, depth {DEPTH} m; "
                f"orifice d {D_ORF} m Cd {CD} centroid {ZC} m; weir Cw {CW} L {LW} m crest {CREST} m; "
                f"g {G}\n")
        f.write(f"# inflow: triangle 0 -> {QP} m3/s at {TP} s -> 0 at {TB} s; start stage {ZC} m\n")
        f.write(f"# self-check: max |stage(rtol 1e-10) - stage(rtol 1e-12)| = {tight:.3e} m; "
                f"max mass-balance residual = {balance:.3e} m3\n")
        f.write("t_s,inflow_m3s,stage_m,storage_m3,outflow_m3s,released_m3\n")
        for tt, hh, rr in zip(t, h, r):
            f.write(f"{tt:.1f},{inflow(tt):.9g},{hh:.9f},{volume(hh):.9g},{outflow(hh):.9g},{rr:.9g}\n")
    print(f"wrote {out}: {len(t)} rows, peak stage {h.max():.4f} m, tight {tight:.2e}, balance {balance:.2e}")


if __name__ == "__main__":
    main()
