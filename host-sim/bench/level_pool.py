"""Baseline for host-sim/BENCH.md: level-pool routing of the demo pond through its fixed
(pre-retrofit) outlet, one plain Python loop iteration per 1-minute step.

Inputs come from `cargo run --release -p holdback-sim --example longrun -- CSV YEARS PREFIX`:
PREFIX.rating.csv (stage, storage, discharge of the fixed outlet, 2001 rows) and
PREFIX.inflow.csv (one year of 1-minute inflow from the same time-area convolution).

Method: the storage-indication form of level-pool routing (Chow, Maidment & Mays 1988,
Applied Hydrology, section 8.2): (2S2/dt + O2) = (I1 + I2) + (2S1/dt - O1), with O2 read from
the tabled relation between 2S/dt + O and O by linear interpolation (numpy.interp). The
routing loop is timed; reading the files is not.

    python3 host-sim/bench/level_pool.py PREFIX [YEARS_TO_REPEAT]
"""

import sys
import time

import numpy as np

prefix = sys.argv[1]
repeat = int(sys.argv[2]) if len(sys.argv) > 2 else 1
tab = np.loadtxt(prefix + ".rating.csv", delimiter=",", skiprows=1)
inflow = np.loadtxt(prefix + ".inflow.csv", skiprows=1)
dt = 60.0
storage, discharge = tab[:, 1], tab[:, 2]
indication = 2.0 * storage / dt + discharge  # monotone in stage

t0 = time.perf_counter()
o1, s1, i1 = 0.0, 0.0, 0.0
peak_s = 0.0
steps = 0
for _ in range(repeat):
    for i2 in inflow:
        rhs = i1 + i2 + 2.0 * s1 / dt - o1
        o2 = float(np.interp(rhs, indication, discharge))
        s2 = max(0.0, (rhs - o2) * dt / 2.0)
        if s2 > peak_s:
            peak_s = s2
        o1, s1, i1 = o2, s2, i2
        steps += 1
wall = time.perf_counter() - t0
print(
    f"python {np.__version__=} steps {steps} in {wall:.2f} s wall: "
    f"{steps * dt / wall:.3e} simulated s per wall s ({wall / steps * 1e9:.0f} ns per step); "
    f"peak storage {peak_s:.0f} m3"
)
