"""Independent reference for the interval-rain path: storm depths and maximum sliding-window
depths of the S117 excerpt, by pandas time-based rolling sums.

Method (no project code involved): timestamps are rounded to the nearest 5 minutes (the source
stamps readings at hh:m4:59 or hh:m5:00, the interval's end); storms are runs of wet intervals
separated by at least 6 h with no rain; for each storm and each window W the maximum over the
interval ends t of the sum of the 5-min totals stamped in (t - W, t] (pandas `rolling(W)` on a
time index, which is closed on the right), and the intensity 60/W_min times that depth in mm/h.
"""
import sys
import numpy as np
import pandas as pd

src = "../../data/rain/sg_s117_storms.csv"
d = pd.read_csv(src)
d["t"] = pd.to_datetime(d["timestamp_sgt"]).dt.round("5min")
d = d.set_index("t").sort_index()
wet = d[d["value"] > 0]
gap = wet.index.to_series().diff() >= pd.Timedelta(hours=6)
storm_of_wet = gap.cumsum()
windows_min = [5, 10, 15, 30, 45, 60]
print(f"# script: tests/reference/rain/sg_s117_windows.py; pandas {pd.__version__}, numpy {np.__version__}")
print("# method: pandas time-based rolling sum (closed right) of the 5-min totals after rounding stamps to 5 min; storms split by >= 6 h dry")
print("# formula source: intensity_mm_h = depth_mm / window_min * 60 (definition of mean intensity over a window)")
print("storm,start_end_s,last_end_s,depth_mm,window_min,max_depth_mm,max_intensity_mm_h")
epoch = pd.Timestamp("2017-01-01 00:00:00")
for k, g in wet.groupby(storm_of_wet):
    t0, t1 = g.index[0], g.index[-1]
    span = d.loc[t0 - pd.Timedelta(hours=1): t1 + pd.Timedelta(hours=1), "value"]
    for w in windows_min:
        r = span.rolling(f"{w}min").sum()
        m = float(r.max())
        print(f"{k},{int((t0 - epoch).total_seconds())},{int((t1 - epoch).total_seconds())},"
              f"{g['value'].sum():.6f},{w},{m:.6f},{m / w * 60.0:.6f}")
