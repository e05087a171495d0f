"""Copies three storms of Singapore gauge S117 out of the shared recorded-rain file, rows unchanged.

Input: sg_nea_5min_rainfall_2016-12_2017-06_12stations.csv.gz (see README.md for origin and licence).
Each span runs from one hour before the storm's first wet interval to one hour after its last.
"""
import csv, gzip, sys

SRC = sys.argv[1] if len(sys.argv) > 1 else "/work/shared/data/rain/sg_nea_5min_rainfall_2016-12_2017-06_12stations.csv.gz"
SPANS = [  # (from, to) in SGT, string comparison on the source's own timestamp text
    ("2017-01-01 12:29:59", "2017-01-01 20:15:00"),
    ("2017-04-14 12:19:59", "2017-04-14 16:20:00"),
    ("2017-05-22 05:40:00", "2017-05-22 11:10:00"),
]
with gzip.open(SRC, "rt") as f, open("sg_s117_storms.csv", "w", newline="") as out:
    r = csv.reader(f)
    w = csv.writer(out, lineterminator="\n")
    w.writerow(next(r))
    for row in r:
        if row[0] == "S117" and any(a <= row[2] <= b for a, b in SPANS):
            w.writerow(row)
